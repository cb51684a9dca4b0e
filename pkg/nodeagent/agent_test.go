package nodeagent_test

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/jobstate"
	"sluice/pkg/metric"
	"sluice/pkg/nodeagent"
	"sluice/pkg/report"
	"sluice/pkg/source"
	"sluice/pkg/source/jobio"
	"sluice/pkg/source/lustre"
	"sluice/pkg/wire"
)

var t0 = time.Date(2026, 3, 2, 14, 0, 0, 0, time.UTC)

type clock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *clock) now() time.Time      { c.mu.Lock(); defer c.mu.Unlock(); return c.t }
func (c *clock) add(d time.Duration) { c.mu.Lock(); c.t = c.t.Add(d); c.mu.Unlock() }

// writeStats writes one mount's stats file in the Lustre 2.16 layout.
func writeStats(t testing.TB, root, inst string, counters map[string][2]uint64) {
	t.Helper()
	st := lustre.Stats{SnapshotTime: t0, StartTime: t0.Add(-time.Hour), HasStartTime: true}
	for name, v := range counters {
		c := lustre.Counter{Name: name, Samples: v[0], Unit: "usecs", Fields: 4, Min: 1, Max: 1, Sum: v[0]}
		if v[1] > 0 {
			c.Unit, c.Sum = "bytes", v[1]
		}
		st.Counters = append(st.Counters, c)
	}
	var buf bytes.Buffer
	require.NoError(t, lustre.Write(&buf, st, lustre.FormatV2_16))
	require.NoError(t, os.MkdirAll(filepath.Join(root, inst), 0o755))
	require.NoError(t, os.WriteFile(filepath.Join(root, inst, "stats"), buf.Bytes(), 0o644))
}

func newAgent(t *testing.T, root, state string, clk *clock, url string) *nodeagent.Agent {
	t.Helper()
	a, err := nodeagent.New(nodeagent.Config{
		Node: "bw007", Interval: 5 * time.Second, StateDir: state, NATSURL: url, Now: clk.now,
		Sources: []source.Source{lustre.NewSource(root, clk.now)},
	})
	require.NoError(t, err)
	return a
}

func TestCollectMapsDeltasAndPersistsSequence(t *testing.T) {
	root, state := t.TempDir(), t.TempDir()
	clk := &clock{t: t0}
	writeStats(t, root, "scratch-ffff8f0000001000", map[string][2]uint64{
		"create": {100, 0}, "mkdir": {10, 0}, "getattr": {5000, 0}, "write_bytes": {40, 40 << 20}, "read": {7, 0},
	})
	a := newAgent(t, root, state, clk, "")
	_, ok, err := a.Collect(context.Background())
	require.NoError(t, err)
	assert.False(t, ok, "the first read only sets the base")

	clk.add(5 * time.Second)
	writeStats(t, root, "scratch-ffff8f0000001000", map[string][2]uint64{
		"create": {160, 0}, "mkdir": {12, 0}, "getattr": {9000, 0}, "write_bytes": {50, 50 << 20}, "read": {700, 0},
	})
	s, ok, err := a.Collect(context.Background())
	require.NoError(t, err)
	require.True(t, ok)
	want := metric.Values{}
	want[metric.Creates] = 60 + 2 // create and mkdir both count as creates
	want[metric.StatOps] = 4000
	want[metric.WriteOps] = 10 // write_bytes' sample count: calls
	want[metric.WriteBytes] = 10 << 20
	// "read" is latency, deliberately unmapped: read calls are counted by read_bytes.
	assert.Equal(t, want, s.Values)
	assert.Equal(t, "bw007", s.Node)
	assert.Equal(t, uint64(1), s.Seq)
	assert.Equal(t, t0, s.Start)
	assert.Equal(t, t0.Add(5*time.Second), s.End)

	// Step persists the sequence; a new agent on the same state continues
	// after what the first one reserved (720 numbers by default).
	a.Step(context.Background(), nil)
	b := newAgent(t, root, state, clk, "")
	b.Collect(context.Background())
	clk.add(5 * time.Second)
	s, _, _ = b.Collect(context.Background())
	assert.Equal(t, uint64(2+720), s.Seq, "sequence numbers are never reused across restarts")
}

