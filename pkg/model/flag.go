package model

import (
	"fmt"
	"strings"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// ReasonKind says what raised a flag.
type ReasonKind uint8

// The kinds of reason.
const (
	// HighRate is a job's live rate of one metric above the metric's
	// critical cut point.
	HighRate ReasonKind = iota + 1
	// PatternMatch is a job matching a problem pattern.
	PatternMatch
)

// Reason says why a flag was raised: a metric's rate above its critical
// cut, or a pattern's match. Its text form is "high_rate:<metric>" or
// "pattern:<name>"; it is comparable, so it keys maps.
type Reason struct {
	Kind    ReasonKind
	Metric  metric.ID // for HighRate
	Pattern string    // for PatternMatch
}

// HighRateOf is the reason of a flag on metric id's rate.
func HighRateOf(id metric.ID) Reason { return Reason{Kind: HighRate, Metric: id} }

// PatternOf is the reason of a flag on a match of the named pattern.
func PatternOf(name string) Reason { return Reason{Kind: PatternMatch, Pattern: name} }

// String returns the reason's text form.
func (r Reason) String() string {
	switch r.Kind {
	case HighRate:
		return "high_rate:" + r.Metric.String()
	case PatternMatch:
		return "pattern:" + r.Pattern
	}
	return "unknown"
}

// MarshalText encodes the reason in its text form.
func (r Reason) MarshalText() ([]byte, error) { return []byte(r.String()), nil }

// UnmarshalText decodes the text form. "critical:<metric>", what state
// files of schema 1 call a high rate, is read as high_rate.
func (r *Reason) UnmarshalText(b []byte) error {
	got, err := ParseReason(string(b))
	if err != nil {
		return err
	}
	*r = got
	return nil
}

// ParseReason reads a reason's text form.
func ParseReason(s string) (Reason, error) {
	kind, arg, ok := strings.Cut(s, ":")
	switch {
	case !ok || arg == "":
	case kind == "high_rate" || kind == "critical":
		id, err := metric.Parse(arg)
		if err != nil {
			return Reason{}, fmt.Errorf("reason %q: %w", s, err)
		}
		return HighRateOf(id), nil
	case kind == "pattern":
		return PatternOf(arg), nil
	}
	return Reason{}, fmt.Errorf("reason %q: want high_rate:<metric> or pattern:<name>", s)
}

// Severity ranks a flag: what a pattern says of itself, or warning for a
// high rate.
type Severity uint8

// The severities, in increasing order.
const (
	SeverityInfo Severity = iota
	SeverityWarning
	SeverityCritical
)

var severityNames = [...]string{SeverityInfo: "info", SeverityWarning: "warning", SeverityCritical: "critical"}

// String returns the severity's name.
func (s Severity) String() string {
	if int(s) < len(severityNames) {
		return severityNames[s]
	}
	return fmt.Sprintf("severity(%d)", uint8(s))
}

// MarshalText encodes the severity by name.
func (s Severity) MarshalText() ([]byte, error) { return []byte(s.String()), nil }

// UnmarshalText decodes a severity name.
func (s *Severity) UnmarshalText(b []byte) error {
	if err := parseName(b, severityNames[:], s, "severity"); err != nil {
		return fmt.Errorf("%w; want info, warning or critical", err)
	}
	return nil
}

// ParseSeverity reads a severity name.
func ParseSeverity(name string) (Severity, error) {
	var s Severity
	err := s.UnmarshalText([]byte(name))
	return s, err
}

// FlagState is where a flag stands for the people it may page.
type FlagState uint8

// The flag states.
const (
	// FlagActive is raised, not cleared and not silenced: exported.
	FlagActive FlagState = iota
	// FlagSilenced is raised and not cleared, but a silence covers it: it
	// is listed and not exported.
	FlagSilenced
	// FlagCleared is over.
	FlagCleared
)

var flagStateNames = [...]string{FlagActive: "active", FlagSilenced: "silenced", FlagCleared: "cleared"}

// String returns the state's name.
func (s FlagState) String() string {
	if int(s) < len(flagStateNames) {
		return flagStateNames[s]
	}
	return fmt.Sprintf("flagstate(%d)", uint8(s))
}

// MarshalText encodes the state by name.
func (s FlagState) MarshalText() ([]byte, error) { return []byte(s.String()), nil }

// UnmarshalText decodes a state name.
func (s *FlagState) UnmarshalText(b []byte) error {
	return parseName(b, flagStateNames[:], s, "flag state")
}

// ParseFlagState reads a state name.
func ParseFlagState(name string) (FlagState, error) {
	var s FlagState
	err := s.UnmarshalText([]byte(name))
	return s, err
}

// Flag is a finding about a running job: why, since when, how strong.
//
// A high-rate flag has Metric, Level, Value, Peak and Cut set. A pattern
// flag has Title, Score, Advice and Drivers set; its Metric, Value and Cut
// are the first driver's.
type Flag struct {
	// ID is short and unique: the job id, a dash and the job's count of
	// flags raised so far ("81234-2").
	ID     string       `json:"id"`
	Job    string       `json:"job"`
	Reason Reason       `json:"reason"`
	Metric metric.ID    `json:"metric"`
	Level  coding.Level `json:"level"`
	// Pattern is the matched pattern's name; empty on a high-rate flag.
	Pattern string `json:"pattern,omitempty"`
	// Title is the pattern's short title, e.g. "Metadata storm".
	Title string `json:"title,omitempty"`
	// Score is the match score, 0..1, of the latest evaluation while the
	// flag is active; 1 for a high-rate flag.
	Score float64 `json:"score"`
	// Severity ranks the flag: the pattern's own, or warning for a high
	// rate.
	Severity Severity `json:"severity"`
	// Advice is the pattern's advice for on-call staff.
	Advice string `json:"advice,omitempty"`
	// Drivers are the metrics behind the match, with their values against
	// the cut points in force when it was raised.
	Drivers []Driver `json:"drivers,omitempty"`
	// Summary is a short text fixed when the flag is raised, e.g.
	// "Metadata storm on 4 nodes"; it holds nothing that changes later.
	Summary string `json:"summary"`
	// State is decided when the flag is listed or exported (silences and
	// acknowledgements are not stored in the flag).
	State FlagState `json:"state"`
	// Ack is set once someone has acknowledged the flag.
	Ack    *Ack      `json:"ack,omitempty"`
	Value  float64   `json:"value"` // per-node rate when raised (latest while active)
	Peak   float64   `json:"peak"`  // highest per-node rate while active
	Cut    float64   `json:"cut"`   // the cut point crossed
	Nodes  int       `json:"nodes"` // nodes reporting when raised
	Since  time.Time `json:"since"` // when the condition behind it began
	Raised time.Time `json:"raised"`
	// Cleared is zero while the flag is not over.
	Cleared time.Time `json:"cleared,omitzero"`
}

// Driver is one metric behind a pattern flag: its per-node rate, level and
// grade in the window that raised it, and the cut points in force.
type Driver struct {
	Metric   metric.ID    `json:"metric"`
	Rate     float64      `json:"rate"`
	Level    coding.Level `json:"level"`
	Grade    coding.Grade `json:"grade"`
	Elevated float64      `json:"elevated_cut"`
	Critical float64      `json:"critical_cut"`
}

// Active reports whether the flag has not been cleared (silenced or not).
func (f Flag) Active() bool { return f.Cleared.IsZero() }

// Silence keeps matching flags out of Prometheus until it expires: per
// job, per pattern (or reason), or both. Flags stay listed, marked
// silenced. Which flags it covers is decided in package flagging.
type Silence struct {
	ID      string    `json:"id"`
	Job     string    `json:"job,omitempty"`     // empty: every job
	Pattern string    `json:"pattern,omitempty"` // pattern name, or a reason such as "high_rate:creates"; empty: every flag
	Until   time.Time `json:"until"`
	By      string    `json:"by"`
	Why     string    `json:"why"`
	Created time.Time `json:"created"`
}

// Ack records that someone has taken a flag in hand. It changes nothing
// else: the flag stays exported until it clears or is silenced.
type Ack struct {
	Flag string    `json:"flag"`
	By   string    `json:"by"`
	Why  string    `json:"why"`
	At   time.Time `json:"at"`
}
