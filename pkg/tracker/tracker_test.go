package tracker_test

import (
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/report"
	"sluice/pkg/tracker"
)

var t0 = time.Date(2026, 3, 2, 14, 0, 0, 0, time.UTC)

func newTracker(t *testing.T, o tracker.Options) *tracker.Tracker {
	t.Helper()
	tr, err := tracker.New(o)
	require.NoError(t, err)
	return tr
}

// sample builds node's sample number seq covering [t0+from, t0+to).
func sample(node string, seq uint64, from, to time.Duration, jobs []string, v metric.Values) *report.Sample {
	return &report.Sample{Node: node, Seq: seq, Start: t0.Add(from), End: t0.Add(to), Jobs: jobs, Values: v}
}

func vals(pairs ...any) metric.Values {
	var v metric.Values
	for i := 0; i < len(pairs); i += 2 {
		v[pairs[i].(metric.ID)] = uint64(pairs[i+1].(int))
	}
	return v
}

func startJob(t *testing.T, tr *tracker.Tracker, id string, nodes ...string) {
	t.Helper()
	require.NoError(t, tr.JobEvent(&report.JobEvent{Type: report.JobStart, Job: id, Node: nodes[0], Nodes: nodes, Time: t0, User: "ambrel"}))
}

func TestWindowIsMeanOfNodeRates(t *testing.T) {
	tr := newTracker(t, tracker.Options{Window: time.Minute, Live: 10 * time.Second, Grace: time.Second})
	startJob(t, tr, "81230", "bw001", "bw002")
	// bw001: 600 creates over 60 s = 10/s. bw002: 300 over its 30 s of
	// samples = 10/s... and 900 opens over 30 s = 30/s. Hand-computed
	// means: creates (10+10)/2 = 10, opens (0+30)/2 = 15.
	for i := range 6 {
		from := time.Duration(i) * 10 * time.Second
		require.NoError(t, tr.Sample(sample("bw001", uint64(i+1), from, from+10*time.Second, []string{"81230"}, vals(metric.Creates, 100))))
	}
	for i := range 3 {
		from := 30*time.Second + time.Duration(i)*10*time.Second
		require.NoError(t, tr.Sample(sample("bw002", uint64(i+1), from, from+10*time.Second, []string{"81230"}, vals(metric.Creates, 100, metric.Opens, 300))))
	}
	// A sample past the window end plus grace closes window 0.
	require.NoError(t, tr.Sample(sample("bw001", 7, 60*time.Second, 65*time.Second, []string{"81230"}, metric.Values{})))
	var closed []tracker.Event
	for _, e := range tr.Drain() {
		if e.Kind == tracker.WindowClosed {
			closed = append(closed, e)
		}
	}
	require.Len(t, closed, 1)
	w := closed[0].Window
	assert.Equal(t, 0, w.Index)
	assert.Equal(t, 2, w.Nodes)
	assert.InDelta(t, 10.0, w.Rates[metric.Creates], 1e-12)
	assert.InDelta(t, 15.0, w.Rates[metric.Opens], 1e-12)
	assert.Equal(t, t0, w.Start)
	assert.Equal(t, t0.Add(time.Minute), w.End)
}

func TestBoundarySampleBelongsToTheWindowItEnds(t *testing.T) {
	tr := newTracker(t, tracker.Options{Window: time.Minute, Live: 10 * time.Second, Grace: time.Second})
	startJob(t, tr, "7", "n1")
	require.NoError(t, tr.Sample(sample("n1", 1, 50*time.Second, 60*time.Second, []string{"7"}, vals(metric.Syncs, 10))))
	require.NoError(t, tr.Sample(sample("n1", 2, 60*time.Second, 70*time.Second, []string{"7"}, vals(metric.Syncs, 50))))
	tr.Tick()
	sum, ok := tr.Job("7")
	require.True(t, ok)
	require.NotNil(t, sum.LastWindow)
	assert.Equal(t, 0, sum.LastWindow.Index)
	assert.InDelta(t, 1.0, sum.LastWindow.Rates[metric.Syncs], 1e-12) // 10 over 10 s
}

