package store_test

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
	"sluice/pkg/report"
	"sluice/pkg/store"
	"sluice/pkg/tracker"
)

// message is one entry of a simulated stream: a sample or a job event.
type message struct {
	sample *report.Sample
	event  *report.JobEvent
}

// TestRestartThroughTheFileEqualsUninterrupted runs randomized streams
// (jobs of several widths starting and ending, samples on shared nodes,
// second copies of samples) through a tracker that commits to a real
// state file every few messages, as the service does. At a random moment
// the tracker is dropped, as a SIGKILL would; a fresh one is restored
// from the file, sums the open windows again from the stream between
// ReplayFrom and the place saved, and goes on. Every window closed, every
// flag raised or cleared and every job's summary must equal those of a
// run that was never interrupted.
func TestRestartThroughTheFileEqualsUninterrupted(t *testing.T) {
	ps, err := pattern.Builtin()
	require.NoError(t, err)
	lib, err := matcher.Compile(ps)
	require.NoError(t, err)
	opts := tracker.Options{Window: time.Minute, Live: 20 * time.Second, Grace: 5 * time.Second, RaiseAfter: 2, ClearAfter: 2, KeepEnded: 10 * time.Minute, Patterns: lib}
	r := rand.New(rand.NewPCG(5, 8))
	trials := 40
	if testing.Short() {
		trials = 8
	}
	for trial := range trials {
		stream := randomStream(r, trial)
		crash := len(stream)/4 + r.IntN(len(stream)/2)
		tickEvery, flushEvery := 3+r.IntN(20), 1+r.IntN(15)

		whole := run(t, opts, stream, 0, len(stream), tickEvery, flushEvery, filepath.Join(t.TempDir(), "whole.db"), nil)
		path := filepath.Join(t.TempDir(), "crashed.db")
		run(t, opts, stream, 0, crash, tickEvery, flushEvery, path, nil)
		resumed := run(t, opts, stream, crash, len(stream), tickEvery, flushEvery, path, &whole)
		require.Equal(t, whole.summaries, resumed.summaries, "trial %d, crash at %d of %d", trial, crash, len(stream))
	}
}

// outcome is what a run leaves: every event after from, and the jobs.
type outcome struct {
	events    map[int][]tracker.Event // by message index
	summaries []model.Summary
}

// run feeds stream[from:to] to a tracker on the file at path, ticking
// and committing every tickEvery and flushEvery messages (message i is
// at stream position i+1). A run that starts at from > 0 first restores
// the file and rebuilds; want, if set, is the uninterrupted run whose
// events from the last commit on it must repeat.
func run(t *testing.T, opts tracker.Options, stream []message, from, to, tickEvery, flushEvery int, path string, want *outcome) outcome {
	t.Helper()
	st, err := store.Open(path, store.Options{})
	require.NoError(t, err)
	defer st.Close()
	tr, err := tracker.New(opts)
	require.NoError(t, err)
	saved := 0
	if from > 0 {
		saved = restore(t, st, tr, stream)
	}
	out := outcome{events: map[int][]tracker.Event{}}
	var pending []tracker.Event // since the last commit
	for i := saved; i < to; i++ {
		if m := stream[i]; m.sample != nil {
			_ = tr.SampleAt(m.sample, uint64(i+1)) // duplicates and late samples are refused, as in the service
		} else {
			_ = tr.JobEvent(m.event)
		}
		if (i+1)%tickEvery == 0 {
			tr.Tick()
		}
		if ev := tr.Drain(); len(ev) > 0 {
			out.events[i] = ev
			pending = append(pending, ev...)
		}
		if (i+1)%flushEvery == 0 {
			commit(t, st, tr, uint64(i+1), pending)
			pending = nil
		}
	}
	if want != nil {
		for i := saved; i < to; i++ {
			require.Equal(t, want.events[i], out.events[i], "events at message %d (saved %d)", i, saved)
		}
	}
	out.summaries = tr.Summaries()
	return out
}

