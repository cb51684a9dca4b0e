package model

import (
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// JobRecord is a job as the state file keeps it: small and bounded,
// whatever the job's width. What a job's open windows and live window
// have summed so far is not in it: a restarted aggregator sums it again
// from the stream (see package tracker, Rebuild). The job's closed windows
// are kept apart.
type JobRecord struct {
	Meta JobMeta
	// Closed is the number of windows closed so far; also the index below
	// which samples are late. ClosedAt is the stream position of the last
	// sample applied when the latest window closed (0: not known): a
	// sample of that window at or before it was in the live window.
	Closed   int
	ClosedAt uint64
	// LastWindow is the job's latest closed window. The store does not
	// write it with the record; it reads it from the job's windows.
	LastWindow *Window
	LastSample time.Time
	// Totals is every value applied to the job, per metric.
	Totals metric.Values
	// LiveRates, LiveLevels, LiveGrades and LiveNodes are the latest live
	// evaluation, if Evaluated.
	LiveRates  metric.Rates
	LiveLevels coding.Levels
	LiveGrades coding.Grades
	LiveNodes  int
	Evaluated  bool
	// Streaks is the raise-and-clear state of every reason that is building
	// up or has an active flag, by reason.
	Streaks map[Reason]StreakRecord
	// FlagsRaised counts the flags raised on the job; the next flag's id
	// ends in FlagsRaised+1.
	FlagsRaised int
	Finished    bool
	// Unevaluated says samples arrived since the live window was last
	// evaluated: the next tick evaluates it.
	Unevaluated bool
	// Signature is the job's signature in its binary form
	// (signature.Signature.MarshalBinary), set only when it changed since
	// the job's previous record; the store keeps it in a bucket of its own.
	Signature []byte
}

// StreakRecord is one reason's raise-and-clear state: how many evaluations
// in a row held (Above) or did not while flagged (Below), since when the
// current run holds, the latest score, and the active flag if any.
type StreakRecord struct {
	Above int
	Below int
	Since time.Time
	Score float64
	Flag  *Flag
}

// SeqRecord is a node's applied sequence numbers as the state file keeps
// them: the highest, how many below it are remembered (Span, counting the
// highest), and which of those were applied, as ranges from the highest
// down. A node that loses nothing has one range.
type SeqRecord struct {
	High    uint64
	Span    int
	Applied []SeqRange
}

// SeqRange is the applied sequence numbers First to Last, both included.
type SeqRange struct{ First, Last uint64 }
