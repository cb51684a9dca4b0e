package tracker

import (
	"fmt"
	"time"

	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// PatternHyst is one pattern's raise/clear state for one job. Closed
// windows count: RaiseAfter matched in a row raise a flag, ClearAfter
// unmatched in a row clear it. A matched live window counts as a
// provisional next window for raising (never for clearing), so a flag can
// rise a minute into the window that would complete the run.
type PatternHyst struct {
	Above int         `json:"above,omitempty"`
	Below int         `json:"below,omitempty"`
	Since time.Time   `json:"since,omitzero"`
	Score float64     `json:"score"` // latest
	Flag  *model.Flag `json:"flag,omitempty"`
}

// Replay rebuilds a restored job's matcher state from its stored windows
// (the state itself is not stored). Flags are not raised or cleared: their
// state was stored with the job.
func (t *Tracker) Replay(job string, windows []model.Window) {
	j := t.jobs[job]
	if j == nil || t.opts.Patterns == nil {
		return
	}
	j.match = t.opts.Patterns.NewJob()
	for i := range windows {
		j.match.Window(pattern.ViewOf(&windows[i]))
	}
}

// matchWindow scores a closed window against every pattern and steps
// their hysteresis.
func (t *Tracker) matchWindow(j *JobState, w *model.Window) {
	lib := t.opts.Patterns
	if lib == nil {
		return
	}
	if j.match == nil {
		j.match = lib.NewJob()
	}
	v := pattern.ViewOf(w)
	for i, sc := range j.match.Window(v) {
		t.stepPattern(j, lib.Patterns()[i], sc, v, w.End, true)
	}
}

// matchLive scores the open window so far (see provisional) against the
// rule patterns.
func (t *Tracker) matchLive(j *JobState) {
	lib := t.opts.Patterns
	if lib == nil {
		return
	}
	low, high, ok := t.provisional(j)
	if !ok {
		return
	}
	if j.match == nil {
		j.match = lib.NewJob()
	}
	// A flag raised now shows the live rates, the job's actual rates,
	// beside the cut points: the provisional view is a lower bound.
	shown := pattern.WindowView{Levels: j.LiveLevels, Grades: j.Signature.Live, Rates: j.LiveRates, Nodes: j.LiveNodes,
		BusiestShare: high.BusiestShare, NodeSpread: high.NodeSpread}
	for i, sc := range j.match.Live(low, high) {
		t.stepPattern(j, lib.Patterns()[i], sc, shown, j.LastSample, false)
	}
}

func (t *Tracker) stepPattern(j *JobState, p *pattern.Pattern, sc matcher.Score, v pattern.WindowView, now time.Time, closed bool) {
	if j.Patterns == nil {
		j.Patterns = map[string]*PatternHyst{}
	}
	h := j.Patterns[p.Name]
	if h == nil {
		if !sc.Matched {
			return // nothing to remember
		}
		h = &PatternHyst{}
		j.Patterns[p.Name] = h
	}
	h.Score = sc.Score
	if h.Flag != nil {
		h.Flag.Score = sc.Score
	}
	switch {
	case sc.Matched && closed:
		if h.Above == 0 {
			h.Since = t.matchSince(j, sc, now)
		}
		h.Above++
		h.Below = 0
		if h.Flag == nil && h.Above >= p.RaiseAfter {
			t.raisePattern(j, p, h, sc, v, now)
		}
	case sc.Matched: // live
		if h.Flag == nil && h.Above+1 >= p.RaiseAfter {
			if h.Above == 0 {
				h.Since = t.matchSince(j, sc, now)
			}
			t.raisePattern(j, p, h, sc, v, now)
		}
	case closed:
		h.Above = 0
		if h.Flag == nil {
			delete(j.Patterns, p.Name)
			return
		}
		h.Below++
		if h.Below >= p.ClearAfter {
			h.Flag.Cleared = now
			t.emit(Event{Kind: FlagCleared, Job: j.Meta.ID, Flag: h.Flag})
			delete(j.Patterns, p.Name)
		}
	}
	t.dirtyJobs[j.Meta.ID] = struct{}{}
}

// matchSince is when the match began: the start of its first window, or
// now when that is unknown.
func (t *Tracker) matchSince(j *JobState, sc matcher.Score, now time.Time) time.Time {
	if sc.Start < 0 {
		return now
	}
	return j.Meta.Start.Add(time.Duration(sc.Start) * t.opts.Window)
}

func (t *Tracker) raisePattern(j *JobState, p *pattern.Pattern, h *PatternHyst, sc matcher.Score, v pattern.WindowView, now time.Time) {
	drivers := t.drivers(p, v)
	f := &model.Flag{
		ID:      fmt.Sprintf("%s/pattern:%s/%d", j.Meta.ID, p.Name, h.Since.Unix()),
		Job:     j.Meta.ID,
		Reason:  "pattern:" + p.Name,
		Pattern: p.Name, Title: p.Title, Score: sc.Score, Severity: p.Severity.String(), Advice: p.Advice,
		Drivers: drivers, Nodes: v.Nodes, Since: h.Since, Raised: now,
		Summary: fmt.Sprintf("%s (score %.2f) on %d nodes", p.Title, sc.Score, v.Nodes),
	}
	if len(drivers) > 0 {
		f.Metric, f.Value, f.Peak, f.Cut = drivers[0].Metric, drivers[0].Rate, drivers[0].Rate, drivers[0].Critical
		for _, d := range drivers {
			f.Level = max(f.Level, d.Level)
		}
	}
	h.Flag = f
	t.emit(Event{Kind: FlagRaised, Job: j.Meta.ID, Flag: cloneFlag(f)})
}

// drivers are the metrics behind a match: a rule's level and grade
// conditions of the "at least" kind that hold (else every metric it
// names), or an example's metrics.
func (t *Tracker) drivers(p *pattern.Pattern, v pattern.WindowView) []model.Driver {
	var ids []metric.ID
	seen := map[metric.ID]bool{}
	add := func(id metric.ID) {
		if !seen[id] {
			seen[id] = true
			ids = append(ids, id)
		}
	}
	if r := p.Rule; r != nil {
		for _, c := range append(append([]pattern.Condition(nil), r.All...), r.Any...) {
			if (c.Op == pattern.LevelAtLeast || c.Op == pattern.GradeAtLeast) && c.Holds(v) {
				add(c.Metric)
			}
		}
		for _, c := range append(append([]pattern.Condition(nil), r.All...), r.Any...) {
			if len(ids) == 0 && c.Op != pattern.Below && c.Op != pattern.Above {
				add(c.Metric)
			}
		}
	} else {
		for _, id := range p.Example.Metrics {
			add(id)
		}
	}
	out := make([]model.Driver, len(ids))
	for i, id := range ids {
		cut := t.coding.Levels[id]
		out[i] = model.Driver{Metric: id, Rate: v.Rates[id], Level: v.Levels[id], Grade: uint8(v.Grades[id]), Elevated: cut.Elevated, Critical: cut.Critical}
	}
	return out
}

// provisional is the open window the latest samples fall in, as the
// patterns see it before it closes, as two bounds: low, each node's counts
// so far divided by the whole window's length (as if the rest stayed
// idle), and high, the window's value so far (as if the rest went on at
// the same rate). pattern.Rule.HoldsBetween tests "at least" conditions on
// low and "at most" ones on high, so an early match is not a guess; the
// 1-minute live rates would match a start-up minute that the window's
// mean dilutes.
func (t *Tracker) provisional(j *JobState) (low, high pattern.WindowView, ok bool) {
	idx := j.windowIndex(j.LastSample, t.opts.Window)
	ow := j.Open[idx]
	if ow == nil || len(ow.Nodes) == 0 {
		return low, high, false
	}
	start := j.Meta.Start.Add(time.Duration(idx) * t.opts.Window)
	hw := t.windowOf(j.Meta.ID, idx, start, start.Add(t.opts.Window), ow)
	high = pattern.ViewOf(&hw)
	sum, bal := meanOver(ow, t.opts.Window.Seconds())
	low = pattern.WindowView{Rates: sum, Nodes: len(ow.Nodes)}
	low.Levels, low.Grades = t.coding.Code(sum)
	low.BusiestShare, low.NodeSpread = bal.result()
	return low, high, true
}

// clearPatterns clears a finished job's pattern flags.
func (t *Tracker) clearPatterns(j *JobState) {
	for name, h := range j.Patterns {
		if h.Flag != nil {
			h.Flag.Cleared = j.Meta.End
			t.emit(Event{Kind: FlagCleared, Job: j.Meta.ID, Flag: h.Flag})
		}
		delete(j.Patterns, name)
	}
}
