// Package tracker is the aggregator's model of running jobs: it applies
// samples and job events, rolls each job's fixed windows and its live
// window, codes them, has the matcher score them and the flag machine
// raise and clear flags on them.
//
// # Basics
//
// A [Tracker] is fed with [Tracker.Sample] and [Tracker.JobEvent] and driven
// by [Tracker.Tick]. Time is event time: the interval ends the agents
// report, never the aggregator's clock, so a replay gives the same result as
// the live run. Each change a caller must persist or report comes back from
// [Tracker.Drain] as an [Event]; [Tracker.DirtyJobs] and
// [Tracker.DirtyNodes] give the records to write.
//
// A job's window k spans [start+k*W, start+(k+1)*W). A sample belongs to the
// window its interval end falls in. A node's rate in a window is the sum of
// its deltas divided by the seconds its samples cover; the window's value is
// the mean of those rates over the nodes that reported. The live window is
// the same mean over the last Live seconds of each node's samples.
//
// A sample's walk is one way down: the tracker keeps the window sums, has
// package coding code a closing window, appends it to the job's signature,
// gives it to the job's matcher.Job and hands each verdict to the job's
// flagging.Streaks; nothing it calls calls back.
//
// # Caveats
//
// A Tracker is not safe for concurrent use; its owner serialises calls.
// When several jobs share a node and the sample has no per-job split, each
// job is given the node's whole values: the filesystem client cannot tell
// them apart. A job's start time is fixed when the job is first seen (by its
// start event or its first sample) so that window numbers never move.
package tracker

import (
	"cmp"
	"errors"
	"fmt"
	"slices"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/report"
)

// Options configures a Tracker. The zero value of each field means the
// documented default.
type Options struct {
	// Window is the fixed window length; zero means 10 minutes.
	Window time.Duration
	// Live is the live window length; zero means 1 minute.
	Live time.Duration
	// Grace is how long past a window's end (in event time) samples are
	// still taken for it before it closes; zero means 15 seconds.
	Grace time.Duration
	// Cuts are the seed cut points, in force until SetCoding replaces
	// them; the zero value means coding.DefaultCuts().
	Cuts coding.Cuts
	// RaiseAfter is how many consecutive live evaluations above a critical
	// cut raise a high-rate flag; zero means 2.
	RaiseAfter int
	// ClearAfter is how many consecutive evaluations at or below the cut
	// clear it; zero means 3.
	ClearAfter int
	// DedupeSpan is how many recent sequence numbers per node are
	// remembered for duplicate detection; zero means 4096.
	DedupeSpan int
	// MaxJobs bounds the jobs tracked at once; samples for further jobs are
	// counted and dropped. Zero means 100000.
	MaxJobs int
	// Silent is how long a job that never announced its end may go without
	// samples before it is taken as ended; zero means twice Window.
	Silent time.Duration
	// KeepEnded is how long an ended job stays listed; zero means 1 hour.
	KeepEnded time.Duration
	// Patterns is the pattern library every job is matched against as
	// its windows close and on its open window; nil matches nothing.
	Patterns *matcher.Library
}

func (o Options) withDefaults() Options {
	def := func(d *time.Duration, v time.Duration) {
		if *d == 0 {
			*d = v
		}
	}
	def(&o.Window, 10*time.Minute)
	def(&o.Live, time.Minute)
	def(&o.Grace, 15*time.Second)
	def(&o.Silent, 2*o.Window)
	def(&o.KeepEnded, time.Hour)
	if o.Cuts == (coding.Cuts{}) {
		o.Cuts = coding.DefaultCuts()
	}
	o.RaiseAfter = cmp.Or(o.RaiseAfter, 2)
	o.ClearAfter = cmp.Or(o.ClearAfter, 3)
	o.DedupeSpan = cmp.Or(o.DedupeSpan, 4096)
	o.MaxJobs = cmp.Or(o.MaxJobs, 100000)
	return o
}

// Validate reports the first option that cannot work.
func (o Options) Validate() error {
	o = o.withDefaults()
	switch {
	case o.Window <= 0 || o.Live <= 0 || o.Grace < 0:
		return fmt.Errorf("window %s, live %s and grace %s must be positive", o.Window, o.Live, o.Grace)
	case o.Live > o.Window:
		return fmt.Errorf("live window %s is longer than the window %s", o.Live, o.Window)
	case o.RaiseAfter < 1 || o.ClearAfter < 1:
		return fmt.Errorf("raise-after %d and clear-after %d must be at least 1", o.RaiseAfter, o.ClearAfter)
	case o.DedupeSpan < 64:
		return fmt.Errorf("dedupe span %d must be at least 64", o.DedupeSpan)
	}
	return o.Cuts.Validate()
}

// Errors returned by Sample; the caller counts them by reason.
var (
	ErrDuplicate   = errors.New("duplicate sample")
	ErrStale       = errors.New("sample older than the dedupe span")
	ErrBadInterval = errors.New("bad sample interval")
	ErrLate        = errors.New("sample for an ended job after its grace")
)

