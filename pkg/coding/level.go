package coding

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"

	"go.yaml.in/yaml/v3"

	"sluice/pkg/metric"
)

// Level is a window's class for one metric.
type Level uint8

// The levels, in increasing severity.
const (
	Normal Level = iota
	Elevated
	Critical
)

// String returns the level's name as used in the API and labels.
func (l Level) String() string {
	switch l {
	case Normal:
		return "normal"
	case Elevated:
		return "elevated"
	case Critical:
		return "critical"
	}
	return fmt.Sprintf("level(%d)", uint8(l))
}

// MarshalText encodes the level by name.
func (l Level) MarshalText() ([]byte, error) { return []byte(l.String()), nil }

// UnmarshalText decodes a level name.
func (l *Level) UnmarshalText(b []byte) error {
	for _, c := range []Level{Normal, Elevated, Critical} {
		if c.String() == string(b) {
			*l = c
			return nil
		}
	}
	return fmt.Errorf("unknown level %q", b)
}

// Cut is the pair of cut points of one metric, in the metric's rate unit
// (bytes/s or ops/s per node).
type Cut struct {
	Elevated float64 `json:"elevated"`
	Critical float64 `json:"critical"`
}

// Cuts holds one Cut per metric.
type Cuts [metric.Count]Cut

// IdleBytesPerSecond and IdleOpsPerSecond are the rates below which a
// metric is treated as idle on a node (common practice, see package doc).
const (
	IdleBytesPerSecond = 10e3
	IdleOpsPerSecond   = 1
)

// DefaultCuts returns the seed cut points, per node (common practice
// rules of thumb; see the package doc and the README's table).
func DefaultCuts() Cuts {
	var c Cuts
	set := func(id metric.ID, elevated, critical float64) { c[id] = Cut{elevated, critical} }
	set(metric.ReadBytes, 1e9, 3e9)
	set(metric.WriteBytes, 1e9, 3e9)
	set(metric.ReadOps, 2000, 20000)
	set(metric.WriteOps, 2000, 20000)
	set(metric.Opens, 200, 2000)
	set(metric.Closes, 200, 2000)
	set(metric.Creates, 100, 1000)
	set(metric.Removes, 100, 1000)
	set(metric.StatOps, 1000, 10000)
	set(metric.MetaUpdates, 100, 1000)
	set(metric.Syncs, 50, 500)
	set(metric.OtherOps, 1000, 10000)
	return c
}

// Validate checks that every cut is positive and elevated <= critical.
func (c Cuts) Validate() error {
	for i, cut := range c {
		id := metric.ID(i)
		if !(cut.Elevated > 0) || !(cut.Critical > 0) { // also refuses NaN
			return fmt.Errorf("cut points for %s must be positive, got elevated %g critical %g", id, cut.Elevated, cut.Critical)
		}
		if cut.Elevated > cut.Critical {
			return fmt.Errorf("cut points for %s: elevated %g is above critical %g", id, cut.Elevated, cut.Critical)
		}
	}
	return nil
}

// Classify returns the level of rate for metric id.
func (c Cuts) Classify(id metric.ID, rate float64) Level {
	switch cut := c[id]; {
	case rate > cut.Critical:
		return Critical
	case rate > cut.Elevated:
		return Elevated
	}
	return Normal
}

// IsIdle reports whether rate is below the idle floor of metric id.
func IsIdle(id metric.ID, rate float64) bool { return rate < Floor(id) }

// Floor is the idle floor of metric id: IdleBytesPerSecond for byte
// metrics, IdleOpsPerSecond for the others.
func Floor(id metric.ID) float64 {
	if id.IsBytes() {
		return IdleBytesPerSecond
	}
	return IdleOpsPerSecond
}

// Levels holds one level per metric.
type Levels [metric.Count]Level

// MarshalJSON writes levels as an object keyed by metric name.
func (ls Levels) MarshalJSON() ([]byte, error) {
	m := make(map[string]string, metric.Count)
	for i, l := range ls {
		m[metric.ID(i).String()] = l.String()
	}
	return json.Marshal(m)
}

// UnmarshalJSON reads the object MarshalJSON writes.
func (ls *Levels) UnmarshalJSON(b []byte) error {
	var m map[string]Level
	if err := json.Unmarshal(b, &m); err != nil {
		return fmt.Errorf("levels: %w", err)
	}
	*ls = Levels{}
	for name, l := range m {
		id, err := metric.Parse(name)
		if err != nil {
			return fmt.Errorf("levels: %w", err)
		}
		ls[id] = l
	}
	return nil
}

// Max returns the highest level.
func (ls Levels) Max() Level {
	var m Level
	for _, l := range ls {
		m = max(m, l)
	}
	return m
}

// LoadCuts reads YAML cut point overrides and lays them over base:
//
//	creates: {elevated: 50, critical: 400}
//	write_bytes: {elevated: 2e9, critical: 5e9}
//
// Every metric named must exist and both cuts must be given; the result
// is validated.
func LoadCuts(r io.Reader, base Cuts) (Cuts, error) {
	var raw map[string]struct {
		Elevated *float64 `yaml:"elevated"`
		Critical *float64 `yaml:"critical"`
	}
	dec := yaml.NewDecoder(r)
	dec.KnownFields(true)
	if err := dec.Decode(&raw); err != nil && !errors.Is(err, io.EOF) {
		return base, fmt.Errorf("cut points: %w", err)
	}
	for name, c := range raw {
		id, err := metric.Parse(name)
		if err != nil {
			return base, fmt.Errorf("cut points: %w", err)
		}
		if c.Elevated == nil || c.Critical == nil {
			return base, fmt.Errorf("cut points for %s: give both elevated and critical", name)
		}
		base[id] = Cut{Elevated: *c.Elevated, Critical: *c.Critical}
	}
	if err := base.Validate(); err != nil {
		return base, fmt.Errorf("cut points: %w", err)
	}
	return base, nil
}
