// Package eval measures the quality of a pattern library on labelled
// scenarios (sim.Labelled): how many injected problems each pattern finds
// (recall), how many of its flags are right (precision), how many benign
// jobs it flags, and how long after the onset it raises its flag.
//
// # Basics
//
// [Run] first learns the cut points as the aggregator does: it generates
// the centre's ordinary jobs (sim.Ordinary), adds each closed window's
// per-node rate per metric to a baseline.Baseline and builds the tracker
// coding from its cuts with coding.Assemble, as the aggregator does (learned
// metrics take the learned cuts and grade cuts, the others the seed
// coding). It then generates the labelled jobs, scaled by those cuts, and
// replays them interleaved, as agents would send them: one report.Sample per
// node per minute, start and end events, Tick after every minute. Every
// pattern flag raised is recorded against the job's label.
//
// Per pattern P (PatternResult): recall is the share of jobs labelled P that got a
// P flag raised at or after the onset; precision the share of jobs flagged
// with P that are labelled P; false flags are P flags on benign jobs per
// 1,000 benign jobs, where a benign job is one labelled "" or, for every
// pattern but heavy_streaming, heavy_streaming (healthy streaming is a
// positive for heavy_streaming only); the delay is the first such flag's
// Raised time minus the onset, in windows. The overall figure is the share
// of benign jobs (label "" or heavy_streaming) flagged by any pattern but
// heavy_streaming.
//
// # Caveats
//
// The baseline is learned from ordinary jobs only, a centre whose windows
// hold no problems; at a real centre the few problem windows push the top
// cuts up a little. The scenarios are a model (see sim/labelled.go), so
// the figures say how the library does on that model, not at a site.
package eval

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"time"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/pattern"
	"sluice/pkg/report"
	"sluice/pkg/sim"
	"sluice/pkg/tracker"
)

// The targets every built-in pattern is held to.
const (
	RecallTarget        = 0.95
	PrecisionTarget     = 0.95
	MedianDelayTarget   = 2.0  // windows
	BenignFlaggedTarget = 0.01 // share of benign jobs flagged by a problem pattern
)

// Options configures Run. The zero value of each field means its default.
type Options struct {
	// Jobs is the number of labelled jobs; zero means 1000.
	Jobs int
	// Seed makes the scenarios; zero means 1.
	Seed uint64
	// BaselineJobs is the number of ordinary jobs the cut points are
	// learned from; zero means 6000 (some 130,000 job-windows, a month at
	// a small centre).
	BaselineJobs int
	// Patterns is the library; nil means the built-ins.
	Patterns []*pattern.Pattern
	// Window, Live and Step are the window, live window and sample
	// interval; zero means 10 minutes, 1 minute and 1 minute.
	Window, Live, Step time.Duration
	// Start is when the first job starts; zero means 2026-03-02 00:00 UTC.
	Start time.Time
}

func (o Options) withDefaults() Options {
	o.Jobs = cmp.Or(o.Jobs, 1000)
	o.Seed = cmp.Or(o.Seed, 1)
	o.BaselineJobs = cmp.Or(o.BaselineJobs, 6000)
	o.Window = cmp.Or(o.Window, 10*time.Minute)
	o.Live = cmp.Or(o.Live, time.Minute)
	o.Step = cmp.Or(o.Step, time.Minute)
	if o.Start.IsZero() {
		o.Start = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	}
	return o
}

// PatternResult is one pattern's figures.
type PatternResult struct {
	Pattern string
	// Builtin is set when the pattern is a built-in (its Source starts
	// with "builtin/"): the targets apply to it.
	Builtin bool
	// Positives are the jobs labelled with the pattern; Found those of
	// them flagged with it at or after the onset.
	Positives, Found int
	// Flagged are the jobs flagged with the pattern; Correct those of
	// them labelled with it.
	Flagged, Correct int
	// Benign is the number of benign jobs for this pattern, FalseFlags
	// those of them it flagged.
	Benign, FalseFlags int
	// Delays are the detection delays in windows, one per found job,
	// ascending.
	Delays []float64
	// Others counts the pattern's flags on jobs labelled with another
	// problem, by label.
	Others map[string]int
}

// Recall is Found/Positives, NaN without positives.
func (r PatternResult) Recall() float64 { return ratio(r.Found, r.Positives) }