// Counters are the tracker's running totals.
type Counters struct {
	Applied      uint64 // samples applied
	Unattributed uint64 // applied samples that named no job
	JobsCapped   uint64 // job attributions dropped by MaxJobs
}

// Tracker holds every tracked job and node; see the package doc.
type Tracker struct {
	opts      Options
	coding    coding.Coding
	jobs      map[string]*job
	nodes     map[string]*seqSet
	watermark time.Time
	counters  Counters

	// rebuilt holds, while a restart sums the open windows again, each
	// node's numbers summed so far (see Rebuild).
	rebuilt map[string]*seqSet
	scratch []string // node names, reused by evaluate
	lastPos uint64   // the stream position of the latest sample applied

	events     []Event
	dirtyJobs  map[string]struct{}
	dirtyNodes map[string]struct{}
	gone       []string // jobs forgotten since the last DirtyJobs
}

// New returns an empty tracker.
func New(opts Options) (*Tracker, error) {
	if err := opts.Validate(); err != nil {
		return nil, fmt.Errorf("tracker options: %w", err)
	}
	opts = opts.withDefaults()
	return &Tracker{
		opts:       opts,
		coding:     coding.Seed(opts.Cuts),
		jobs:       make(map[string]*job),
		nodes:      make(map[string]*seqSet),
		rebuilt:    make(map[string]*seqSet),
		dirtyJobs:  make(map[string]struct{}),
		dirtyNodes: make(map[string]struct{}),
	}, nil
}

// SetCoding replaces the cut points and grade cuts that windows closing
// from now on, and live evaluations, are coded against.
func (t *Tracker) SetCoding(c coding.Coding) { t.coding = c }

// Coding returns the coding in force.
func (t *Tracker) Coding() coding.Coding { return t.coding }

// Options returns the options in force, defaults filled in.
func (t *Tracker) Options() Options { return t.opts }

// Counters returns the running totals.
func (t *Tracker) Counters() Counters { return t.counters }

// Watermark is the latest interval end seen in any sample.
func (t *Tracker) Watermark() time.Time { return t.watermark }

// Nodes is the number of nodes that have sent samples.
func (t *Tracker) Nodes() int { return len(t.nodes) }

// Sample applies one sample whose place in a stream is not known (see
// SampleAt).
func (t *Tracker) Sample(s *report.Sample) error { return t.SampleAt(s, 0) }

// SampleAt applies one sample, pos being its place in the stream (0: not
// known). Applying the same (node, seq) twice returns ErrDuplicate and
// changes nothing.
func (t *Tracker) SampleAt(s *report.Sample, pos uint64) error {
	if err := t.checkInterval(s); err != nil {
		return err
	}
	seqs := t.nodes[s.Node]
	if seqs == nil {
		seqs = newSeqSet(t.opts.DedupeSpan)
		t.nodes[s.Node] = seqs
	}
	switch seqs.check(s.Seq) {
	case seqDuplicate:
		return fmt.Errorf("%w: node %s seq %d", ErrDuplicate, s.Node, s.Seq)
	case seqStale:
		return fmt.Errorf("%w: node %s seq %d, highest %d", ErrStale, s.Node, s.Seq, seqs.high)
	}
	seqs.mark(s.Seq)
	t.dirtyNodes[s.Node] = struct{}{}
	t.lastPos = max(t.lastPos, pos)
	t.counters.Applied++
	if s.End.After(t.watermark) {
		t.watermark = s.End
	}
	if len(s.Jobs) == 0 && len(s.PerJob) == 0 {
		t.counters.Unattributed++
		return nil
	}
	var late error
	for _, a := range attributions(s) {
		if err := t.apply(a.job, s, a.values, pos); err != nil {
			late = err
		}
	}
	return late
}

func (t *Tracker) checkInterval(s *report.Sample) error {
	if s.Node == "" || s.End.Before(s.Start) || s.End.Sub(s.Start) > t.opts.Window {
		return fmt.Errorf("%w: node %q %s..%s", ErrBadInterval, s.Node, s.Start, s.End)
	}
	return nil
}

type attribution struct {
	job    string
	values metric.Values
}

// attributions gives each job its share: its own per-job values where the
// agent split them, else the node's values.
func attributions(s *report.Sample) []attribution {
	out := make([]attribution, 0, len(s.Jobs)+len(s.PerJob))
	split := make(map[string]bool, len(s.PerJob))
	for _, pj := range s.PerJob {
		split[pj.Job] = true
		out = append(out, attribution{pj.Job, pj.Values})
	}
	for _, j := range s.Jobs {
		if !split[j] {
			out = append(out, attribution{j, s.Values})
		}
	}
	return out
}