// TestSequenceFileReservesNumbers steps agents with a reserve of 3 and
// checks when the sequence file is written and where a restarted agent,
// after a clean stop or mid-reserve as after a crash, goes on.
func TestSequenceFileReservesNumbers(t *testing.T) {
	root, state := t.TempDir(), t.TempDir()
	clk := &clock{t: t0}
	writeStats(t, root, "scratch-ffff8f0000001000", map[string][2]uint64{"open": {1, 0}})
	start := func() *nodeagent.Agent {
		a, err := nodeagent.New(nodeagent.Config{
			Node: "bw007", StateDir: state, Now: clk.now, SeqReserve: 3,
			Sources: []source.Source{lustre.NewSource(root, clk.now)},
		})
		require.NoError(t, err)
		a.Step(context.Background(), nil) // the base reading: no sample
		return a
	}
	file := func() string {
		b, err := os.ReadFile(filepath.Join(state, "sequence"))
		require.NoError(t, err)
		return string(b)
	}
	step := func(a *nodeagent.Agent) {
		clk.add(5 * time.Second)
		a.Step(context.Background(), nil)
	}
	a := start()
	_, err := os.Stat(filepath.Join(state, "sequence"))
	require.ErrorIs(t, err, os.ErrNotExist, "nothing is written before a sample")
	for seq, want := range []string{1: "3", 2: "3", 3: "3", 4: "6", 5: "6"} {
		if seq == 0 {
			continue
		}
		step(a)
		assert.Equal(t, want, file(), "after sample %d", seq)
	}
	b := start() // a stopped after sample 5 of 6 reserved
	step(b)
	assert.Equal(t, "9", file(), "sample 7 reserves 7 to 9")
}

func TestSampleNamesJobsRunningInTheInterval(t *testing.T) {
	root, state := t.TempDir(), t.TempDir()
	clk := &clock{t: t0}
	writeStats(t, root, "scratch-ffff8f0000001000", map[string][2]uint64{"open": {1, 0}})
	hook := nodeagent.HookConfig{StateDir: state, Node: "bw007"} // no broker: the agent publishes
	require.NoError(t, nodeagent.JobStart(context.Background(), hook, jobstate.Record{ID: "81234", User: "dorvane", Start: t0}))
	a := newAgent(t, root, state, clk, "")
	a.Collect(context.Background())
	clk.add(5 * time.Second)
	s, _, _ := a.Collect(context.Background())
	assert.Equal(t, []string{"81234"}, s.Jobs)

	// It ended inside the next interval: that interval still names it.
	require.NoError(t, nodeagent.JobEnd(context.Background(), hook, "81234", clk.now().Add(2*time.Second), 0))
	clk.add(5 * time.Second)
	s, _, _ = a.Collect(context.Background())
	assert.Equal(t, []string{"81234"}, s.Jobs)
	clk.add(5 * time.Second)
	s, _, _ = a.Collect(context.Background())
	assert.Empty(t, s.Jobs)
}

func TestRunPublishesSamplesAndJobEvents(t *testing.T) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	samples := make(chan report.Sample, 16)
	events := make(chan report.JobEvent, 16)
	_, err := nc.Subscribe("sluice.default.>", func(m *nats.Msg) {
		switch k, _ := wire.Peek(m.Data); k {
		case wire.KindSample:
			var s report.Sample
			require.NoError(t, wire.DecodeSample(m.Data, &s))
			samples <- s
		case wire.KindJobEvent:
			var e report.JobEvent
			require.NoError(t, wire.DecodeJobEvent(m.Data, &e))
			events <- e
		}
	})
	require.NoError(t, err)
	require.NoError(t, nc.Flush())

	root, state := t.TempDir(), t.TempDir()
	writeStats(t, root, "scratch-ffff8f0000001000", map[string][2]uint64{"open": {1, 0}})
	// The hook could not reach a broker; the running agent announces the job.
	require.NoError(t, nodeagent.JobStart(context.Background(), nodeagent.HookConfig{StateDir: state, Node: "bw007"},
		jobstate.Record{ID: "81230", User: "ambrel", Name: "tidepool-assim", Nodes: []string{"bw007"}, Start: t0}))
	a, err := nodeagent.New(nodeagent.Config{
		Node: "bw007", Interval: 100 * time.Millisecond, StateDir: state, NATSURL: srv.URL(),
		Sources: []source.Source{lustre.NewSource(root, nil)},
	})
	require.NoError(t, err)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- a.Run(ctx) }()

	e := <-events
	assert.Equal(t, report.JobStart, e.Type)
	assert.Equal(t, "81230", e.Job)
	assert.Equal(t, "tidepool-assim", e.Name)
	var seqs []uint64
	for len(seqs) < 3 {
		s := <-samples
		assert.Equal(t, []string{"81230"}, s.Jobs)
		seqs = append(seqs, s.Seq)
	}
	assert.Equal(t, []uint64{1, 2, 3}, seqs)
	cancel()
	require.NoError(t, <-done)
	rec, err := (func() (jobstate.Record, error) {
		d, _ := jobstate.Open(nodeagent.JobsDir(state))
		return d.Get("81230")
	})()
	require.NoError(t, err)
	assert.True(t, rec.StartSent, "the record remembers the start was published")
}

