package aggregate

import (
	"fmt"
	"time"

	"sluice/pkg/api"
	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/export"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// learner is the service's side of the baseline: it adds every closed
// window to the live day, remembers which days changed for the next store
// write, and turns the learned thresholds into the tracker's coding. The
// service lock guards it.
type learner struct {
	b     *baseline.Baseline
	seed  coding.Cuts
	dirty map[baseline.Key]bool

	th         baseline.Thresholds
	bases      coding.Bases
	coding     coding.Coding
	recomputed time.Time
}

func newLearner(opts baseline.Options, seed coding.Cuts) (*learner, error) {
	b, err := baseline.New(&opts)
	if err != nil {
		return nil, err
	}
	return &learner{b: b, seed: seed, dirty: map[baseline.Key]bool{}, coding: coding.Seed(seed)}, nil
}

// load puts the stored days back.
func (l *learner) load(days map[baseline.Key]*baseline.Day) error {
	for k, d := range days {
		if err := l.b.Put(k, d); err != nil {
			return fmt.Errorf("baseline day %s/%s: %w", k.Origin, k.Day, err)
		}
	}
	return nil
}

// window adds one closed window's per-node rates to the live day it
// closed in. The population is one value per job-window and metric (not
// one per node), so that a wide job weighs as much as a narrow one and the
// cut points speak of the same quantity the levels are applied to.
func (l *learner) window(w *model.Window) {
	day := baseline.DayOf(w.End)
	for i, r := range w.Rates {
		_ = l.b.Add(day, metric.ID(i), r) // a refusal (NaN, negative) is counted by the baseline
	}
	l.dirty[baseline.Key{Origin: baseline.Live, Day: day}] = true
}

// imported replaces the import origin of each day given.
func (l *learner) imported(days map[baseline.DayKey]*baseline.Day) {
	for day, d := range days {
		l.b.ReplaceImported(day, d)
		l.dirty[baseline.Key{Origin: baseline.Import, Day: day}] = true
	}
}

// recompute drops days past the horizon, merges the rest and returns the
// coding they give: learned cuts for metrics with enough windows, seed cuts
// for the others.
func (l *learner) recompute(now time.Time) coding.Coding {
	for _, k := range l.b.Prune(now) {
		l.dirty[k] = true // Get now returns nil: deleted at the next write
	}
	l.th = l.b.Cuts(now)
	c, bases := coding.Assemble(l.seed, l.th.Learned())
	l.bases = bases
	l.coding, l.recomputed = c, now
	return c
}

// drain returns copies of the days changed since the last call (nil for a
// deleted one), for the store batch.
func (l *learner) drain(into map[baseline.Key]*baseline.Day) map[baseline.Key]*baseline.Day {
	if len(l.dirty) == 0 {
		return into
	}
	if into == nil {
		into = map[baseline.Key]*baseline.Day{}
	}
	for k := range l.dirty {
		var d *baseline.Day
		if cur := l.b.Get(k); cur != nil {
			d = cur.Clone()
		}
		into[k] = d
	}
	clear(l.dirty)
	return into
}

// report describes the baseline as of the last recompute.
func (l *learner) report() api.BaselineReport {
	o := l.b.Options()
	r := api.BaselineReport{
		Recomputed: l.recomputed, HorizonDays: o.Days, MinWindows: o.MinWindows,
		Quantiles: coding.GradeQuantiles(o.ElevatedQuantile, o.CriticalQuantile), Rejected: l.b.Rejected(),
	}
	r.Newest, _ = l.b.Newest()
	for _, k := range l.b.Keys() {
		if n := len(r.Days); n > 0 && r.Days[n-1].Day == k.Day {
			r.Days[n-1].Origins = append(r.Days[n-1].Origins, k.Origin)
			continue
		}
		r.Days = append(r.Days, api.BaselineDay{Day: k.Day, Origins: []baseline.Origin{k.Origin}})
	}
	for i, m := range l.th.Metrics {
		id := metric.ID(i)
		r.Metrics = append(r.Metrics, api.BaselineMetric{
			Metric: id.String(), Unit: id.Unit(), Bytes: id.IsBytes(), Basis: l.bases[i],
			Elevated: l.coding.Levels[i].Elevated, Critical: l.coding.Levels[i].Critical,
			Grades: l.coding.Grades[i], Windows: m.Windows, Idle: m.Idle,
		})
	}
	return r
}

// exported is the baseline part of a scrape.
func (l *learner) exported() export.BaselineFigures {
	var e export.BaselineFigures
	for i, m := range l.th.Metrics {
		e.Bases[i] = l.bases[i]
		e.Windows[i], e.Idle[i] = m.Windows, m.Idle
	}
	e.Days = len(l.th.Days)
	if d, ok := l.b.Newest(); ok {
		e.Newest = d.Time()
	}
	e.Rejected = l.b.Rejected()
	return e
}

// days copies the stored days of one origin, or of both merged per day,
// in day order.
func (l *learner) days(origin baseline.Origin) []api.DatedDay {
	var out []api.DatedDay
	for _, k := range l.b.Keys() {
		if origin != "" && k.Origin != origin {
			continue
		}
		d := l.b.Get(k)
		if n := len(out); n > 0 && out[n-1].Day == k.Day {
			out[n-1].D.Merge(d)
			continue
		}
		out = append(out, api.DatedDay{Day: k.Day, D: d.Clone()})
	}
	return out
}