// Precision is Correct/Flagged, NaN when nothing was flagged.
func (r PatternResult) Precision() float64 { return ratio(r.Correct, r.Flagged) }

// FalsePer1000 is the false flags per 1,000 benign jobs.
func (r PatternResult) FalsePer1000() float64 { return 1000 * ratio(r.FalseFlags, r.Benign) }

// MedianDelay and P90Delay are quantiles of Delays (nearest rank), NaN
// when nothing was found.
func (r PatternResult) MedianDelay() float64 { return quantile(r.Delays, 0.5) }

// P90Delay is the 90th percentile of Delays.
func (r PatternResult) P90Delay() float64 { return quantile(r.Delays, 0.9) }

// Misses lists the targets the row misses; a pattern without labelled
// positives is held only to precision, since every flag it raises lands
// on a job injected with something else or nothing.
func (r PatternResult) Misses() []string {
	var m []string
	if r.Positives > 0 {
		if !(r.Recall() >= RecallTarget) {
			m = append(m, fmt.Sprintf("recall %.3f < %.2f", r.Recall(), RecallTarget))
		}
		if !(r.MedianDelay() <= MedianDelayTarget) {
			m = append(m, fmt.Sprintf("median delay %.2f > %.1f windows", r.MedianDelay(), MedianDelayTarget))
		}
	}
	if r.Flagged > 0 && !(r.Precision() >= PrecisionTarget) {
		m = append(m, fmt.Sprintf("precision %.3f < %.2f", r.Precision(), PrecisionTarget))
	}
	if r.Positives > 0 && r.Flagged == 0 {
		m = append(m, "never flagged")
	}
	return m
}

// Result is one evaluation.
type Result struct {
	Options Options
	// Jobs counts the labelled jobs by class.
	Jobs map[string]int
	// Rows holds one row per pattern, in library order.
	Rows []PatternResult
	// Benign is the number of benign jobs (label "" or heavy_streaming);
	// BenignFlagged those flagged by any pattern but heavy_streaming.
	Benign, BenignFlagged int
	// FlaggedByClass counts the benign jobs flagged, by class.
	FlaggedByClass map[string]int
	// Coding is the coding the jobs were evaluated against; Bases says
	// which metrics' cuts were learned (the others are seeds).
	Coding coding.Coding
	Bases  coding.Bases
	// BaselineWindows is the number of job-windows the baseline holds.
	BaselineWindows int
	// Samples is the number of samples replayed.
	Samples int
	// Outcomes lists every job whose flags disagree with its label: a
	// missed positive, a flag on another job, or a flag before the
	// onset; in job order.
	Outcomes []Outcome
}

// Outcome is one job's label and flags.
type Outcome struct {
	Job                   string
	Class, Label, Variant string
	Nodes, Windows        int
	// Onset and Until bound the injected behaviour (offsets from the
	// job's start); Intensity is its strength (see sim.LabelledJob).
	Onset, Until time.Duration
	Intensity    float64
	// Flags holds each pattern that flagged the job and when its first
	// flag was raised, as an offset from the job's start.
	Flags map[string]time.Duration
}

// BenignFlaggedShare is BenignFlagged/Benign.
func (r *Result) BenignFlaggedShare() float64 { return ratio(r.BenignFlagged, r.Benign) }

// Row returns the named pattern's result row.
func (r *Result) Row(name string) (PatternResult, bool) {
	for _, row := range r.Rows {
		if row.Pattern == name {
			return row, true
		}
	}
	return PatternResult{}, false
}

// Run evaluates the library on the labelled scenarios.
func Run(o Options) (*Result, error) {
	o = o.withDefaults()
	ps := o.Patterns
	if ps == nil {
		var err error
		if ps, err = pattern.Builtin(); err != nil {
			return nil, err
		}
	}
	lib, err := matcher.Compile(ps)
	if err != nil {
		return nil, fmt.Errorf("eval: %w", err)
	}
	res := &Result{Options: o, Jobs: map[string]int{}, FlaggedByClass: map[string]int{}}
	c, bases, windows, err := learn(o)
	if err != nil {
		return nil, err
	}
	res.Coding, res.Bases, res.BaselineWindows = c, bases, windows

	jobs := sim.Labelled(sim.LabelledOptions{
		Jobs: o.Jobs, Seed: o.Seed, Step: o.Step, Window: o.Window,
		Reference: sim.Reference{Cuts: c.Levels, Grades: c.Grades},
	})
	tr, err := tracker.New(tracker.Options{Window: o.Window, Live: o.Live, Patterns: lib, KeepEnded: o.Window})
	if err != nil {
		return nil, fmt.Errorf("eval: %w", err)
	}
	tr.SetCoding(c)
	starts := jobStarts(jobs, o)
	flags, samples, err := replay(tr, jobs, starts, o, nil)
	if err != nil {
		return nil, err
	}
	res.Samples = samples
	score(res, ps, jobs, starts, flags, o)
	return res, nil
}

