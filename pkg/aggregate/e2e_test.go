package aggregate_test

import (
	"context"
	"encoding/json"
	"errors"
	"io"
	"net/http"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/aggregate"
	"sluice/pkg/bus"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/jobstate"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	smodel "sluice/pkg/model"
	"sluice/pkg/nodeagent"
	"sluice/pkg/report"
	"sluice/pkg/sim"
	"sluice/pkg/source"
	"sluice/pkg/source/lustre"
	"sluice/pkg/tracker"
	"sluice/pkg/wire"
)

const step = 5 * time.Second

var t0 = time.Date(2026, 3, 2, 14, 0, 0, 0, time.UTC)

// scenario: job 4101 is a metadata storm on two nodes, job 4102 a
// streaming writer on one.
func scenario() sim.Scenario {
	return sim.Scenario{
		Centre: sim.DemoCentre,
		Nodes:  []string{"bw001", "bw002", "bw003"},
		Jobs: []sim.Job{
			{ID: "4101", User: "dorvane", Name: "quill-index", Nodes: []string{"bw001", "bw002"}, Start: 0, End: time.Hour,
				Phases: []sim.Phase{{Behaviour: sim.Behaviour{Creates: 1500, Stats: 12000, Removes: 333.3}}}},
			{ID: "4102", User: "ambrel", Name: "tidepool-assim", Nodes: []string{"bw003"}, Start: 0, End: time.Hour,
				Phases: []sim.Phase{{Behaviour: sim.Behaviour{WriteBytes: 700e6, WriteSize: 1 << 20, Opens: 0.7}}}},
		},
	}
}

type clock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *clock) now() time.Time  { c.mu.Lock(); defer c.mu.Unlock(); return c.t }
func (c *clock) set(t time.Time) { c.mu.Lock(); c.t = t; c.mu.Unlock() }

// rig is a broker, a simulator, one real agent per node and an aggregator.
type rig struct {
	t      *testing.T
	url    string
	dir    string
	sim    *sim.Sim
	clk    *clock
	agents []*nodeagent.Agent
	nc     *nats.Conn
	totals []map[string]map[string]uint64 // per step, per node
	svc    *aggregate.Service
	stop   func()
	sent   [][]byte // every sample message on the bus, recorded
	sentMu sync.Mutex
	lib    *matcher.Library // patterns the service matches; nil for none
	// diskFails makes the service's state file writes fail while set.
	diskFails atomic.Bool
}

func newRig(t *testing.T) *rig { return newRigWith(t, nil) }

// newRigWith is newRig with a pattern library in the service.
func newRigWith(t *testing.T, lib *matcher.Library) *rig {
	srv := natstest.Start(t)
	r := &rig{t: t, url: srv.URL(), dir: t.TempDir(), clk: &clock{t: t0}, lib: lib}
	var err error
	r.sim, err = sim.New(scenario(), filepath.Join(r.dir, "nodes"), t0)
	require.NoError(t, err)
	r.nc = natstest.Connect(t, r.url)
	rec := natstest.Connect(t, r.url)
	_, err = rec.Subscribe("sluice.default.sample.>", func(m *nats.Msg) {
		r.sentMu.Lock()
		r.sent = append(r.sent, append([]byte(nil), m.Data...))
		r.sentMu.Unlock()
	})
	require.NoError(t, err)
	require.NoError(t, rec.Flush())
	r.startService()
	for _, node := range scenario().Nodes {
		a, err := nodeagent.New(nodeagent.Config{
			Node: node, StateDir: filepath.Join(r.dir, "state", node), NATSURL: r.url, Now: r.clk.now,
			Sources: []source.Source{lustre.NewSource(r.sim.LliteRoot(node), r.clk.now)},
		})
		require.NoError(t, err)
		r.agents = append(r.agents, a)
	}
	for _, j := range scenario().Jobs {
		for _, node := range j.Nodes {
			require.NoError(t, nodeagent.JobStart(context.Background(), nodeagent.HookConfig{
				StateDir: filepath.Join(r.dir, "state", node), Node: node, NATSURL: r.url,
			}, jobstate.Record{ID: j.ID, User: j.User, Name: j.Name, Nodes: j.Nodes, Start: t0}))
		}
	}
	return r
}