func TestDuplicateAndStaleSamplesChangeNothing(t *testing.T) {
	tr := newTracker(t, tracker.Options{DedupeSpan: 64})
	startJob(t, tr, "1", "n1")
	s := sample("n1", 1, 0, 5*time.Second, []string{"1"}, vals(metric.Opens, 5))
	require.NoError(t, tr.Sample(s))
	tr.Tick()
	before, _ := tr.Job("1")
	assert.ErrorIs(t, tr.Sample(s), tracker.ErrDuplicate)
	tr.Tick()
	after, _ := tr.Job("1")
	assert.Equal(t, before, after, "a replayed sample changes nothing")
	for seq := uint64(2); seq <= 100; seq++ {
		from := time.Duration(seq-1) * 5 * time.Second
		require.NoError(t, tr.Sample(sample("n1", seq, from, from+5*time.Second, []string{"1"}, metric.Values{})))
	}
	assert.ErrorIs(t, tr.Sample(sample("n1", 10, 45*time.Second, 50*time.Second, []string{"1"}, metric.Values{})), tracker.ErrStale)
	assert.ErrorIs(t, tr.Sample(sample("n1", 99, 0, 5*time.Second, []string{"1"}, metric.Values{})), tracker.ErrDuplicate)
	assert.Equal(t, uint64(100), tr.Counters().Applied)
}

func TestBadIntervalRejected(t *testing.T) {
	tr := newTracker(t, tracker.Options{})
	assert.ErrorIs(t, tr.Sample(sample("n1", 1, 5*time.Second, 0, nil, metric.Values{})), tracker.ErrBadInterval)
	assert.ErrorIs(t, tr.Sample(sample("", 1, 0, time.Second, nil, metric.Values{})), tracker.ErrBadInterval)
	assert.Zero(t, tr.Counters().Applied)
}

// feed sends one 5 s sample per step with the given per-node creates rate.
func feed(t *testing.T, tr *tracker.Tracker, seq *uint64, at *time.Duration, rate int) {
	t.Helper()
	*seq++
	require.NoError(t, tr.Sample(sample("n1", *seq, *at, *at+5*time.Second, []string{"9"}, vals(metric.Creates, rate*5))))
	*at += 5 * time.Second
	tr.Tick()
}

func flagEvents(tr *tracker.Tracker) (raised, cleared int) {
	for _, e := range tr.Drain() {
		switch e.Kind {
		case tracker.FlagRaised:
			raised++
		case tracker.FlagCleared:
			cleared++
		}
	}
	return raised, cleared
}

func TestHysteresisRaisesOnceAndClears(t *testing.T) {
	cut := coding.DefaultCuts()[metric.Creates].Critical
	// Live window of one sample, so each evaluation sees one step's rate.
	tr := newTracker(t, tracker.Options{Window: time.Hour, Live: 5 * time.Second, RaiseAfter: 2, ClearAfter: 3})
	startJob(t, tr, "9", "n1")
	var seq uint64
	var at time.Duration
	high, low := int(cut)*2, int(cut)/2

	feed(t, tr, &seq, &at, high) // one above: not yet
	r, _ := flagEvents(tr)
	assert.Zero(t, r)
	feed(t, tr, &seq, &at, high) // two above: raised
	r, _ = flagEvents(tr)
	assert.Equal(t, 1, r)
	sum, _ := tr.Job("9")
	require.Len(t, sum.ActiveFlags, 1)
	f := sum.ActiveFlags[0]
	assert.Equal(t, model.HighRateOf(metric.Creates), f.Reason)
	assert.Equal(t, "high_rate:creates", f.Reason.String())
	assert.Equal(t, t0.Add(5*time.Second), f.Since, "since = first evaluation above the cut")
	assert.InDelta(t, cut, f.Cut, 0)

	// Oscillate around the cut: below twice, above once, repeatedly.
	// ClearAfter 3 is never reached, so the flag neither clears nor repeats.
	for range 5 {
		feed(t, tr, &seq, &at, low)
		feed(t, tr, &seq, &at, low)
		feed(t, tr, &seq, &at, high)
	}
	r, c := flagEvents(tr)
	assert.Zero(t, r)
	assert.Zero(t, c)
	for range 3 {
		feed(t, tr, &seq, &at, low)
	}
	_, c = flagEvents(tr)
	assert.Equal(t, 1, c)
	sum, _ = tr.Job("9")
	assert.Empty(t, sum.ActiveFlags)
}

