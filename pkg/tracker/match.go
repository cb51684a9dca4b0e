package tracker

import (
	"fmt"
	"math"
	"time"

	"sluice/pkg/flagging"
	"sluice/pkg/matcher"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// Replay rebuilds a restored job's matcher state from its stored windows
// (the state itself is not stored). Flags are not raised or cleared: their
// state was stored with the job.
func (t *Tracker) Replay(id string, windows []model.Window) {
	j := t.jobs[id]
	if j == nil || t.opts.Patterns == nil {
		return
	}
	j.match = t.opts.Patterns.Replay(windows)
}

// matcherOf returns the job's matcher state, made on first use.
func (t *Tracker) matcherOf(j *job) *matcher.JobMatch {
	if j.match == nil {
		j.match = t.opts.Patterns.NewMatch()
	}
	return j.match
}

// matchWindow has the matcher score a closed window against every pattern
// and steps each pattern's streak with its verdict.
func (t *Tracker) matchWindow(j *job, w *model.Window) {
	lib := t.opts.Patterns
	if lib == nil {
		return
	}
	v := matcher.ViewOf(w)
	for i, vd := range t.matcherOf(j).Window(v) {
		t.stepPattern(j, lib.Pattern(i), vd, false, &v, w.End)
	}
}

// matchOpen has the matcher score the window still open, as two bounds
// (see open), against the rule patterns.
func (t *Tracker) matchOpen(j *job) {
	lib := t.opts.Patterns
	if lib == nil {
		return
	}
	o, ok := t.open(j)
	if !ok {
		return
	}
	// A flag raised now shows the live rates, the job's actual rates,
	// beside the cut points: the low bound is only a bound.
	shown := matcher.View{Window: o.High.Window, Levels: j.liveLevels, Grades: j.signature.Live, Rates: j.liveRates,
		Nodes: j.liveNodes, BusiestShare: o.High.BusiestShare, NodeSpread: o.High.NodeSpread}
	// Every verdict of an open-window evaluation is provisional, an
	// example's too (it is its latest closed-window verdict again): it may
	// complete a run, never count as one more window.
	for i, vd := range t.matcherOf(j).Open(o) {
		t.stepPattern(j, lib.Pattern(i), vd, true, &shown, j.lastSample)
	}
}

// stepPattern hands one verdict to the pattern's streak.
func (t *Tracker) stepPattern(j *job, p *pattern.Pattern, vd matcher.Verdict, provisional bool, shown *matcher.View, now time.Time) {
	ev := flagging.Evaluation{
		Holds: vd.Matched, Provisional: provisional, At: now, Since: t.matchSince(j, vd, now),
		Score: vd.Score, Value: math.NaN(),
	}
	opts := flagging.Options{RaiseAfter: p.RaiseAfter, ClearAfter: p.ClearAfter}
	f, change := j.streaks.Step(model.PatternOf(p.Name), opts, ev, func(*flagging.Streak) *model.Flag {
		return t.patternFlag(j, p, shown)
	})
	if _, held := j.streaks[model.PatternOf(p.Name)]; held || change != flagging.Unchanged {
		t.dirtyJobs[j.meta.ID] = struct{}{}
	}
	t.report(j, f, change)
}

// matchSince is when the match began: the start of its first window, or
// now when that is unknown.
func (t *Tracker) matchSince(j *job, vd matcher.Verdict, now time.Time) time.Time {
	if vd.Start < 0 {
		return now
	}
	return j.meta.Start.Add(time.Duration(vd.Start) * t.opts.Window)
}

// patternFlag is a new flag on p, its drivers read from shown against the
// cut points in force.
func (t *Tracker) patternFlag(j *job, p *pattern.Pattern, shown *matcher.View) *model.Flag {
	f := &model.Flag{
		ID: j.nextFlagID(), Job: j.meta.ID, Pattern: p.Name, Title: p.Title, Severity: p.Severity,
		Advice: p.Advice, Nodes: shown.Nodes,
		Summary: fmt.Sprintf("%s on %d nodes", p.Title, shown.Nodes),
	}
	for _, id := range matcher.Drivers(p, shown) {
		cut := t.coding.Levels[id]
		f.Drivers = append(f.Drivers, model.Driver{Metric: id, Rate: shown.Rates[id], Level: shown.Levels[id],
			Grade: shown.Grades[id], Elevated: cut.Elevated, Critical: cut.Critical})
	}
	if len(f.Drivers) > 0 {
		d := f.Drivers[0]
		f.Metric, f.Value, f.Peak, f.Cut = d.Metric, d.Rate, d.Rate, d.Critical
		for _, d := range f.Drivers {
			f.Level = max(f.Level, d.Level)
		}
	}
	return f
}

// open is the window the latest samples fall in, as the matcher sees it
// before it closes: Low, each node's counts so far divided by the whole
// window's length (as if the rest stayed idle), and High, the window's
// value so far (as if the rest went on at the same rate).
func (t *Tracker) open(j *job) (matcher.Open, bool) {
	idx := j.windowIndex(j.lastSample, t.opts.Window)
	ow := j.open[idx]
	if ow == nil || len(ow.nodes) == 0 {
		return matcher.Open{}, false
	}
	start := j.meta.Start.Add(time.Duration(idx) * t.opts.Window)
	hw := t.windowOf(j.meta.ID, idx, start, start.Add(t.opts.Window), ow)
	o := matcher.Open{High: matcher.ViewOf(&hw)}
	sum, bal := meanOver(ow, t.opts.Window.Seconds())
	o.Low = matcher.View{Window: idx, Rates: sum, Nodes: len(ow.nodes)}
	o.Low.Levels, o.Low.Grades = t.coding.Code(sum)
	o.Low.BusiestShare, o.Low.NodeSpread = bal.result()
	return o, true
}
