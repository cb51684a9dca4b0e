// Package source defines what a counter source gives the agent: readings of
// raw cumulative counters, one per source instance.
//
// # Basics
//
// A [Source] only reads and parses; the agent loop owns timing, the delta
// computation and self-metrics. Each [Reading] is one snapshot of one
// instance (a Lustre mount, an NFS superblock, a block device, a job cgroup).
//
// # Caveats
//
// A source whose files are absent returns [ErrNoData] (wrapped), which the
// agent logs at debug level and does not treat as a failure.
package source

import (
	"context"
	"errors"
	"time"

	"sluice/pkg/metric"
)

// ErrNoData means the source's files do not exist on this node (for example
// the filesystem is not mounted).
var ErrNoData = errors.New("no data")

// Reading is a snapshot of one source instance's raw cumulative counters.
type Reading struct {
	// Key names the instance uniquely within the agent, e.g.
	// "lustre:scratch-ffff9a0c12345000". A new key is a new counter set.
	Key string
	// Epoch changes whenever the instance's counters restart from zero
	// (for Lustre, the stats start_time). Empty when the format has none.
	Epoch string
	// Time is when the agent read the counters. File timestamps are not
	// used: some Lustre versions print snapshot_time as time since boot.
	Time time.Time
	// Counters maps raw counter names to cumulative values. A counter that
	// is absent is zero (Lustre omits counters whose count is zero).
	Counters map[string]uint64
	// Sums holds the counters already summed into metrics, when the
	// source was given its mapping row (see [Summer]); Counters is then nil.
	Sums metric.Values
	// Present is, in that case, the set of metrics that at least one
	// counter present in the file maps to (even at zero), which is what
	// "agent check" lists.
	Present metric.Set
	// Malformed counts lines that could not be parsed and were skipped.
	Malformed int
	// Job, when set, says the counters belong to that one job (a per-job
	// source on a shared node); empty means the whole node.
	Job string
}

// Source reads one kind of counter.
type Source interface {
	// Name is the source's kind, e.g. "lustre"; it prefixes reading keys.
	Name() string
	// Read returns one reading per instance found.
	Read(ctx context.Context) ([]Reading, error)
}

// Summer is a Source that sums its raw counters into metrics as it reads,
// given the mapping row of its kind (raw counter name to metric). The agent
// hands every Summer its row: building and walking a counter map per
// instance on every read was most of the agent's own cost. Readings then
// carry Sums and Present instead of Counters.
type Summer interface {
	Source
	SumWith(row map[string]metric.ID)
}

// Slot is where one raw counter goes when a source sums its own (see
// Summer): a metric, or nowhere when the mapping row has no entry for it.
type Slot struct {
	ID metric.ID
	OK bool
}

// SlotOf looks counter name up in a mapping row.
func SlotOf(row map[string]metric.ID, name string) Slot {
	id, ok := row[name]
	return Slot{id, ok}
}

// Add adds v to the reading's sums and marks the metric present.
func (s Slot) Add(r *Reading, v uint64) {
	if s.OK {
		r.Sums[s.ID] += v
		r.Present.Add(s.ID)
	}
}