// BenchmarkCollectOneMount is one interval's work for one Lustre mount of
// 34 counters (the 2.16 fixture): list, read, parse, delta, map, job list.
func BenchmarkCollectOneMount(b *testing.B) {
	root := b.TempDir()
	data := fixture.Read(b, "lustre", "v2_16_header", "stats")
	require.NoError(b, os.MkdirAll(filepath.Join(root, "scratch-ffff9a0c12345000"), 0o755))
	require.NoError(b, os.WriteFile(filepath.Join(root, "scratch-ffff9a0c12345000", "stats"), data, 0o644))
	state := b.TempDir()
	// A live stats file has a new snapshot_time at every read; this fixture
	// does not change, so the source's clock is held still, or the source
	// would look the path up at each read to see whether the file was
	// replaced, a path production never takes.
	frozen := func() time.Time { return t0 }
	a, err := nodeagent.New(nodeagent.Config{
		Node: "bw001", StateDir: state, Sources: []source.Source{lustre.NewSource(root, frozen)},
	})
	require.NoError(b, err)
	// Steady state: no hook has touched the job records for a while.
	old := time.Now().Add(-time.Minute)
	require.NoError(b, os.Chtimes(nodeagent.JobsDir(state), old, old))
	ctx := context.Background()
	a.Collect(ctx)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, _, err := a.Collect(ctx); err != nil {
			b.Fatal(err)
		}
	}
}

func TestPhaseIsStableAndSpread(t *testing.T) {
	const nodes = 3000
	interval := 5 * time.Second
	buckets := make([]int, 50) // 100 ms each
	state, root := t.TempDir(), t.TempDir()
	for i := range nodes {
		a, err := nodeagent.New(nodeagent.Config{
			Node: fmt.Sprintf("bw%04d", i), Interval: interval, StateDir: state,
			Sources: []source.Source{lustre.NewSource(root, nil)},
		})
		require.NoError(t, err)
		p := a.Phase()
		require.GreaterOrEqual(t, p, time.Duration(0))
		require.Less(t, p, interval)
		buckets[p/(100*time.Millisecond)]++
		if i == 0 {
			b, _ := nodeagent.New(nodeagent.Config{Node: "bw0000", Interval: interval, StateDir: t.TempDir(), Sources: []source.Source{lustre.NewSource(root, nil)}})
			assert.Equal(t, p, b.Phase(), "the phase depends only on the node name")
		}
	}
	// 3000 nodes over 50 slots: 60 expected per slot. A uniform spread
	// keeps every slot well away from both zero and a pile-up (a
	// chi-square bound would be tighter; this catches a constant phase).
	for i, n := range buckets {
		assert.Greater(t, n, 20, "slot %d", i)
		assert.Less(t, n, 120, "slot %d", i)
	}
}