func (r *rig) startService() {
	svc, err := aggregate.New(aggregate.Options{
		NATSURL: r.url, StorePath: filepath.Join(r.dir, "aggregator.db"), Listen: "127.0.0.1:0",
		TickEvery: time.Hour, FlushEvery: time.Hour, // the test steps the service itself
		Tracker: tracker.Options{Window: time.Minute, Live: 30 * time.Second, Grace: step, RaiseAfter: 1, Patterns: r.lib},
		Now:     r.clk.now,
		// A short duplicate window lets the replay test store a sample a
		// second time, as a retry after the window would be.
		Stream: bus.StreamOptions{Duplicates: 200 * time.Millisecond},
		StoreBeforeApply: func() error {
			if r.diskFails.Load() {
				return errors.New("input/output error (the test's failing disk)")
			}
			return nil
		},
	})
	require.NoError(r.t, err)
	stop, err := svc.Start()
	require.NoError(r.t, err, "aggregator did not start")
	select {
	case <-svc.Rebuilt():
	case <-time.After(30 * time.Second):
		r.t.Fatal("the open windows were not summed again within 30 s")
	}
	r.svc = svc
	r.stop = func() { require.NoError(r.t, stop()) }
	r.t.Cleanup(r.stop)
}

func (r *rig) stopService() { r.stop() }

// advance runs n agent intervals: the simulator writes, every agent reads
// and publishes; then it waits until the aggregator has taken every sample.
func (r *rig) advance(n int) {
	ctx := context.Background()
	for range n {
		now := r.clk.now().Add(step)
		if len(r.totals) == 0 { // the agents' base reading at t0
			r.totals = append(r.totals, r.snapshotTotals())
			for _, a := range r.agents {
				a.Step(ctx, r.nc)
			}
		}
		r.clk.set(now)
		require.NoError(r.t, r.sim.Step(now))
		r.totals = append(r.totals, r.snapshotTotals())
		for _, a := range r.agents {
			a.Step(ctx, r.nc)
		}
	}
	want := uint64((len(r.totals) - 1) * len(r.agents))
	r.waitSamples(want)
	r.svc.Tick()
}

func (r *rig) waitSamples(want uint64) {
	require.Eventually(r.t, func() bool {
		return r.svc.Snapshot().Ingest.Accepted["sample"] >= want
	}, 10*time.Second, 5*time.Millisecond, "aggregator took fewer than %d samples", want)
}

func (r *rig) snapshotTotals() map[string]map[string]uint64 {
	out := map[string]map[string]uint64{}
	for _, n := range scenario().Nodes {
		out[n] = r.sim.Totals(n)
	}
	return out
}

// expectRate is the per-node mean rate of raw counters over steps
// (from, to], computed from what the simulator wrote: the independent
// answer the aggregator must match.
func (r *rig) expectRate(nodes []string, counters []string, from, to int) float64 {
	var sum float64
	for _, n := range nodes {
		var d uint64
		for _, c := range counters {
			d += r.totals[to][n][c] - r.totals[from][n][c]
		}
		sum += float64(d) / (float64(to-from) * step.Seconds())
	}
	return sum / float64(len(nodes))
}

func (r *rig) get(path string, v any) {
	resp, err := http.Get("http://" + r.svc.HTTPAddr() + path)
	require.NoError(r.t, err)
	defer resp.Body.Close()
	require.Equal(r.t, http.StatusOK, resp.StatusCode)
	require.NoError(r.t, json.NewDecoder(resp.Body).Decode(v))
}

func (r *rig) jobs() map[string]smodel.Summary {
	var out struct{ Jobs []smodel.Summary }
	r.get("/api/v1/jobs", &out)
	m := map[string]smodel.Summary{}
	for _, j := range out.Jobs {
		m[j.ID] = j
	}
	return m
}

func (r *rig) scrape() map[string]*dto {
	resp, err := http.Get("http://" + r.svc.HTTPAddr() + "/metrics")
	require.NoError(r.t, err)
	defer resp.Body.Close()
	body, err := io.ReadAll(resp.Body)
	require.NoError(r.t, err)
	p := expfmt.NewTextParser(model.UTF8Validation)
	fams, err := p.TextToMetricFamilies(strings.NewReader(string(body)))
	require.NoError(r.t, err)
	out := map[string]*dto{}
	for name, f := range fams {
		for _, m := range f.GetMetric() {
			labels := map[string]string{}
			for _, l := range m.GetLabel() {
				labels[l.GetName()] = l.GetValue()
			}
			v := m.GetGauge().GetValue() + m.GetCounter().GetValue()
			out[name+key(labels)] = &dto{labels: labels, value: v}
		}
	}
	return out
}

