package tracker

import (
	"fmt"
	"slices"

	"sluice/pkg/coding"
	"sluice/pkg/flagging"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// evaluate recomputes a job's live window, evaluates each metric's rate
// against its critical cut (a high-rate reason), and scores the open
// window against the rule patterns.
func (t *Tracker) evaluate(j *job) {
	from := j.lastSample.Add(-t.opts.Live)
	var sum metric.Rates
	n := 0
	j.liveFirst = 0
	// Nodes in name order: the sum of their rates is then the same to the
	// last bit in every run, a restarted one included.
	t.scratch = t.scratch[:0]
	for node := range j.live {
		t.scratch = append(t.scratch, node)
	}
	slices.Sort(t.scratch)
	for _, node := range t.scratch {
		kept := j.live[node]
		keep := kept[:0]
		var a accum
		for _, s := range kept {
			if s.end.After(from) {
				keep = append(keep, s)
				a.seconds += s.seconds
				a.values.Add(s.values)
				j.liveFirst = lowestPos(j.liveFirst, s.pos)
			}
		}
		if len(keep) == 0 {
			delete(j.live, node)
			continue
		}
		j.live[node] = keep
		if a.seconds > 0 {
			n++
			for i, x := range a.values {
				sum[i] += float64(x) / a.seconds
			}
		}
	}
	if n > 0 {
		for i := range sum {
			sum[i] /= float64(n)
		}
	}
	j.liveRates, j.liveNodes = sum, len(j.live)
	var grades coding.Grades
	j.liveLevels, grades = t.coding.Code(j.liveRates)
	j.signature.SetLive(grades)
	for i, r := range j.liveRates {
		t.stepRate(j, metric.ID(i), r)
	}
	t.matchOpen(j)
	t.dirtyJobs[j.meta.ID] = struct{}{}
}

// stepRate evaluates one metric's live rate against its critical cut:
// RaiseAfter evaluations in a row above it raise a high-rate flag,
// ClearAfter in a row at or below it clear the flag.
func (t *Tracker) stepRate(j *job, id metric.ID, rate float64) {
	cut := t.coding.Levels[id].Critical
	ev := flagging.Evaluation{Holds: rate > cut, At: j.lastSample, Score: 1, Value: rate}
	opts := flagging.Options{RaiseAfter: t.opts.RaiseAfter, ClearAfter: t.opts.ClearAfter}
	f, change := j.streaks.Step(model.HighRateOf(id), opts, ev, func(*flagging.Streak) *model.Flag {
		return &model.Flag{
			ID: j.nextFlagID(), Job: j.meta.ID, Metric: id, Level: coding.Critical,
			Value: rate, Peak: rate, Cut: cut, Nodes: j.liveNodes, Severity: model.SeverityWarning,
			Summary: fmt.Sprintf("%s above the critical cut on %d nodes", id, j.liveNodes),
		}
	})
	t.report(j, f, change)
}

// report emits the event of a flag raised or cleared.
func (t *Tracker) report(j *job, f *model.Flag, change flagging.Change) {
	switch change {
	case flagging.Raise:
		c := *f // the held flag goes on changing
		t.emit(Event{Kind: FlagRaised, Job: j.meta.ID, Flag: &c})
	case flagging.Clear:
		t.emit(Event{Kind: FlagCleared, Job: j.meta.ID, Flag: f})
	}
}
