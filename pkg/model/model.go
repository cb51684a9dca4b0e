// Package model holds the aggregator's data records: jobs, windows and
// flags, as the tracker keeps them, the store persists them and the HTTP API
// returns them.
//
// # Basics
//
// Records are plain data with JSON tags; they carry no behaviour beyond
// small helpers. Rates are per node: a job's value for a metric is the mean
// over its reporting nodes of each node's rate.
//
// # Caveats
//
// The JSON field names are part of the HTTP API (v1) and of the store
// schema; renaming one is a schema change.
package model

import (
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// JobMeta is what the scheduler hooks tell about a job.
type JobMeta struct {
	ID      string    `json:"id"`
	User    string    `json:"user,omitempty"`
	Account string    `json:"account,omitempty"`
	Name    string    `json:"name,omitempty"`
	Nodes   []string  `json:"nodes,omitempty"` // node list from the job events
	Start   time.Time `json:"start"`
	End     time.Time `json:"end,omitzero"`
	Exit    int32     `json:"exit_code,omitempty"`
	// Announced is false when the job is known only from samples (no job
	// start event has arrived).
	Announced bool `json:"announced"`
}

// Ended reports whether a job end event has arrived.
func (m JobMeta) Ended() bool { return !m.End.IsZero() }

// Window is one closed fixed span of a job's life.
type Window struct {
	Job   string    `json:"job"`
	Index int       `json:"index"` // 0 for the span starting at the job's start
	Start time.Time `json:"start"`
	End   time.Time `json:"end"`
	Nodes int       `json:"nodes"` // nodes that reported in the window
	// Rates is the mean over reporting nodes of each node's rate
	// (bytes/s or ops/s), indexed by metric.ID.
	Rates  metric.Rates  `json:"rates"`
	Levels coding.Levels `json:"levels"`
	Grades coding.Grades `json:"grades"`
	// BusiestShare is the busiest node's share of the job's data bytes
	// (read plus write) in the window, 0 to 1; 1 for a one-node job and 0
	// when no bytes moved. NodeSpread is the coefficient of variation of
	// the per-node data byte rates (population standard deviation over
	// mean; 0 for one node or no bytes).
	BusiestShare float64 `json:"busiest_share"`
	NodeSpread   float64 `json:"node_spread"`
}

// Flag is a finding about a running job: why, since when, how strong.
//
// A critical-I/O flag has Reason "critical:<metric>" and Metric, Level,
// Value, Peak and Cut set. A pattern flag has Reason "pattern:<name>" and
// Pattern, Title, Score, Severity, Advice and Drivers set; its Metric is
// the first driver's.
type Flag struct {
	ID     string       `json:"id"`
	Job    string       `json:"job"`
	Reason string       `json:"reason"` // e.g. "critical:creates" or "pattern:metadata_storm"
	Metric metric.ID    `json:"metric"`
	Level  coding.Level `json:"level"`
	// Pattern is the matched pattern's name; empty on a critical-I/O flag.
	Pattern string `json:"pattern,omitempty"`
	// Title is the pattern's short title, e.g. "Metadata storm".
	Title string `json:"title,omitempty"`
	// Score is the match score, 0..1 (latest while active); 1 for a
	// critical-I/O flag.
	Score float64 `json:"score"`
	// Severity is "info", "warning" or "critical" (a critical-I/O flag is
	// "warning").
	Severity string `json:"severity"`
	// Advice is the pattern's advice for on-call staff.
	Advice string `json:"advice,omitempty"`
	// Drivers are the metrics behind the match, with their values against
	// the cut points in force when it was raised.
	Drivers []Driver `json:"drivers,omitempty"`
	// Summary is a short fixed text written when the flag is raised, e.g.
	// "Metadata storm (score 0.91) on 64 nodes".
	Summary string `json:"summary"`
	// Silenced is true while a silence covers the flag: it is kept and
	// listed, but not exported to Prometheus.
	Silenced bool `json:"silenced,omitempty"`
	// Ack is set once someone has acknowledged the flag.
	Ack    *Ack      `json:"ack,omitempty"`
	Value  float64   `json:"value"` // per-node rate when raised (latest while active)
	Peak   float64   `json:"peak"`  // highest per-node rate while active
	Cut    float64   `json:"cut"`   // the cut point crossed
	Nodes  int       `json:"nodes"` // nodes reporting when raised
	Since  time.Time `json:"since"` // first evaluation above the cut
	Raised time.Time `json:"raised"`
	// Cleared is zero while the flag is active.
	Cleared time.Time `json:"cleared,omitzero"`
}

// Driver is one metric behind a pattern flag: its per-node rate, level and
// grade in the window that raised it, and the cut points in force.
type Driver struct {
	Metric   metric.ID    `json:"metric"`
	Rate     float64      `json:"rate"`
	Level    coding.Level `json:"level"`
	Grade    uint8        `json:"grade"`
	Elevated float64      `json:"elevated_cut"`
	Critical float64      `json:"critical_cut"`
}

// Active reports whether the flag has not been cleared.
func (f Flag) Active() bool { return f.Cleared.IsZero() }

// Summary is a running or recently ended job as the API lists it.
type Summary struct {
	JobMeta
	State      string        `json:"state"` // "running" or "ended"
	NodesSeen  int           `json:"nodes_seen"`
	LastSample time.Time     `json:"last_sample,omitzero"`
	Live       metric.Rates  `json:"live"` // live-window per-node rates
	LiveLevels coding.Levels `json:"live_levels"`
	LiveGrades coding.Grades `json:"live_grades"`
	// Signature is each metric's signature in compact text form
	// (signature.Signature.Text), keyed by metric name.
	Signature   map[string]string `json:"signature"`
	Windows     int               `json:"windows"` // closed windows
	LastWindow  *Window           `json:"last_window,omitempty"`
	ActiveFlags []Flag            `json:"flags"`
	// PatternScores is each pattern's latest score for the job, for the
	// patterns that matched it lately.
	PatternScores map[string]float64 `json:"pattern_scores,omitempty"`
}

// Agent is what the latest heartbeats of one node's agent say.
type Agent struct {
	Node     string        `json:"node"`
	Version  string        `json:"version"`
	LastSeen time.Time     `json:"last_seen"` // the heartbeat's own time
	Interval time.Duration `json:"interval"`
	// CPUSeconds is the agent's CPU time since it started; CPUShare the
	// fraction of one core it used between its last two heartbeats (zero
	// until there are two).
	CPUSeconds float64       `json:"cpu_seconds"`
	CPUShare   float64       `json:"cpu_share"`
	RSSBytes   uint64        `json:"rss_bytes"`
	Queued     uint32        `json:"queued"`
	Dropped    uint64        `json:"dropped"`
	Sources    []AgentSource `json:"sources"`
}

// AgentSource is one source's cost on one node.
type AgentSource struct {
	Name          string  `json:"name"`
	Instances     uint32  `json:"instances"`
	MicrosPerRead float64 `json:"micros_per_read"`
	OK            bool    `json:"ok"`
	Malformed     uint64  `json:"malformed_lines"`
}
