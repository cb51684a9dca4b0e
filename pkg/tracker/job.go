package tracker

import (
	"iter"
	"maps"
	"slices"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/flagging"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/signature"
)

// job is everything the tracker holds about one job, in the form its work
// needs; records.go converts it to and from the state file's JobRecord.
type job struct {
	meta model.JobMeta
	// live holds each node's recent samples, newest last, for the live
	// window; liveFirst is the lowest stream position among them (0: none
	// known).
	live      map[string][]slice
	liveFirst uint64
	// open holds the windows still taking samples, by index.
	open map[int]*openWindow
	// closed is the number of windows closed so far; also the index below
	// which samples are late.
	closed     int
	closedAt   uint64 // the stream position applied when the latest window closed
	lastWindow *model.Window
	lastSample time.Time
	// totals is every value applied to the job, per metric: what it did,
	// counted once.
	totals metric.Values
	// liveRates, liveLevels and liveNodes are the latest live evaluation.
	liveRates  metric.Rates
	liveLevels coding.Levels
	liveNodes  int
	streaks    flagging.Streaks
	// flagsRaised numbers the job's flags (flagging.FlagID).
	flagsRaised int
	finished    bool
	signature   signature.Signature
	// signed says windows were added to the signature since the job's last
	// record: the record carries the signature only then.
	signed bool
	match  *matcher.JobMatch // rebuilt from the windows after a restart

	dirty bool // samples since the last evaluation
}

func newJob(meta model.JobMeta) *job {
	return &job{meta: meta, live: map[string][]slice{}, open: map[int]*openWindow{}, streaks: flagging.Streaks{}}
}

// slice is one sample's contribution to a job on one node, and the
// sample's position in the stream.
type slice struct {
	end     time.Time
	seconds float64
	values  metric.Values
	pos     uint64
}

// accum sums one node's samples in a window.
type accum struct {
	seconds float64
	values  metric.Values
}

// openWindow accumulates a window's samples per node. list holds the same
// accumulators in arrival order, so that closing a window of thousands of
// nodes walks a slice, not a map. first is the lowest stream position of
// the samples summed (0: none known).
type openWindow struct {
	nodes map[string]*accum
	list  []*accum
	first uint64
}

func newOpenWindow() *openWindow { return &openWindow{nodes: map[string]*accum{}} }

// accums returns the window's accumulators.
func (w *openWindow) accums() iter.Seq[*accum] {
	if len(w.list) == len(w.nodes) {
		return slices.Values(w.list)
	}
	return maps.Values(w.nodes)
}

// add counts secs and v for node.
func (w *openWindow) add(node string, secs float64, v metric.Values) {
	a := w.nodes[node]
	if a == nil {
		a = &accum{}
		w.nodes[node] = a
		w.list = append(w.list, a)
	}
	a.seconds += secs
	a.values.Add(v)
}

func (j *job) windowIndex(end time.Time, w time.Duration) int {
	if !end.After(j.meta.Start) {
		return 0
	}
	// A sample ending exactly on a boundary belongs to the window it ends.
	return int((end.Sub(j.meta.Start) - 1) / w)
}

// place adds a sample's contribution to the job's live window and to
// its window idx.
func (j *job) place(idx int, node string, s slice) {
	j.placeLive(node, s)
	j.placeWindow(idx, node, s)
}

func (j *job) placeLive(node string, s slice) {
	j.live[node] = append(j.live[node], s)
	j.liveFirst = lowestPos(j.liveFirst, s.pos)
}

func (j *job) placeWindow(idx int, node string, s slice) {
	w := j.open[idx]
	if w == nil {
		w = newOpenWindow()
		j.open[idx] = w
	}
	w.add(node, s.seconds, s.values)
	w.first = lowestPos(w.first, s.pos)
}

// replayFrom is the lowest stream position of the samples the job's open
// windows and live window hold; 0 if none is known.
func (j *job) replayFrom() uint64 {
	from := j.liveFirst
	for _, w := range j.open {
		from = lowestPos(from, w.first)
	}
	return from
}

// lowestPos is the lower of two stream positions, 0 standing for none.
func lowestPos(a, b uint64) uint64 {
	if a == 0 || (b != 0 && b < a) {
		return b
	}
	return a
}

// nextFlagID numbers a new flag of the job.
func (j *job) nextFlagID() string {
	j.flagsRaised++
	return flagging.FlagID(j.meta.ID, j.flagsRaised)
}
