package model

import (
	"fmt"
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

// Ended reports whether the job's end is known: announced, or taken as
// ended after a silence.
func (m JobMeta) Ended() bool { return !m.End.IsZero() }

// JobState says whether a tracked job is still running.
type JobState uint8

// The job states.
const (
	JobRunning JobState = iota
	JobEnded
)

var jobStateNames = [...]string{JobRunning: "running", JobEnded: "ended"}

// String returns "running" or "ended".
func (s JobState) String() string {
	if int(s) < len(jobStateNames) {
		return jobStateNames[s]
	}
	return fmt.Sprintf("jobstate(%d)", uint8(s))
}

// MarshalText encodes the state by name.
func (s JobState) MarshalText() ([]byte, error) { return []byte(s.String()), nil }

// UnmarshalText decodes a state name.
func (s *JobState) UnmarshalText(b []byte) error {
	return parseName(b, jobStateNames[:], s, "job state")
}

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

// Summary is a running or recently ended job as the API lists it.
type Summary struct {
	JobMeta
	State      JobState      `json:"state"`
	NodesSeen  int           `json:"nodes_seen"`
	LastSample time.Time     `json:"last_sample,omitzero"`
	Live       metric.Rates  `json:"live"` // live-window per-node rates
	LiveLevels coding.Levels `json:"live_levels"`
	LiveGrades coding.Grades `json:"live_grades"`
	// Signature is each metric's signature in compact text form
	// (signature.Signature.Text), keyed by metric name.
	Signature map[string]string `json:"signature"`
	Windows   int               `json:"windows"` // closed windows
	// Totals is everything the job did, per metric (bytes or operations),
	// summed over its nodes, each sample counted once.
	Totals      metric.Values `json:"totals"`
	LastWindow  *Window       `json:"last_window,omitempty"`
	ActiveFlags []Flag        `json:"flags"`
	// PatternScores is each pattern's latest score for the job, for the
	// patterns that matched it lately.
	PatternScores map[string]float64 `json:"pattern_scores,omitempty"`
}

// Running reports whether the job is still running.
func (s *Summary) Running() bool { return s.State == JobRunning }

// parseName sets *dst to the index of b in names.
func parseName[T ~uint8](b []byte, names []string, dst *T, what string) error {
	for i, n := range names {
		if n != "" && n == string(b) {
			*dst = T(i)
			return nil
		}
	}
	return fmt.Errorf("unknown %s %q", what, b)
}
