// Package report holds what a node reports, in the form the rest of the
// project works with: a sample of metric deltas, a job's start or end, and
// the agent's heartbeat. Package wire encodes and decodes them; nothing
// above the ingest needs to know how they travel.
package report

import (
	"fmt"
	"time"

	"sluice/pkg/metric"
)

// Sample is what an agent publishes once per interval: one node's metric
// deltas, tagged with (Node, Seq) so the aggregator can drop duplicates
// when a stream is replayed.
type Sample struct {
	// Node is the node name as the agent knows itself.
	Node string
	// Seq is the per-node sequence number: 1 for the first sample, +1 per
	// sample, never reused across agent restarts.
	Seq uint64
	// Start is the interval's start (wall clock).
	Start time.Time
	// End is the interval's end; End >= Start.
	End time.Time
	// Jobs holds the ids of the jobs running on the node during the
	// interval; it may be empty.
	Jobs []string
	// Values holds the node's deltas over the interval.
	Values metric.Values
	// PerJob holds each job's own values where a per-job source (per-job
	// cgroup counters) measured the node's jobs, whether one job or several
	// run there; a job without a block is given Values.
	PerJob []JobValues
}

// JobValues is one job's share of a sample's deltas.
type JobValues struct {
	// Job is the job id.
	Job string
	// Values holds the job's deltas over the sample's interval.
	Values metric.Values
}

// EventType says whether a [JobEvent] reports a job's start or its end.
type EventType byte

// The job event types; their values are also their wire codes.
const (
	// JobStart reports a job starting; the scheduler prolog sends it.
	JobStart EventType = 1
	// JobEnd reports a job ending; the scheduler epilog sends it.
	JobEnd EventType = 2
)

// String returns the event type's name as used in logs.
func (t EventType) String() string {
	switch t {
	case JobStart:
		return "start"
	case JobEnd:
		return "end"
	}
	return fmt.Sprintf("event(%d)", byte(t))
}

// JobEvent is what the scheduler hooks publish when a job starts or ends on
// a node; the aggregator uses it to attribute samples to jobs.
type JobEvent struct {
	// Type says whether the job started or ended.
	Type EventType
	// Job is the job id.
	Job string
	// Node is the node that reported the event.
	Node string
	// Time is when the job started or ended.
	Time time.Time
	// User is the job's owner; it may be empty.
	User string
	// Account is the job's accounting project; it may be empty.
	Account string
	// Name is the job's name; it may be empty.
	Name string
	// Nodes is the job's node list, expanded; it may be empty when unknown.
	Nodes []string
	// ExitCode is the job's exit code; it is meaningful for JobEnd only.
	ExitCode int32
}

// Heartbeat is what an agent publishes periodically about itself, so the
// aggregator can tell a silent node from an idle one and export the agent's
// own cost.
type Heartbeat struct {
	// Node is the node name as the agent knows itself.
	Node string
	// Time is when the heartbeat was taken.
	Time time.Time
	// Version is the agent's build version.
	Version string
	// Interval is the agent's sampling interval.
	Interval time.Duration
	// CPUSeconds is the agent process's CPU time (user+system) since it
	// started, in seconds.
	CPUSeconds float64
	// RSSBytes is the agent's resident memory, in bytes.
	RSSBytes uint64
	// Queued counts samples waiting in the agent's outage queue.
	Queued uint32
	// Dropped counts samples dropped past the queue bound since the agent
	// started.
	Dropped uint64
	// Sources holds one entry per source kind the agent reads.
	Sources []SourceCost
}

// SourceCost is what reading one kind of source costs the agent.
type SourceCost struct {
	// Name is the source's kind, e.g. "lustre".
	Name string
	// Instances counts the source's instances found at the last read.
	Instances uint32
	// MicrosPerRead is the mean time one read of all instances takes, in
	// microseconds.
	MicrosPerRead float64
	// OK reports whether the last read succeeded.
	OK bool
	// Malformed counts counter lines the source skipped as malformed since
	// the agent started.
	Malformed uint64
}
