package tracker

import (
	"iter"
	"maps"
	"math"
	"slices"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/signature"
)

// JobState is everything the tracker holds about one job. It is exported
// so the store can persist it whole and a restarted aggregator resumes
// exactly where it stopped.
type JobState struct {
	Meta model.JobMeta `json:"meta"`
	// Live holds each node's recent samples, newest last, for the live
	// window.
	Live map[string][]Slice `json:"live"`
	// Open holds the windows still taking samples, by index.
	Open map[int]*OpenWindow `json:"open"`
	// Closed is the number of windows closed so far; also the index below
	// which samples are late.
	Closed     int           `json:"closed"`
	LastWindow *model.Window `json:"last_window,omitempty"`
	LastSample time.Time     `json:"last_sample,omitzero"`
	// LiveRates and LiveLevels are the result of the latest evaluation.
	LiveRates  metric.Rates             `json:"live_rates"`
	LiveLevels coding.Levels            `json:"live_levels"`
	LiveNodes  int                      `json:"live_nodes"`
	Hyst       [metric.Count]Hysteresis `json:"hyst"`
	Finished   bool                     `json:"finished,omitempty"`
	// Signature is the job's grades so far. The store keeps it in its own
	// compact form, not in the job record.
	Signature signature.Signature `json:"-"`
	// Patterns holds each pattern's hysteresis while it matches or
	// flags, by pattern name.
	Patterns map[string]*PatternHyst `json:"patterns,omitempty"`

	match *matcher.Job // rebuilt from the windows after a restart (Replay)

	dirty bool // samples since the last evaluation
}

// Slice is one sample's contribution to a job on one node.
type Slice struct {
	End     time.Time     `json:"end"`
	Seconds float64       `json:"s"`
	Values  metric.Values `json:"v"`
}

// Accum sums one node's samples in a window.
type Accum struct {
	Seconds float64       `json:"s"`
	Values  metric.Values `json:"v"`
}

// OpenWindow accumulates a window's samples per node.
type OpenWindow struct {
	Nodes map[string]*Accum `json:"nodes"`
	// list holds the same accumulators in arrival order, so that closing
	// a window of thousands of nodes walks a slice, not a map. It is not
	// stored; a restored window is walked by its map.
	list []*Accum
}

// accums returns the window's accumulators.
func (w *OpenWindow) accums() iter.Seq[*Accum] {
	if len(w.list) == len(w.Nodes) {
		return slices.Values(w.list)
	}
	return maps.Values(w.Nodes)
}

// Hysteresis is one metric's raise/clear state.
type Hysteresis struct {
	Above int         `json:"above,omitempty"` // consecutive evaluations above the cut
	Below int         `json:"below,omitempty"` // consecutive evaluations at or below it, while flagged
	Since time.Time   `json:"since,omitzero"`  // first of the current run above the cut
	Flag  *model.Flag `json:"flag,omitempty"`  // the active flag, if any
}

func (j *JobState) windowIndex(end time.Time, w time.Duration) int {
	if !end.After(j.Meta.Start) {
		return 0
	}
	// A sample ending exactly on a boundary belongs to the window it ends.
	return int((end.Sub(j.Meta.Start) - 1) / w)
}

func (j *JobState) addLive(node string, s Slice) {
	j.Live[node] = append(j.Live[node], s)
}

func (j *JobState) addWindow(idx int, node string, secs float64, v metric.Values) {
	w := j.Open[idx]
	if w == nil {
		w = &OpenWindow{Nodes: make(map[string]*Accum)}
		j.Open[idx] = w
	}
	a := w.Nodes[node]
	if a == nil {
		a = &Accum{}
		w.Nodes[node] = a
		w.list = append(w.list, a)
	}
	a.Seconds += secs
	a.Values.Add(v)
}

// closeWindows closes, in index order, the open windows whose end plus
// grace is not after now; a zero now closes all of them (job finished).
func (t *Tracker) closeWindows(j *JobState, now time.Time) {
	if !now.IsZero() && !t.anyClosable(j, now) {
		return // the common case, on every sample: checked without allocating
	}
	for _, idx := range slices.Sorted(maps.Keys(j.Open)) {
		start := j.Meta.Start.Add(time.Duration(idx) * t.opts.Window)
		end := start.Add(t.opts.Window)
		if !now.IsZero() && end.Add(t.opts.Grace).After(now) {
			return
		}
		if j.Meta.Ended() && j.Meta.End.Before(end) && j.Meta.End.After(start) {
			end = j.Meta.End
		}
		w := t.windowOf(j.Meta.ID, idx, start, end, j.Open[idx])
		j.Signature.Append(w.Grades)
		t.matchWindow(j, &w)
		delete(j.Open, idx)
		j.Closed = idx + 1
		j.LastWindow = &w
		t.dirtyJobs[j.Meta.ID] = struct{}{}
		t.emit(Event{Kind: WindowClosed, Job: j.Meta.ID, Window: &w})
	}
}

// anyClosable reports whether the job's earliest open window may close at
// now.
func (t *Tracker) anyClosable(j *JobState, now time.Time) bool {
	first := -1
	for idx := range j.Open {
		if first < 0 || idx < first {
			first = idx
		}
	}
	if first < 0 {
		return false
	}
	end := j.Meta.Start.Add(time.Duration(first+1) * t.opts.Window)
	return !end.Add(t.opts.Grace).After(now)
}

func (t *Tracker) windowOf(job string, idx int, start, end time.Time, ow *OpenWindow) model.Window {
	w := model.Window{Job: job, Index: idx, Start: start, End: end, Nodes: len(ow.Nodes)}
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
func meanOver(ow *OpenWindow, over float64) (metric.Rates, balance) {
	var sum metric.Rates
	var bal balance
	for a := range ow.accums() {
		secs := a.Seconds
		if over > 0 {
			secs = over
		}
		if secs <= 0 {
			continue
		}
		inv := 1 / secs // one division per node, not one per metric
		for i, x := range a.Values {
			sum[i] += float64(x) * inv
		}
		bal.add(float64(a.Values[metric.ReadBytes]+a.Values[metric.WriteBytes]) * inv)
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

// meanRate is the mean over nodes of each node's rate (sum of its deltas
// over the seconds its samples cover). Nodes covering no time are skipped.
func meanRate(nodes []*Accum) metric.Rates {
	var sum metric.Rates
	n := 0
	for _, a := range nodes {
		if a.Seconds <= 0 {
			continue
		}
		n++
		for i, x := range a.Values {
			sum[i] += float64(x) / a.Seconds
		}
	}
	if n == 0 {
		return sum
	}
	for i := range sum {
		sum[i] /= float64(n)
	}
	return sum
}