type dto struct {
	labels map[string]string
	value  float64
}

func key(l map[string]string) string {
	return "{job_id=" + l["job_id"] + ",metric=" + l["metric"] + ",reason=" + l["reason"] + ",kind=" + l["kind"] + ",reason2=" + "}"
}

func TestAgentsToMetricsExact(t *testing.T) {
	r := newRig(t)
	r.advance(14) // 70 s: window 0 (0-60 s) closes once a sample ends past 65 s

	jobs := r.jobs()
	require.Contains(t, jobs, "4101")
	storm, writer := jobs["4101"], jobs["4102"]
	assert.True(t, storm.Announced)
	assert.Equal(t, []string{"bw001", "bw002"}, storm.Nodes)
	last := len(r.totals) - 1
	liveFrom := last - 6 // live window 30 s = 6 intervals
	stormNodes := []string{"bw001", "bw002"}

	// Live window: mean over the job's nodes of each node's rate.
	assert.InDelta(t, r.expectRate(stormNodes, []string{"create"}, liveFrom, last), storm.Live[metric.Creates], 1e-9)
	// Every sample counted once: the job's totals are exactly what its
	// nodes' counter files advanced since the agents' first reading.
	var creates uint64
	for _, n := range stormNodes {
		creates += r.totals[last][n]["create"] - r.totals[0][n]["create"]
	}
	require.Positive(t, creates)
	assert.Equal(t, creates, storm.Totals[metric.Creates])
	assert.InDelta(t, r.expectRate(stormNodes, []string{"getattr"}, liveFrom, last), storm.Live[metric.StatOps], 1e-9)
	assert.InDelta(t, r.expectRate(stormNodes, []string{"unlink"}, liveFrom, last), storm.Live[metric.Removes], 1e-9)
	assert.InDelta(t, r.expectRate([]string{"bw003"}, []string{"write_bytes.sum"}, liveFrom, last), writer.Live[metric.WriteBytes], 1e-6)
	assert.InDelta(t, r.expectRate([]string{"bw003"}, []string{"write_bytes"}, liveFrom, last), writer.Live[metric.WriteOps], 1e-9)

	// The closed window 0 covers steps 0..12 (0-60 s).
	require.NotNil(t, storm.LastWindow)
	assert.Equal(t, 0, storm.LastWindow.Index)
	assert.InDelta(t, r.expectRate(stormNodes, []string{"create"}, 0, 12), storm.LastWindow.Rates[metric.Creates], 1e-9)

	// The storm is critical on creates and stat ops, so it is flagged.
	var reasons []string
	for _, f := range storm.ActiveFlags {
		reasons = append(reasons, f.Reason.String())
	}
	assert.ElementsMatch(t, []string{"high_rate:creates", "high_rate:stat_ops"}, reasons)
	assert.Empty(t, writer.ActiveFlags)

	// /metrics shows the same values.
	m := r.scrape()
	got := m["sluice_job_live_operations_per_second"+key(map[string]string{"job_id": "4101", "metric": "creates"})]
	require.NotNil(t, got, "per-job series for the flagged job")
	assert.InDelta(t, storm.Live[metric.Creates], got.value, 1e-9)
	flag := m["sluice_job_flag_active"+key(map[string]string{"job_id": "4101", "reason": "high_rate:creates"})]
	require.NotNil(t, flag)
	assert.Equal(t, "warning", flag.labels["severity"], "a high rate alone is a warning; patterns say more")
	assert.Nil(t, m["sluice_job_live_bytes_per_second"+key(map[string]string{"job_id": "4102", "metric": "write_bytes"})],
		"a normal, unflagged job has no per-job series")
}

