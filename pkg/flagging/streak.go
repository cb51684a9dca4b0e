// Package flagging decides when a flag is raised and cleared, and how it
// stands for the people it may page: one raise-and-clear machine for
// high-rate and pattern flags, and one place where silences and
// acknowledgements are applied, which the API and the exporter both ask.
//
// # Basics
//
// A [Streaks] keeps one [Streak] per reason that is building up or
// flagged, for one job. [Streaks.Step] takes one evaluation of a reason:
// RaiseAfter evaluations in a row that hold raise a flag, ClearAfter in a
// row that do not clear it. An evaluation of the window still open is
// provisional: it may complete a run and raise (a flag one minute into the
// window that would complete it), but it never counts as one more
// evaluation in a row; when it holds without raising, only its score is
// kept, until the next closed window. A high-rate reason is evaluated on every
// live evaluation; a pattern on each closed window and, provisionally, on
// the open one.
//
// [Attention] holds the silences and acknowledgements and decides each
// flag's [model.FlagState]: cleared, silenced, or active.
//
// # Caveats
//
// Neither type is safe for concurrent use; their owner serialises calls.
package flagging

import (
	"fmt"
	"maps"
	"math"
	"slices"
	"time"

	"sluice/pkg/model"
)

// Options are the raise and clear counts of one reason. Zero values mean
// 1.
type Options struct {
	RaiseAfter, ClearAfter int
}

// Evaluation is one evaluation of a reason.
type Evaluation struct {
	// Holds says the condition held: a rate above its cut, a pattern
	// matched.
	Holds bool
	// Provisional says it was evaluated on the window still open.
	Provisional bool
	// At is the evaluation's event time.
	At time.Time
	// Since is when the condition began if a run starts now; zero means
	// At.
	Since time.Time
	// Score is the evaluation's score, 0..1; it becomes the streak's and
	// its flag's latest score.
	Score float64
	// Value, unless NaN, becomes the flag's latest value and raises its
	// peak (high-rate flags).
	Value float64
}

// Streak is one reason's raise-and-clear state for one job.
type Streak struct {
	Above int       // evaluations in a row that held
	Below int       // evaluations in a row that did not, while flagged
	Since time.Time // when the current run began
	Score float64   // the latest evaluation's score
	Flag  *model.Flag
}

// Change is what an evaluation did.
type Change uint8

// The changes.
const (
	Unchanged Change = iota
	Raise            // the caller must set Streak.Flag
	Clear            // Streak.Flag is cleared; the caller reports it
)

// step applies e to h.
func (o Options) step(h *Streak, e Evaluation) Change {
	raiseAfter, clearAfter := max(o.RaiseAfter, 1), max(o.ClearAfter, 1)
	h.Score = e.Score
	if f := h.Flag; f != nil {
		f.Score = e.Score
		if !math.IsNaN(e.Value) {
			f.Value, f.Peak = e.Value, max(f.Peak, e.Value)
		}
	}
	switch {
	case e.Holds && e.Provisional:
		if h.Flag != nil || h.Above+1 < raiseAfter {
			return Unchanged
		}
		if h.Above == 0 {
			h.Since = sinceOf(e)
		}
		return Raise
	case e.Holds:
		if h.Above == 0 {
			h.Since = sinceOf(e)
		}
		h.Above++
		h.Below = 0
		if h.Flag == nil && h.Above >= raiseAfter {
			return Raise
		}
	case !e.Provisional:
		h.Above = 0
		if h.Flag == nil {
			return Unchanged
		}
		h.Below++
		if h.Below >= clearAfter {
			h.Flag.Cleared = e.At
			return Clear
		}
	}
	return Unchanged
}

func sinceOf(e Evaluation) time.Time {
	if e.Since.IsZero() {
		return e.At
	}
	return e.Since
}

// idle reports whether the streak remembers nothing worth keeping.
func (h *Streak) idle() bool { return h.Above == 0 && h.Flag == nil }