// learn builds the coding from the ordinary jobs' windows, as
// pkg/aggregate's learner does.
func learn(o Options) (coding.Coding, coding.Bases, int, error) {
	b, err := baseline.New(nil)
	if err != nil {
		return coding.Coding{}, coding.Bases{}, 0, fmt.Errorf("eval: %w", err)
	}
	day := baseline.DayOf(o.Start)
	windows := 0
	for _, j := range sim.Ordinary(sim.LabelledOptions{Jobs: o.BaselineJobs, Seed: o.Seed ^ 0x5eed, Step: o.Step, Window: o.Window}) {
		for _, rates := range windowRates(&j) {
			for i, r := range rates {
				_ = b.Add(day, metric.ID(i), r) // a refusal is counted by the baseline
			}
			windows++
		}
	}
	th := b.Cuts(o.Start)
	c, bases := coding.Assemble(coding.DefaultCuts(), th.Learned())
	return c, bases, windows, nil
}

// windowRates returns a job's window values as the tracker computes them:
// per window, the mean over nodes of each node's rate (sum of its deltas
// over the seconds its samples cover).
func windowRates(j *sim.LabelledJob) []metric.Rates {
	out := make([]metric.Rates, 0, j.Windows())
	perWindow := int(j.Window() / j.Step())
	sum := make([]metric.Values, j.Nodes)
	n := 0
	flush := func() {
		if n == 0 {
			return
		}
		secs := float64(n) * j.Step().Seconds()
		var r metric.Rates
		for _, v := range sum {
			for i, x := range v {
				r[i] += float64(x) / secs
			}
		}
		for i := range r {
			r[i] /= float64(len(sum))
		}
		out = append(out, r)
		clear(sum)
		n = 0
	}
	s := j.Stream()
	for {
		vals, ok := s.Next()
		if !ok {
			break
		}
		for k := range vals {
			sum[k].Add(vals[k])
		}
		if n++; n == perWindow {
			flush()
		}
	}
	flush()
	return out
}

// flagRecord is one pattern flag raised on a job.
type flagRecord struct {
	job, pattern string
	raised       time.Time
}

// replay feeds the jobs through the tracker, interleaved: job k starts a
// few minutes after job k-1, so that dozens run at once. It returns every
// pattern flag raised and the number of samples sent. ticked, if not nil,
// is called after every tick, before the tick's events are drained.
func replay(tr *tracker.Tracker, jobs []sim.LabelledJob, starts []time.Time, o Options, ticked func()) ([]flagRecord, int, error) {
	r := &replayer{tr: tr, ticked: ticked}
	next, now := 0, o.Start
	for next < len(jobs) || len(r.active) > 0 {
		for ; next < len(jobs) && !starts[next].After(now); next++ {
			if err := r.start(&jobs[next], starts[next]); err != nil {
				return nil, 0, err
			}
		}
		end := now.Add(o.Step)
		if err := r.step(now, end); err != nil {
			return nil, 0, err
		}
		r.tick()
		now = end
	}
	// A node outside every job moves the watermark on so that the last
	// jobs' windows close and the jobs end.
	for i := range 3 {
		sample := report.Sample{Node: "bw-idle", Seq: uint64(i + 1), Start: now, End: now.Add(o.Step)}
		if err := tr.Sample(&sample); err != nil {
			return nil, 0, fmt.Errorf("eval: %w", err)
		}
		now = now.Add(o.Step)
		r.tick()
	}
	return r.flags, r.samples, nil
}

// replayer is one replay's state: the jobs running, the flags raised and
// the samples sent so far.
type replayer struct {
	tr      *tracker.Tracker
	ticked  func()
	active  []*running
	flags   []flagRecord
	samples int
	sample  report.Sample // reused
}