func TestJobEndClosesWindowsAndClearsFlags(t *testing.T) {
	tr := newTracker(t, tracker.Options{Window: time.Minute, Live: 10 * time.Second, Grace: 5 * time.Second, RaiseAfter: 1})
	startJob(t, tr, "5", "n1")
	require.NoError(t, tr.Sample(sample("n1", 1, 0, 10*time.Second, []string{"5"}, vals(metric.StatOps, 500000))))
	tr.Tick()
	require.NoError(t, tr.JobEvent(&report.JobEvent{Type: report.JobEnd, Job: "5", Node: "n1", Time: t0.Add(12 * time.Second)}))
	// The last interval, ending after the job end but within the grace.
	require.NoError(t, tr.Sample(sample("n1", 2, 10*time.Second, 15*time.Second, []string{"5"}, metric.Values{})))
	// A sample of another node moves the watermark past end + grace.
	require.NoError(t, tr.Sample(sample("n2", 1, 15*time.Second, 20*time.Second, nil, metric.Values{})))
	assert.ErrorIs(t, tr.Sample(sample("n1", 3, 15*time.Second, 20*time.Second, []string{"5"}, metric.Values{})), tracker.ErrLate)
	tr.Tick()
	kinds := map[tracker.EventKind]int{}
	for _, e := range tr.Drain() {
		kinds[e.Kind]++
		if e.Kind == tracker.WindowClosed {
			assert.Equal(t, t0.Add(12*time.Second), e.Window.End, "the last window ends at the job end")
		}
	}
	assert.Equal(t, 1, kinds[tracker.FlagRaised])
	assert.Equal(t, 1, kinds[tracker.FlagCleared])
	assert.Equal(t, 1, kinds[tracker.WindowClosed])
	assert.Equal(t, 1, kinds[tracker.JobEnded])
	sum, _ := tr.Job("5")
	assert.Equal(t, model.JobEnded, sum.State)
}

func TestSharedNodeUsesPerJobSplitWhenGiven(t *testing.T) {
	tr := newTracker(t, tracker.Options{Window: time.Minute, Live: 10 * time.Second})
	s := sample("n1", 1, 0, 10*time.Second, []string{"a", "b"}, vals(metric.Opens, 100))
	s.PerJob = []report.JobValues{{Job: "a", Values: vals(metric.Opens, 30)}}
	require.NoError(t, tr.Sample(s))
	tr.Tick()
	a, _ := tr.Job("a")
	b, _ := tr.Job("b")
	assert.InDelta(t, 3.0, a.Live[metric.Opens], 1e-12)
	assert.InDelta(t, 10.0, b.Live[metric.Opens], 1e-12, "no split for b: the node's whole value")
	assert.False(t, a.Announced)
}

// TestRestoreResumesExactly saves a tracker's records halfway through
// (as the store keeps them: no open or live window sums), restores them
// into a fresh tracker, sums the open windows again from the stream
// positions ReplayFrom gives, and checks both trackers then agree.
func TestRestoreResumesExactly(t *testing.T) {
	opts := tracker.Options{Window: time.Minute, Live: 20 * time.Second, Grace: time.Second, RaiseAfter: 1}
	a := newTracker(t, opts)
	startJob(t, a, "3", "n1", "n2")
	var samples []*report.Sample
	for i := range 40 {
		from := time.Duration(i) * 5 * time.Second
		for _, n := range []string{"n1", "n2"} {
			samples = append(samples, sample(n, uint64(i+1), from, from+5*time.Second, []string{"3"}, vals(metric.Creates, 1000*(i%7), metric.WriteBytes, 1<<20*i)))
		}
	}
	// Sample k (from 1) is node n1 or n2 of step (k-1)/2, ending at
	// 5*((k-1)/2+1) s. Window 0 closed with sample 25 (60..65 s); the tick
	// at sample 28 (65..70 s) kept the live window's samples ending after
	// 50 s: from sample 21 on.
	half := 30
	for i, s := range samples[:half] {
		require.NoError(t, a.SampleAt(s, uint64(i+1)))
		if i+1 == 28 {
			a.Tick()
		}
	}
	a.Drain()
	jobs, _ := a.DirtyJobs()
	b := newTracker(t, opts)
	require.NoError(t, b.Restore(jobs, a.DirtyNodes(), a.Watermark()))
	from := a.ReplayFrom()
	require.Equal(t, uint64(21), from, "the live window's first sample; window 1 begins at 25")

	for i := from; i <= uint64(half); i++ {
		b.Rebuild(samples[i-1], i)
	}
	b.Rebuild(samples[half-1], uint64(half)) // a second copy is summed once
	b.EndRebuild()
	// The first half is applied already; the second half gives both
	// trackers the same result.
	for _, s := range samples[:half] {
		assert.ErrorIs(t, b.Sample(s), tracker.ErrDuplicate)
	}
	for i, s := range samples[half:] {
		require.NoError(t, a.SampleAt(s, uint64(half+i+1)))
		require.NoError(t, b.SampleAt(s, uint64(half+i+1)))
	}
	a.Tick()
	b.Tick()
	sa, _ := a.Job("3")
	sb, _ := b.Job("3")
	assert.Equal(t, sa, sb)
	ea, eb := a.Drain(), b.Drain()
	require.Len(t, ea, 2, "windows 1 and 2 closed after the restart")
	assert.Equal(t, ea, eb)
}