func TestNextTick(t *testing.T) {
	base := time.Date(2026, 3, 2, 14, 0, 0, 0, time.UTC)
	tests := []struct {
		name  string
		now   time.Time
		phase time.Duration
		want  time.Time
	}{
		{"before the phase in this interval", base.Add(time.Second), 3 * time.Second, base.Add(3 * time.Second)},
		{"after it: the next interval", base.Add(4 * time.Second), 3 * time.Second, base.Add(8 * time.Second)},
		{"exactly on it: the next one", base.Add(3 * time.Second), 3 * time.Second, base.Add(8 * time.Second)},
		{"no phase", base.Add(time.Second), 0, base.Add(5 * time.Second)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.want, nodeagent.NextTick(tt.now, 5*time.Second, tt.phase))
		})
	}
}

// TestSharedNodeSplitsPerJob runs the agent over a node shared by two jobs:
// a Lustre mount for the node and the jobio source over a cgroup v2 and
// procfs tree laid out as the kernel's cgroup-v2.rst and proc.rst describe
// (testdata/jobio/shared_node).
func TestSharedNodeSplitsPerJob(t *testing.T) {
	tree := t.TempDir()
	require.NoError(t, os.CopyFS(tree, os.DirFS(fixture.Path(t, "jobio", "shared_node"))))
	lroot, state := t.TempDir(), t.TempDir()
	clk := &clock{t: t0}
	writeStats(t, lroot, "scratch-ffff8f0000001000", map[string][2]uint64{"open": {100, 0}, "read_bytes": {10, 10 << 20}})
	jobs, err := jobio.NewSource(jobio.Options{CgroupRoot: filepath.Join(tree, "cgroup"), ProcRoot: filepath.Join(tree, "proc")}, clk.now)
	require.NoError(t, err)
	a, err := nodeagent.New(nodeagent.Config{
		Node: "bw007", StateDir: state, Now: clk.now, JobsFrom: nodeagent.JobsFromCgroups,
		Sources: []source.Source{lustre.NewSource(lroot, clk.now), jobs},
	})
	require.NoError(t, err)
	_, _, err = a.Collect(context.Background())
	require.NoError(t, err)

	clk.add(5 * time.Second)
	writeStats(t, lroot, "scratch-ffff8f0000001000", map[string][2]uint64{"open": {160, 0}, "read_bytes": {20, 30 << 20}})
	io2110 := filepath.Join(tree, "proc", "2110", "io")
	bumpProcIO(t, io2110, map[string]uint64{"rchar": 4096, "syscr": 4})
	s, ok, err := a.Collect(context.Background())
	require.NoError(t, err)
	require.True(t, ok)
	assert.Equal(t, []string{"81234", "81240"}, s.Jobs)
	require.Len(t, s.PerJob, 2)
	byJob := map[string]metric.Values{}
	for _, pj := range s.PerJob {
		byJob[pj.Job] = pj.Values
	}
	// The node's Lustre deltas: 60 opens, 10 reads of 20 MiB.
	assert.Equal(t, uint64(60), s.Values[metric.Opens])
	assert.Equal(t, uint64(20<<20), s.Values[metric.ReadBytes])
	// Job 81234's rank 2110 read 4096 bytes in 4 calls; the metrics jobio
	// measures come from it, the rest (opens) from the node.
	assert.Equal(t, uint64(4096), byJob["81234"][metric.ReadBytes])
	assert.Equal(t, uint64(4), byJob["81234"][metric.ReadOps])
	assert.Equal(t, uint64(60), byJob["81234"][metric.Opens])
	assert.Zero(t, byJob["81240"][metric.ReadBytes], "81240 did no I/O of its own")
	assert.Equal(t, uint64(60), byJob["81240"][metric.Opens])
}

// bumpProcIO adds to fields of a /proc/<pid>/io file, rewriting it in place.
func bumpProcIO(t *testing.T, path string, add map[string]uint64) {
	t.Helper()
	data, err := os.ReadFile(path)
	require.NoError(t, err)
	var out []string
	for _, line := range strings.Split(strings.TrimRight(string(data), "\n"), "\n") {
		k, v, _ := strings.Cut(line, ": ")
		n, err := strconv.ParseUint(v, 10, 64)
		require.NoError(t, err, line)
		out = append(out, fmt.Sprintf("%s: %d", k, n+add[k]))
	}
	require.NoError(t, os.WriteFile(path, []byte(strings.Join(out, "\n")+"\n"), 0o644))
}