// running is one job being replayed.
type running struct {
	j      *sim.LabelledJob
	s      *sim.Stream
	step   int
	seq    []uint64
	idList []string
}

// start announces a job and makes it running.
func (r *replayer) start(j *sim.LabelledJob, at time.Time) error {
	err := r.tr.JobEvent(&report.JobEvent{Type: report.JobStart, Job: j.ID, Node: j.NodeNames[0], Time: at,
		User: j.User, Account: j.Account, Name: j.Name, Nodes: j.NodeNames})
	if err != nil {
		return fmt.Errorf("eval: job %s start: %w", j.ID, err)
	}
	r.active = append(r.active, &running{j: j, s: j.Stream(), seq: make([]uint64, j.Nodes), idList: []string{j.ID}})
	return nil
}

// step sends every running job's samples for [now, end) and ends the jobs
// whose last step it was.
func (r *replayer) step(now, end time.Time) error {
	keep := r.active[:0]
	for _, job := range r.active {
		vals, ok := job.s.Next()
		if !ok {
			continue
		}
		for k, v := range vals {
			job.seq[k]++
			r.sample = report.Sample{Node: job.j.NodeNames[k], Seq: job.seq[k], Start: now, End: end, Jobs: job.idList, Values: v}
			if err := r.tr.Sample(&r.sample); err != nil {
				return fmt.Errorf("eval: job %s: %w", job.j.ID, err)
			}
			r.samples++
		}
		job.step++
		if job.step < job.j.Steps() {
			keep = append(keep, job)
			continue
		}
		err := r.tr.JobEvent(&report.JobEvent{Type: report.JobEnd, Job: job.j.ID, Node: job.j.NodeNames[0], Time: end})
		if err != nil {
			return fmt.Errorf("eval: job %s end: %w", job.j.ID, err)
		}
	}
	r.active = keep
	return nil
}

// tick ticks the tracker and keeps the pattern flags it raised.
func (r *replayer) tick() {
	r.tr.Tick()
	if r.ticked != nil {
		r.ticked()
	}
	for _, e := range r.tr.Drain() {
		if e.Kind == tracker.FlagRaised && e.Flag != nil && e.Flag.Pattern != "" {
			r.flags = append(r.flags, flagRecord{job: e.Job, pattern: e.Flag.Pattern, raised: e.Flag.Raised})
		}
	}
}

// score turns the flags into the rows, the outcomes and the benign counts.
func score(res *Result, ps []*pattern.Pattern, jobs []sim.LabelledJob, starts []time.Time, flags []flagRecord, o Options) {
	for i := range jobs {
		res.Jobs[jobs[i].Class]++
	}
	x := indexFlags(jobs, starts, flags)
	for _, p := range ps {
		res.Rows = append(res.Rows, x.row(p, jobs, starts, o.Window))
	}
	for i := range jobs {
		j := &jobs[i]
		if out, odd := x.outcome(i, j, starts[i]); odd {
			res.Outcomes = append(res.Outcomes, out)
		}
		if !benign(j) {
			continue
		}
		res.Benign++
		if x.flaggedByProblem(i) {
			res.BenignFlagged++
			res.FlaggedByClass[j.Class]++
		}
	}
}

// jobFlags indexes the flags by job (its index in the jobs) and pattern.
type jobFlags struct {
	// firstAny[job][p]: the first flag of p on job;
	// first[p][job]: the first flag of p on job at or after the onset;
	// flagged[p][job]: p flagged job at all.
	firstAny map[int]map[string]time.Time
	first    map[string]map[int]time.Time
	flagged  map[string]map[int]bool
}

// indexFlags indexes the flags raised on the jobs; a flag on a job not
// among them is left out.
func indexFlags(jobs []sim.LabelledJob, starts []time.Time, flags []flagRecord) *jobFlags {
	byID := make(map[string]int, len(jobs))
	for i := range jobs {
		byID[jobs[i].ID] = i
	}
	x := &jobFlags{firstAny: map[int]map[string]time.Time{}, first: map[string]map[int]time.Time{}, flagged: map[string]map[int]bool{}}
	for _, f := range flags {
		if i, ok := byID[f.job]; ok {
			x.add(i, f, starts[i].Add(jobs[i].Onset))
		}
	}
	return x
}