// TestOscillationRaisesAtMostOneFlag feeds a creates rate that crosses the
// critical cut (1000/s by default) back and forth: twice above, once
// below, for many rounds. With RaiseAfter 2 and ClearAfter 3 one flag is
// raised and never cleared while the oscillation lasts.
func TestOscillationRaisesAtMostOneFlag(t *testing.T) {
	tr := newTracker(t, tracker.Options{Window: time.Hour, Live: 10 * time.Second, Grace: time.Second})
	startJob(t, tr, "81234", "bw001")
	raised, cleared := 0, 0
	for i := range 60 {
		creates := 12000 // 1200/s over 10 s: above
		if i%3 == 2 {
			creates = 8000 // 800/s: below
		}
		from := time.Duration(i) * 10 * time.Second
		require.NoError(t, tr.Sample(sample("bw001", uint64(i+1), from, from+10*time.Second, []string{"81234"}, vals(metric.Creates, creates))))
		tr.Tick()
		for _, e := range tr.Drain() {
			switch e.Kind {
			case tracker.FlagRaised:
				raised++
			case tracker.FlagCleared:
				cleared++
			}
		}
	}
	assert.Equal(t, 1, raised)
	assert.Equal(t, 0, cleared)
}

// TestWindowsAreCodedAgainstTheCodingInForce checks levels and grades of a
// closed window on hand-picked cuts, and that the signature grows with it.
func TestWindowsAreCodedAgainstTheCodingInForce(t *testing.T) {
	tr := newTracker(t, tracker.Options{Window: time.Minute, Live: 10 * time.Second, Grace: time.Second})
	c := tr.Coding()
	c.Levels[metric.Creates] = coding.Cut{Elevated: 50, Critical: 100}
	c.Grades[metric.Creates] = [5]float64{2, 5, 10, 50, 100}
	tr.SetCoding(c)
	startJob(t, tr, "81234", "bw001", "bw002")
	// bw001 20 creates/s and bw002 100 creates/s: mean 60/s, above the
	// elevated cut 50: level elevated, grade 5. Bytes: bw001 3 MB/s,
	// bw002 1 MB/s: busiest share 3/4; CV = sd(3,1)/mean(3,1) = 1/2.
	for i := range 6 {
		from := time.Duration(i) * 10 * time.Second
		require.NoError(t, tr.Sample(sample("bw001", uint64(i+1), from, from+10*time.Second, []string{"81234"}, vals(metric.Creates, 200, metric.WriteBytes, 30_000_000))))
		require.NoError(t, tr.Sample(sample("bw002", uint64(i+1), from, from+10*time.Second, []string{"81234"}, vals(metric.Creates, 1000, metric.WriteBytes, 10_000_000))))
	}
	require.NoError(t, tr.Sample(sample("bw001", 7, 60*time.Second, 65*time.Second, []string{"81234"}, metric.Values{})))
	var w *tracker.Event
	for _, e := range tr.Drain() {
		if e.Kind == tracker.WindowClosed {
			w = &e
		}
	}
	require.NotNil(t, w)
	assert.Equal(t, coding.Elevated, w.Window.Levels[metric.Creates])
	assert.EqualValues(t, 5, w.Window.Grades[metric.Creates])
	assert.EqualValues(t, 0, w.Window.Grades[metric.Syncs], "idle")
	assert.InDelta(t, 0.75, w.Window.BusiestShare, 1e-12)
	assert.InDelta(t, 0.5, w.Window.NodeSpread, 1e-12)
	s, ok := tr.Job("81234")
	require.True(t, ok)
	assert.Equal(t, "5", s.Signature["creates"])
}
