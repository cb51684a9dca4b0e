package model

import (
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// JobRecord is a job as the state file keeps it: enough for a restarted
// aggregator to resume mid-window. The tracker converts its working state
// to and from it; the job's closed windows are kept apart.
type JobRecord struct {
	Meta JobMeta `json:"meta"`
	// Live holds each node's recent samples, newest last, for the live
	// window.
	Live map[string][]SliceRecord `json:"live"`
	// Open holds the windows still taking samples, by index.
	Open map[int]OpenRecord `json:"open"`
	// Closed is the number of windows closed so far; also the index below
	// which samples are late.
	Closed     int       `json:"closed"`
	LastWindow *Window   `json:"last_window,omitempty"`
	LastSample time.Time `json:"last_sample,omitzero"`
	// Totals is every value applied to the job, per metric.
	Totals metric.Values `json:"totals"`
	// LiveRates, LiveLevels and LiveNodes are the latest live evaluation.
	LiveRates  metric.Rates  `json:"live_rates"`
	LiveLevels coding.Levels `json:"live_levels"`
	LiveNodes  int           `json:"live_nodes"`
	// Streaks is the raise-and-clear state of every reason that is building
	// up or has an active flag, by reason.
	Streaks map[Reason]StreakRecord `json:"streaks,omitempty"`
	// FlagsRaised counts the flags raised on the job; the next flag's id
	// ends in FlagsRaised+1.
	FlagsRaised int  `json:"flags_raised,omitempty"`
	Finished    bool `json:"finished,omitempty"`
	// Signature is the job's signature in its binary form
	// (signature.Signature.MarshalBinary); the store keeps it in a bucket
	// of its own.
	Signature []byte `json:"-"`

	// LegacyRates and LegacyPatterns are how schema 1 files written before
	// Streaks kept the same state; the store folds them into Streaks on load
	// (Upgrade) and never writes them.
	LegacyRates    []StreakRecord          `json:"hyst,omitempty"`
	LegacyPatterns map[string]StreakRecord `json:"patterns,omitempty"`
}

// SliceRecord is one sample's contribution to a job on one node.
type SliceRecord struct {
	End     time.Time     `json:"end"`
	Seconds float64       `json:"s"`
	Values  metric.Values `json:"v"`
}

// AccumRecord sums one node's samples in an open window.
type AccumRecord struct {
	Seconds float64       `json:"s"`
	Values  metric.Values `json:"v"`
}

// OpenRecord is an open window's sums, by node.
type OpenRecord struct {
	Nodes map[string]AccumRecord `json:"nodes"`
}

// StreakRecord is one reason's raise-and-clear state: how many evaluations
// in a row held (Above) or did not while flagged (Below), since when the
// current run holds, the latest score, and the active flag if any.
type StreakRecord struct {
	Above int       `json:"above,omitempty"`
	Below int       `json:"below,omitempty"`
	Since time.Time `json:"since,omitzero"`
	Score float64   `json:"score,omitempty"`
	Flag  *Flag     `json:"flag,omitempty"`
}

// Upgrade folds the schema 1 fields into Streaks: a high-rate state by its
// metric's position, a pattern state by its name.
func (r *JobRecord) Upgrade() {
	add := func(reason Reason, h StreakRecord) {
		if h.Above == 0 && h.Flag == nil {
			return // nothing building up and no flag: nothing to keep
		}
		if r.Streaks == nil {
			r.Streaks = map[Reason]StreakRecord{}
		}
		r.Streaks[reason] = h
	}
	for i, h := range r.LegacyRates {
		if i < int(metric.Count) {
			add(HighRateOf(metric.ID(i)), h)
		}
	}
	for name, h := range r.LegacyPatterns {
		add(PatternOf(name), h)
	}
	r.LegacyRates, r.LegacyPatterns = nil, nil
}

// SeqRecord is a node's applied sequence numbers as the state file keeps
// them: the highest, and a ring bitmap of the span below it.
type SeqRecord struct {
	High uint64   `json:"high"`
	Bits []uint64 `json:"bits"`
}
