package tracker

import (
	"cmp"
	"fmt"
	"maps"
	"slices"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// EventKind says what changed.
type EventKind int

// The kinds of change a tracker reports.
const (
	JobSeen      EventKind = iota + 1 // first sample or start event of a job
	WindowClosed                      // a window closed; Window is set
	FlagRaised                        // a flag was raised; Flag is set
	FlagCleared                       // a flag was cleared; Flag is set
	JobEnded                          // a job finished; its windows are closed
)

// Event is one change, for the caller to persist and report.
type Event struct {
	Kind   EventKind
	Job    string
	Window *model.Window
	Flag   *model.Flag
}

// evaluate recomputes a job's live window and steps each metric's
// hysteresis: RaiseAfter evaluations in a row above the critical cut raise
// a flag, ClearAfter in a row at or below it clear the flag.
func (t *Tracker) evaluate(j *JobState) {
	from := j.LastSample.Add(-t.opts.Live)
	var nodes []*Accum
	for node, slices := range j.Live {
		keep := slices[:0]
		a := &Accum{}
		for _, s := range slices {
			if s.End.After(from) {
				keep = append(keep, s)
				a.Seconds += s.Seconds
				a.Values.Add(s.Values)
			}
		}
		if len(keep) == 0 {
			delete(j.Live, node)
			continue
		}
		j.Live[node] = keep
		nodes = append(nodes, a)
	}
	j.LiveRates = meanRate(nodes)
	j.LiveNodes = len(nodes)
	var live coding.Grades
	j.LiveLevels, live = t.coding.Code(j.LiveRates)
	j.Signature.SetLive(live)
	for i, r := range j.LiveRates {
		t.step(j, metric.ID(i), r)
	}
	t.matchLive(j)
	t.dirtyJobs[j.Meta.ID] = struct{}{}
}

func (t *Tracker) step(j *JobState, id metric.ID, rate float64) {
	h := &j.Hyst[id]
	cut := t.coding.Levels[id].Critical
	now := j.LastSample
	if rate > cut {
		if h.Above == 0 {
			h.Since = now
		}
		h.Above++
		h.Below = 0
		if f := h.Flag; f != nil {
			f.Value, f.Peak = rate, max(f.Peak, rate)
			return
		}
		if h.Above >= t.opts.RaiseAfter {
			h.Flag = &model.Flag{
				ID:     fmt.Sprintf("%s/critical:%s/%d", j.Meta.ID, id, h.Since.Unix()),
				Job:    j.Meta.ID,
				Reason: "critical:" + id.String(),
				Metric: id, Level: coding.Critical,
				Value: rate, Peak: rate, Cut: cut,
				Nodes: j.LiveNodes, Since: h.Since, Raised: now,
				Score: 1, Severity: "warning",
				Summary: fmt.Sprintf("%s above the critical cut on %d nodes", id, j.LiveNodes),
			}
			t.emit(Event{Kind: FlagRaised, Job: j.Meta.ID, Flag: cloneFlag(h.Flag)})
		}
		return
	}
	h.Above = 0
	if h.Flag == nil {
		return
	}
	h.Flag.Value = rate
	h.Below++
	if h.Below >= t.opts.ClearAfter {
		h.Flag.Cleared = now
		t.emit(Event{Kind: FlagCleared, Job: j.Meta.ID, Flag: h.Flag})
		*h = Hysteresis{}
	}
}

func cloneFlag(f *model.Flag) *model.Flag {
	c := *f
	return &c
}

// Job returns a copy of a job's summary.
func (t *Tracker) Job(id string) (model.Summary, bool) {
	j, ok := t.jobs[id]
	if !ok {
		return model.Summary{}, false
	}
	return summarize(j), true
}

// Summaries lists every tracked job, running first, then by id.
func (t *Tracker) Summaries() []model.Summary {
	out := make([]model.Summary, 0, len(t.jobs))
	for _, id := range t.sortedJobIDs() {
		out = append(out, summarize(t.jobs[id]))
	}
	slices.SortStableFunc(out, func(a, b model.Summary) int {
		return cmp.Compare(rank(a), rank(b))
	})
	return out
}

// rank orders running jobs before ended ones.
func rank(s model.Summary) int {
	if s.State == "running" {
		return 0
	}
	return 1
}

func summarize(j *JobState) model.Summary {
	s := model.Summary{
		JobMeta:     j.Meta,
		State:       "running",
		NodesSeen:   len(j.Live),
		LastSample:  j.LastSample,
		Live:        j.LiveRates,
		LiveLevels:  j.LiveLevels,
		LiveGrades:  j.Signature.Live,
		Signature:   make(map[string]string, metric.Count),
		Windows:     j.Closed,
		ActiveFlags: []model.Flag{},
	}
	s.Nodes = append([]string(nil), j.Meta.Nodes...)
	for id := range metric.Count {
		s.Signature[id.String()] = j.Signature.Text(id)
	}
	if j.Finished {
		s.State = "ended"
	}
	if j.LastWindow != nil {
		w := *j.LastWindow
		s.LastWindow = &w
	}
	for _, h := range j.Hyst {
		if h.Flag != nil {
			s.ActiveFlags = append(s.ActiveFlags, *h.Flag)
		}
	}
	for _, name := range slices.Sorted(maps.Keys(j.Patterns)) {
		h := j.Patterns[name]
		if h.Flag != nil {
			s.ActiveFlags = append(s.ActiveFlags, *h.Flag)
		}
		if h.Score > 0 {
			if s.PatternScores == nil {
				s.PatternScores = map[string]float64{}
			}
			s.PatternScores[name] = h.Score
		}
	}
	return s
}

// DirtyJobs returns copies of the jobs changed since the last call and
// the ids of jobs forgotten since then, for the store.
func (t *Tracker) DirtyJobs() (changed []JobState, gone []string) {
	for id := range t.dirtyJobs {
		if j, ok := t.jobs[id]; ok {
			changed = append(changed, j.clone())
		}
	}
	clear(t.dirtyJobs)
	gone, t.gone = t.gone, nil
	return changed, gone
}

// DirtyNodes returns copies of the sequence sets changed since the last
// call.
func (t *Tracker) DirtyNodes() map[string]SeqSet {
	out := make(map[string]SeqSet, len(t.dirtyNodes))
	for n := range t.dirtyNodes {
		s := t.nodes[n]
		out[n] = SeqSet{High: s.High, Bits: append([]uint64(nil), s.Bits...)}
	}
	clear(t.dirtyNodes)
	return out
}

// Restore loads persisted state into an empty tracker.
func (t *Tracker) Restore(jobs []JobState, nodes map[string]SeqSet, watermark time.Time) error {
	if len(t.jobs) > 0 || len(t.nodes) > 0 {
		return fmt.Errorf("restore into a tracker that already holds state")
	}
	for _, j := range jobs {
		c := j.clone()
		if c.Live == nil {
			c.Live = map[string][]Slice{}
		}
		if c.Open == nil {
			c.Open = map[int]*OpenWindow{}
		}
		t.jobs[c.Meta.ID] = &c
	}
	for n, s := range nodes {
		if want := (t.opts.DedupeSpan + 63) / 64; len(s.Bits) != want {
			return fmt.Errorf("node %s: dedupe span of %d bits on file, %d configured", n, len(s.Bits)*64, want*64)
		}
		c := s
		c.Bits = append([]uint64(nil), s.Bits...)
		t.nodes[n] = &c
	}
	t.watermark = watermark
	return nil
}

func (j *JobState) clone() JobState {
	c := *j
	c.Meta.Nodes = append([]string(nil), j.Meta.Nodes...)
	c.Live = make(map[string][]Slice, len(j.Live))
	for n, s := range j.Live {
		c.Live[n] = append([]Slice(nil), s...)
	}
	c.Open = make(map[int]*OpenWindow, len(j.Open))
	for i, w := range j.Open {
		nw := &OpenWindow{Nodes: make(map[string]*Accum, len(w.Nodes))}
		for n, a := range w.Nodes {
			ac := *a
			nw.Nodes[n] = &ac
		}
		c.Open[i] = nw
	}
	if j.LastWindow != nil {
		w := *j.LastWindow
		c.LastWindow = &w
	}
	for i := range c.Signature.Runs {
		c.Signature.Runs[i] = slices.Clone(j.Signature.Runs[i])
	}
	for i, h := range j.Hyst {
		if h.Flag != nil {
			c.Hyst[i].Flag = cloneFlag(h.Flag)
		}
	}
	if j.Patterns != nil {
		c.Patterns = make(map[string]*PatternHyst, len(j.Patterns))
		for name, h := range j.Patterns {
			ch := *h
			if h.Flag != nil {
				ch.Flag = cloneFlag(h.Flag)
			}
			c.Patterns[name] = &ch
		}
	}
	c.match = nil // the copy is for the store; the matcher stays with the job
	return c
}
