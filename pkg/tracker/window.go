package tracker

import (
	"maps"
	"math"
	"slices"
	"time"

	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// closeWindows closes, in index order, the open windows whose end plus
// grace is not after now; a zero now closes all of them (job finished).
func (t *Tracker) closeWindows(j *job, now time.Time) {
	if !now.IsZero() && !t.anyClosable(j, now) {
		return // the common case, on every sample: checked without allocating
	}
	for _, idx := range slices.Sorted(maps.Keys(j.open)) {
		start := j.meta.Start.Add(time.Duration(idx) * t.opts.Window)
		end := start.Add(t.opts.Window)
		if !now.IsZero() && end.Add(t.opts.Grace).After(now) {
			return
		}
		if j.meta.Ended() && j.meta.End.Before(end) && j.meta.End.After(start) {
			end = j.meta.End
		}
		w := t.windowOf(j.meta.ID, idx, start, end, j.open[idx])
		j.signature.Append(w.Grades)
		j.signed = true
		t.matchWindow(j, &w)
		delete(j.open, idx)
		j.closed, j.closedAt = idx+1, t.lastPos
		j.lastWindow = &w
		t.dirtyJobs[j.meta.ID] = struct{}{}
		t.emit(Event{Kind: WindowClosed, Job: j.meta.ID, Window: &w})
	}
}

// anyClosable reports whether the job's earliest open window may close at
// now.
func (t *Tracker) anyClosable(j *job, now time.Time) bool {
	first := -1
	for idx := range j.open {
		if first < 0 || idx < first {
			first = idx
		}
	}
	if first < 0 {
		return false
	}
	end := j.meta.Start.Add(time.Duration(first+1) * t.opts.Window)
	return !end.Add(t.opts.Grace).After(now)
}

func (t *Tracker) windowOf(job string, idx int, start, end time.Time, ow *openWindow) model.Window {
	w := model.Window{Job: job, Index: idx, Start: start, End: end, Nodes: len(ow.nodes)}
	var bal balance
	w.Rates, bal = meanOver(ow, 0)
	w.Levels, w.Grades = t.coding.Code(w.Rates)
	w.BusiestShare, w.NodeSpread = bal.result()
	return w
}

// meanOver is the mean over the window's nodes of each node's counts
// divided by its own seconds (over 0) or by over seconds, and the balance
// of their data byte rates, in one pass: a wide job has thousands of
// nodes. A node covering no time is left out.
func meanOver(ow *openWindow, over float64) (metric.Rates, balance) {
	var sum metric.Rates
	var bal balance
	for a := range ow.accums() {
		secs := a.seconds
		if over > 0 {
			secs = over
		}
		if secs <= 0 {
			continue
		}
		inv := 1 / secs // one division per node, not one per metric
		for i, x := range a.values {
			sum[i] += float64(x) * inv
		}
		bal.add(float64(a.values[metric.ReadBytes]+a.values[metric.WriteBytes]) * inv)
	}
	if bal.n > 0 {
		for i := range sum {
			sum[i] /= float64(bal.n)
		}
	}
	return sum, bal
}

// balance gathers the nodes' data byte rates for the busiest node's share
// and the coefficient of variation (see model.Window).
type balance struct {
	n               int
	sum, sumSq, top float64
}

func (b *balance) add(r float64) {
	b.n++
	b.sum += r
	b.sumSq += r * r
	b.top = max(b.top, r)
}

func (b *balance) result() (busiest, spread float64) {
	if b.n == 0 || b.sum == 0 {
		return 0, 0
	}
	mean := b.sum / float64(b.n)
	variance := max(b.sumSq/float64(b.n)-mean*mean, 0)
	return b.top / b.sum, math.Sqrt(variance) / mean
}
