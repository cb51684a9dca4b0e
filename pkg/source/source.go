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