func TestRestartKeepsStateAndReplayChangesNothing(t *testing.T) {
	r := newRig(t)
	r.advance(9) // mid-window
	before := r.jobs()
	r.stopService()

	r.startService()
	after := r.jobs()
	assert.Equal(t, before, after, "state survives a restart")

	// Replay every sample ever sent, past the stream's duplicate window
	// and with each sample's own key: the stream stores them again, and
	// the aggregator's (node, sequence) check drops them all.
	r.sentMu.Lock()
	replay := append([][]byte(nil), r.sent...)
	r.sentMu.Unlock()
	require.Len(t, replay, 9*3)
	time.Sleep(300 * time.Millisecond)
	for _, msg := range replay {
		var s report.Sample
		require.NoError(t, wire.DecodeSample(msg, &s))
		m := &nats.Msg{Subject: "sluice.default.sample.replay", Data: msg, Header: nats.Header{bus.MsgIDHeader: []string{bus.SampleID(s.Node, s.Seq)}}}
		require.NoError(t, r.nc.PublishMsg(m))
	}
	require.NoError(t, r.nc.Flush())
	require.Eventually(t, func() bool {
		return r.svc.Snapshot().Ingest.Duplicates == uint64(len(replay))
	}, 10*time.Second, 5*time.Millisecond)
	r.svc.Tick()
	assert.Equal(t, before, r.jobs(), "replayed samples change nothing")

	// And the run goes on from where it stopped.
	r.advance(5)
	storm := r.jobs()["4101"]
	require.NotNil(t, storm.LastWindow)
	assert.InDelta(t, r.expectRate([]string{"bw001", "bw002"}, []string{"create"}, 0, 12), storm.LastWindow.Rates[metric.Creates], 1e-9)
}

func TestMalformedMessagesAreCountedNotFatal(t *testing.T) {
	r := newRig(t)
	for _, bad := range [][]byte{{}, {9, 1}, {1, 77}, {1, 1, 0xff}} {
		require.NoError(t, r.nc.Publish("sluice.default.sample.bw001", bad))
	}
	require.NoError(t, r.nc.Publish("sluice.default.job.bw001", []byte{1, 2}))
	require.NoError(t, r.nc.Flush())
	require.Eventually(t, func() bool {
		var n uint64
		for _, v := range r.svc.Snapshot().Ingest.Rejected {
			n += v
		}
		return n == 5
	}, 10*time.Second, 5*time.Millisecond)
	rej := r.svc.Snapshot().Ingest.Rejected
	assert.Equal(t, uint64(1), rej["sample/empty"])
	assert.Equal(t, uint64(1), rej["sample/unknown_version"])
	assert.Equal(t, uint64(1), rej["sample/unknown_kind"])
	assert.Equal(t, uint64(1), rej["job_event/truncated"])
	r.advance(2) // still ingesting
	m := r.scrape()
	assert.Equal(t, 1.0, m["sluice_ingest_rejected_total"+key(map[string]string{"kind": "sample", "reason": "empty"})].value)

	// A sample that decodes but has no de-duplication key, or another's,
	// could be stored in place of a real one: refused and counted.
	good := report.Sample{Node: "bw003", Seq: 999, Start: t0, End: t0.Add(step), Jobs: []string{"4102"}}
	body := wire.AppendSample(nil, &good)
	require.NoError(t, r.nc.Publish("sluice.default.sample.bw003", body))
	forged := &nats.Msg{Subject: "sluice.default.sample.bw003", Data: body, Header: nats.Header{bus.MsgIDHeader: []string{bus.SampleID("bw003", 1000)}}}
	require.NoError(t, r.nc.PublishMsg(forged))
	require.NoError(t, r.nc.Flush())
	require.Eventually(t, func() bool {
		rej := r.svc.Snapshot().Ingest.Rejected
		return rej["sample/no_key"] == 1 && rej["sample/bad_key"] == 1
	}, 10*time.Second, 5*time.Millisecond)
}

func TestHeartbeatsBecomeAgentCost(t *testing.T) {
	r := newRig(t)
	for i, cpu := range []float64{10, 10.05} { // 0.05 s of CPU over 10 s: 0.5% of a core
		hb := report.Heartbeat{Node: "bw001", Time: t0.Add(time.Duration(i) * 10 * time.Second), Version: "dev", Interval: step,
			CPUSeconds: cpu, RSSBytes: 15 << 20, Sources: []report.SourceCost{{Name: "lustre", Instances: 1, MicrosPerRead: 22, OK: true, Malformed: 2}}}
		require.NoError(t, r.nc.Publish("sluice.default.beat.bw001", wire.AppendHeartbeat(nil, &hb)))
	}
	require.NoError(t, r.nc.Flush())
	require.Eventually(t, func() bool { return r.svc.Snapshot().Ingest.Accepted["heartbeat"] == 2 }, 10*time.Second, 5*time.Millisecond)
	var out struct{ Agents []smodel.AgentStatus }
	r.get("/api/v1/agents", &out)
	require.Len(t, out.Agents, 1)
	assert.InDelta(t, 0.005, out.Agents[0].CPUShare, 1e-12)
	m := r.scrape()
	assert.Equal(t, 2.0, m["sluice_agent_source_malformed_lines_total"+key(map[string]string{})].value)
}