// Streaks is one job's streaks, by reason.
type Streaks map[model.Reason]*Streak

// Raiser builds the flag a streak raises. It is given the streak (Since and
// Score set) and returns the flag's content; Step fills in the reason,
// Since, Raised and Score.
type Raiser func(h *Streak) *model.Flag

// Step applies one evaluation of reason r. It returns the flag raised or
// cleared by it, with the change; the flag is the streak's own (a cleared
// one is no longer held).
func (hs Streaks) Step(r model.Reason, o Options, e Evaluation, raise Raiser) (*model.Flag, Change) {
	h := hs[r]
	if h == nil {
		if !e.Holds {
			return nil, Unchanged // nothing to remember
		}
		h = &Streak{}
		hs[r] = h
	}
	switch o.step(h, e) {
	case Raise:
		f := raise(h)
		f.Reason, f.Since, f.Raised, f.Score = r, h.Since, e.At, e.Score
		h.Flag = f
		return f, Raise
	case Clear:
		f := h.Flag
		delete(hs, r)
		return f, Clear
	}
	if h.idle() && !(e.Holds && e.Provisional) {
		delete(hs, r) // a provisional match that did not raise keeps its score until the window closes
	}
	return nil, Unchanged
}

// ClearAll clears every flag (the job ended at at) and forgets every streak;
// it returns the cleared flags in reason order.
func (hs Streaks) ClearAll(at time.Time) []*model.Flag {
	var out []*model.Flag
	for _, r := range hs.reasons() {
		if f := hs[r].Flag; f != nil {
			f.Cleared = at
			out = append(out, f)
		}
	}
	clear(hs)
	return out
}

// Active returns copies of the active flags, in reason order.
func (hs Streaks) Active() []model.Flag {
	var out []model.Flag
	for _, r := range hs.reasons() {
		if f := hs[r].Flag; f != nil {
			out = append(out, *f)
		}
	}
	return out
}

// Score returns the latest score of reason r and whether it has a
// streak.
func (hs Streaks) Score(r model.Reason) (float64, bool) {
	h, ok := hs[r]
	if !ok {
		return 0, false
	}
	return h.Score, true
}

// reasons lists the reasons with a streak in a fixed order: high rates by metric,
// then patterns by name.
func (hs Streaks) reasons() []model.Reason {
	return slices.SortedFunc(maps.Keys(hs), compareReasons)
}

func compareReasons(a, b model.Reason) int {
	switch {
	case a.Kind != b.Kind:
		return int(a.Kind) - int(b.Kind)
	case a.Metric != b.Metric:
		return int(a.Metric) - int(b.Metric)
	}
	return compareStrings(a.Pattern, b.Pattern)
}

func compareStrings(a, b string) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// Records returns the streaks as the state file keeps them.
func (hs Streaks) Records() map[model.Reason]model.StreakRecord {
	if len(hs) == 0 {
		return nil
	}
	out := make(map[model.Reason]model.StreakRecord, len(hs))
	for r, h := range hs {
		rec := model.StreakRecord{Above: h.Above, Below: h.Below, Since: h.Since, Score: h.Score}
		if h.Flag != nil {
			f := *h.Flag
			f.Drivers = slices.Clone(f.Drivers)
			rec.Flag = &f
		}
		out[r] = rec
	}
	return out
}

// FromRecords rebuilds streaks from the state file's records.
func FromRecords(recs map[model.Reason]model.StreakRecord) Streaks {
	hs := make(Streaks, len(recs))
	for r, rec := range recs {
		h := &Streak{Above: rec.Above, Below: rec.Below, Since: rec.Since, Score: rec.Score}
		if rec.Flag != nil {
			f := *rec.Flag
			f.Drivers = slices.Clone(f.Drivers)
			h.Flag = &f
		}
		hs[r] = h
	}
	return hs
}

// FlagID is a flag's short id: the job id, a dash and the number of the
// flag among the job's flags, from 1.
func FlagID(job string, n int) string { return fmt.Sprintf("%s-%d", job, n) }