// restore loads the file into tr, replays the matchers from the stored
// windows, and sums the open windows again from the stream; it returns
// how many messages the file had saved.
func restore(t *testing.T, st *store.Store, tr *tracker.Tracker, stream []message) int {
	t.Helper()
	state, err := st.Load()
	require.NoError(t, err)
	require.NoError(t, tr.Restore(state.Jobs, state.Nodes, state.Watermark))
	for _, j := range state.Jobs {
		ws, err := st.Windows(j.Meta.ID)
		require.NoError(t, err)
		tr.Replay(j.Meta.ID, ws)
	}
	if state.ReplayFrom > 0 {
		for pos := state.ReplayFrom; pos <= state.StreamSeq; pos++ {
			if s := stream[pos-1].sample; s != nil {
				tr.Rebuild(s, pos)
			}
		}
	}
	tr.EndRebuild()
	return int(state.StreamSeq)
}

func commit(t *testing.T, st *store.Store, tr *tracker.Tracker, pos uint64, events []tracker.Event) {
	t.Helper()
	b := store.Batch{StreamSeq: pos, ReplayFrom: tr.ReplayFrom(), Watermark: tr.Watermark(), Nodes: tr.DirtyNodes()}
	for _, e := range events {
		if e.Window != nil {
			b.Windows = append(b.Windows, *e.Window)
		}
		if e.Flag != nil {
			b.Flags = append(b.Flags, *e.Flag)
		}
	}
	b.Jobs, b.GoneJobs = tr.DirtyJobs()
	require.NoError(t, st.Apply(&b))
}

// randomStream is a few minutes of 5 s samples from 12 nodes, with jobs
// of 1 to 4 nodes starting and ending, some nodes shared, bursts of
// metadata operations, and second copies of earlier samples.
func randomStream(r *rand.Rand, trial int) []message {
	t0 := time.Date(2026, 9, 14, 8, 0, 0, 0, time.UTC)
	var out []message
	seq := map[string]uint64{}
	running := map[string][]string{} // job -> nodes
	nextJob := 50100 + 100*trial
	for step := range 40 + r.IntN(60) {
		at := t0.Add(time.Duration(step) * 5 * time.Second)
		if len(running) < 4 && r.IntN(4) == 0 {
			job, nodes := fmt.Sprint(nextJob), pickNodes(r)
			nextJob++
			running[job] = nodes
			out = append(out, message{event: &report.JobEvent{Type: report.JobStart, Job: job, Node: nodes[0], Nodes: nodes, Time: at, User: "oberlin"}})
		}
		for job, nodes := range running {
			if r.IntN(25) == 0 {
				delete(running, job)
				out = append(out, message{event: &report.JobEvent{Type: report.JobEnd, Job: job, Node: nodes[0], Time: at}})
			}
		}
		for n := range 12 {
			node := fmt.Sprintf("kx%02d", n)
			var jobs []string
			for job, nodes := range running {
				for _, x := range nodes {
					if x == node {
						jobs = append(jobs, job)
					}
				}
			}
			seq[node]++
			s := &report.Sample{Node: node, Seq: seq[node], Start: at, End: at.Add(5 * time.Second), Jobs: jobs, Values: randomValues(r, step)}
			out = append(out, message{sample: s})
			if r.IntN(30) == 0 && len(out) > 50 { // a second copy of an earlier sample
				if old := out[len(out)-1-r.IntN(50)]; old.sample != nil {
					out = append(out, old)
				}
			}
		}
	}
	return out
}

func pickNodes(r *rand.Rand) []string {
	var nodes []string
	for _, n := range r.Perm(12)[:1+r.IntN(4)] {
		nodes = append(nodes, fmt.Sprintf("kx%02d", n))
	}
	return nodes
}

func randomValues(r *rand.Rand, step int) metric.Values {
	var v metric.Values
	v[metric.ReadBytes] = uint64(r.IntN(1 << 30))
	v[metric.WriteBytes] = uint64(r.IntN(1 << 28))
	if step%20 > 8 { // a burst of metadata work now and then
		v[metric.Creates] = uint64(r.IntN(20000))
		v[metric.Opens] = uint64(r.IntN(40000))
		v[metric.StatOps] = uint64(r.IntN(90000))
	}
	return v
}