// add records flag f on job i, whose injection began at onset.
func (x *jobFlags) add(i int, f flagRecord, onset time.Time) {
	if x.flagged[f.pattern] == nil {
		x.flagged[f.pattern], x.first[f.pattern] = map[int]bool{}, map[int]time.Time{}
	}
	x.flagged[f.pattern][i] = true
	if x.firstAny[i] == nil {
		x.firstAny[i] = map[string]time.Time{}
	}
	keepEarliest(x.firstAny[i], f.pattern, f.raised)
	if !f.raised.Before(onset) {
		keepEarliest(x.first[f.pattern], i, f.raised)
	}
}

// keepEarliest sets m[k] to t unless it holds an earlier time.
func keepEarliest[K comparable](m map[K]time.Time, k K, t time.Time) {
	if old, ok := m[k]; !ok || t.Before(old) {
		m[k] = t
	}
}

// benign says whether nothing was injected into the job or only healthy
// streaming, which is a positive for heavy_streaming alone.
func benign(j *sim.LabelledJob) bool {
	return j.Label == "" || j.Label == sim.LabelHeavyStreaming
}

// row scores pattern p on the jobs. A job labelled p is a positive; any
// other benign job counts for its false flags.
func (x *jobFlags) row(p *pattern.Pattern, jobs []sim.LabelledJob, starts []time.Time, window time.Duration) PatternResult {
	row := PatternResult{Pattern: p.Name, Builtin: len(p.Source) >= 8 && p.Source[:8] == "builtin/", Others: map[string]int{}}
	for i := range jobs {
		j := &jobs[i]
		flagged := x.flagged[p.Name][i]
		switch {
		case j.Label == p.Name:
			row.Positives++
			if t, ok := x.first[p.Name][i]; ok {
				row.Found++
				row.Delays = append(row.Delays, t.Sub(starts[i].Add(j.Onset)).Seconds()/window.Seconds())
			}
		case benign(j):
			row.Benign++
			if flagged {
				row.FalseFlags++
			}
		case flagged:
			row.Others[j.Label]++
		}
		if flagged {
			row.Flagged++
			if j.Label == p.Name {
				row.Correct++
			}
		}
	}
	slices.Sort(row.Delays)
	return row
}

// outcome returns job i's outcome if its flags disagree with its label: a
// missed positive, a flag of another pattern, or a flag before the onset.
func (x *jobFlags) outcome(i int, j *sim.LabelledJob, start time.Time) (Outcome, bool) {
	fl := x.firstAny[i]
	_, found := x.first[j.Label][i]
	odd := j.Label != "" && !found
	for p, t := range fl {
		odd = odd || p != j.Label || t.Before(start.Add(j.Onset))
	}
	if !odd {
		return Outcome{}, false
	}
	out := Outcome{Job: j.ID, Class: j.Class, Label: j.Label, Variant: j.Variant, Nodes: j.Nodes, Windows: j.Windows(),
		Onset: j.Onset, Until: j.Until, Intensity: j.Intensity, Flags: map[string]time.Duration{}}
	for p, t := range fl {
		out.Flags[p] = t.Sub(start)
	}
	return out, true
}

// flaggedByProblem says whether a pattern other than heavy_streaming
// flagged job i.
func (x *jobFlags) flaggedByProblem(i int) bool {
	for p, m := range x.flagged {
		if p != sim.LabelHeavyStreaming && m[i] {
			return true
		}
	}
	return false
}

// jobStarts spaces the jobs' starts 1 to 11 minutes apart (about one job
// every 6 minutes: some 30 to 40 run at once).
func jobStarts(jobs []sim.LabelledJob, o Options) []time.Time {
	starts := make([]time.Time, len(jobs))
	t := o.Start
	for i := range jobs {
		starts[i] = t
		t = t.Add(time.Duration(1+(i*7919)%11) * o.Step)
	}
	return starts
}

func ratio(a, b int) float64 {
	if b == 0 {
		return math.NaN()
	}
	return float64(a) / float64(b)
}

// quantile returns the nearest-rank q-quantile of sorted xs, NaN if empty.
func quantile(xs []float64, q float64) float64 {
	if len(xs) == 0 {
		return math.NaN()
	}
	k := int(math.Ceil(q*float64(len(xs)))) - 1
	return xs[min(max(k, 0), len(xs)-1)]
}