func (t *Tracker) apply(id string, s *report.Sample, v metric.Values, pos uint64) error {
	j := t.jobs[id]
	if j == nil {
		if len(t.jobs) >= t.opts.MaxJobs {
			t.counters.JobsCapped++
			return nil
		}
		j = t.newJob(model.JobMeta{ID: id, Start: s.Start})
	}
	idx, err := t.windowFor(j, s)
	if err != nil {
		return err
	}
	j.place(idx, s.Node, slice{end: s.End, seconds: s.End.Sub(s.Start).Seconds(), values: v, pos: pos})
	j.totals.Add(v)
	if s.End.After(j.lastSample) {
		j.lastSample = s.End
	}
	j.dirty = true
	t.dirtyJobs[id] = struct{}{}
	t.closeWindows(j, j.lastSample)
	return nil
}

// windowFor is the index of the window a sample counts in for job j, or
// ErrLate when the job ended more than the grace before the sample or
// the window is closed.
func (t *Tracker) windowFor(j *job, s *report.Sample) (int, error) {
	if j.meta.Ended() && s.End.After(j.meta.End.Add(t.opts.Grace)) {
		return 0, fmt.Errorf("%w: job %s ended %s, sample ends %s", ErrLate, j.meta.ID, j.meta.End, s.End)
	}
	idx := j.windowIndex(s.End, t.opts.Window)
	if idx < j.closed {
		return 0, fmt.Errorf("%w: job %s window %d already closed", ErrLate, j.meta.ID, idx)
	}
	return idx, nil
}

func (t *Tracker) newJob(meta model.JobMeta) *job {
	j := newJob(meta)
	t.jobs[meta.ID] = j
	t.dirtyJobs[meta.ID] = struct{}{}
	t.emit(Event{Kind: JobSeen, Job: meta.ID})
	return j
}

// JobEvent applies a job start or end reported by one of the job's nodes.
// Events are idempotent: each node's prolog and epilog may report the same
// job.
func (t *Tracker) JobEvent(e *report.JobEvent) error {
	if e.Job == "" {
		return fmt.Errorf("%w: job event without job id", ErrBadInterval)
	}
	j := t.jobs[e.Job]
	if j == nil {
		if len(t.jobs) >= t.opts.MaxJobs {
			t.counters.JobsCapped++
			return nil
		}
		j = t.newJob(model.JobMeta{ID: e.Job, Start: e.Time})
	}
	m := &j.meta
	m.Announced = true
	m.User = cmp.Or(e.User, m.User)
	m.Account = cmp.Or(e.Account, m.Account)
	m.Name = cmp.Or(e.Name, m.Name)
	for _, n := range append(slices.Clone(e.Nodes), e.Node) {
		if n != "" && !slices.Contains(m.Nodes, n) {
			m.Nodes = append(m.Nodes, n)
		}
	}
	slices.Sort(m.Nodes)
	if e.Type == report.JobEnd && (m.End.IsZero() || e.Time.Before(m.End)) {
		m.End = e.Time
		m.Exit = e.ExitCode
	}
	t.dirtyJobs[e.Job] = struct{}{}
	return nil
}

// Tick closes windows whose grace has passed, evaluates the live window of
// every job that got samples since the last tick, and ends jobs whose end
// (announced, or silence) lies more than the grace behind the watermark.
func (t *Tracker) Tick() {
	wm := t.watermark
	for _, id := range t.sortedJobIDs() {
		j := t.jobs[id]
		if j.finished {
			if wm.Sub(j.meta.End) > t.opts.KeepEnded {
				delete(t.jobs, id)
				t.gone = append(t.gone, id)
			}
			continue
		}
		t.closeWindows(j, wm)
		if j.dirty {
			t.evaluate(j)
			j.dirty = false
		}
		if !j.meta.Ended() && !j.lastSample.IsZero() && wm.Sub(j.lastSample) > t.opts.Silent {
			j.meta.End = j.lastSample // taken as ended: no samples for too long
		}
		if j.meta.Ended() && wm.Sub(j.meta.End) >= t.opts.Grace {
			t.finish(j)
		}
	}
}

func (t *Tracker) sortedJobIDs() []string {
	ids := make([]string, 0, len(t.jobs))
	for id := range t.jobs {
		ids = append(ids, id)
	}
	slices.Sort(ids)
	return ids
}

// finish closes an ended job's open windows and clears its flags.
func (t *Tracker) finish(j *job) {
	t.closeWindows(j, time.Time{}) // zero: close everything
	for _, f := range j.streaks.ClearAll(j.meta.End) {
		t.emit(Event{Kind: FlagCleared, Job: j.meta.ID, Flag: f})
	}
	j.finished = true
	j.live = map[string][]slice{}
	t.dirtyJobs[j.meta.ID] = struct{}{}
	t.emit(Event{Kind: JobEnded, Job: j.meta.ID})
}

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

func (t *Tracker) emit(e Event) { t.events = append(t.events, e) }

// Drain returns the events since the last call, oldest first.
func (t *Tracker) Drain() []Event {
	ev := t.events
	t.events = nil
	return ev
}
