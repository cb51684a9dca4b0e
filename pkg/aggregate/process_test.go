package aggregate_test

import (
	"bytes"
	"cmp"
	"context"
	"fmt"
	"math/rand/v2"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/api"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/internal/proxytest"
	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/sim"
)

// crashRig is a centre run with real processes: an aggregator binary with
// its embedded broker, one agent binary per simulated node, and the
// simulator writing the nodes' Lustre counter files.
type crashRig struct {
	t                  *testing.T
	dir, agg, agentBin string
	natsPort, webPort  int
	sim                *sim.Sim
	simMu              sync.Mutex
	aggCmd             *exec.Cmd
	aggOut             *bytes.Buffer
	agents             []*exec.Cmd
	// aggBroker and agentBroker, when set, are the external broker as the
	// aggregator and the agents reach it; unset, the aggregator runs its
	// embedded broker and everyone reaches that.
	aggBroker, agentBroker string
}

// crashScenario: two jobs of three and two nodes that create, stat and
// write from 5 s on, and an idle node.
func crashScenario() sim.Scenario {
	storm := sim.Behaviour{Creates: 400, Stats: 900, Opens: 120, WriteBytes: 3e6, WriteSize: 4096}
	writer := sim.Behaviour{WriteBytes: 2e8, WriteSize: 1 << 20, ReadBytes: 5e7, ReadSize: 1 << 20, Syncs: 3}
	return sim.Scenario{
		Centre: "Brackwater (crash test)",
		Nodes:  []string{"bw101", "bw102", "bw103", "bw104", "bw105", "bw106"},
		Jobs: []sim.Job{
			{ID: "91001", User: "corvid", Name: "gull-sweep", Nodes: []string{"bw101", "bw102", "bw103"}, Start: 5 * time.Second, End: time.Hour,
				Phases: []sim.Phase{{Behaviour: storm}}},
			{ID: "91002", User: "ambrel", Name: "tern-write", Nodes: []string{"bw104", "bw105"}, Start: 5 * time.Second, End: time.Hour,
				Phases: []sim.Phase{{Behaviour: writer}}},
		},
	}
}

// binaries holds the agent and aggregator built once for every test of
// the package that runs them.
var binaries struct {
	once sync.Once
	dir  string
	err  error
}

// TestMain removes the built binaries after the tests.
func TestMain(m *testing.M) {
	code := m.Run()
	if binaries.dir != "" {
		os.RemoveAll(binaries.dir)
	}
	os.Exit(code)
}

func buildBinaries(t *testing.T) (agg, agent string) {
	t.Helper()
	binaries.once.Do(func() {
		if binaries.dir, binaries.err = os.MkdirTemp("", "sluice-bin-"); binaries.err != nil {
			return
		}
		for _, b := range []string{"agent", "aggregator"} {
			out, err := exec.Command("go", "build", "-o", filepath.Join(binaries.dir, b), "sluice/"+b).CombinedOutput()
			if err != nil {
				binaries.err = fmt.Errorf("build %s: %w: %s", b, err, out)
				return
			}
		}
	})
	require.NoError(t, binaries.err)
	return filepath.Join(binaries.dir, "aggregator"), filepath.Join(binaries.dir, "agent")
}

func freePort(t *testing.T) int {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	require.NoError(t, err)
	defer ln.Close()
	return ln.Addr().(*net.TCPAddr).Port
}

func newCrashRig(t *testing.T) *crashRig {
	r := &crashRig{t: t, dir: t.TempDir(), natsPort: freePort(t), webPort: freePort(t)}
	r.agg, r.agentBin = buildBinaries(t)
	var err error
	r.sim, err = sim.New(crashScenario(), filepath.Join(r.dir, "nodes"), time.Now())
	require.NoError(t, err)
	t.Cleanup(r.stopAll)
	return r
}

// agentsURL is the broker as the agents and hooks reach it.
func (r *crashRig) agentsURL() string {
	return cmp.Or(r.agentBroker, fmt.Sprintf("nats://127.0.0.1:%d", r.natsPort))
}
func (r *crashRig) webURL() string { return fmt.Sprintf("http://127.0.0.1:%d", r.webPort) }

// startAggregator starts the aggregator on the rig's files and ports and
// waits until it answers.
func (r *crashRig) startAggregator() {
	r.aggOut = &bytes.Buffer{}
	broker := []string{"--nats.embedded.listen", fmt.Sprintf("127.0.0.1:%d", r.natsPort)}
	if r.aggBroker != "" {
		broker = []string{"--nats.url", r.aggBroker}
	}
	args := append([]string{"run", "--store.path", filepath.Join(r.dir, "aggregator.db"), "--web.listen", fmt.Sprintf("127.0.0.1:%d", r.webPort),
		"--window.length", "20s", "--window.live", "5s", "--window.grace", "1s", "--window.tick", "500ms", "--log.level", "warn"}, broker...)
	cmd := exec.Command(r.agg, args...)
	cmd.Stdout, cmd.Stderr = r.aggOut, r.aggOut
	require.NoError(r.t, cmd.Start())
	r.aggCmd = cmd
	require.Eventually(r.t, func() bool {
		resp, err := http.Get(r.webURL() + "/healthz")
		if err != nil {
			return false
		}
		resp.Body.Close()
		return resp.StatusCode == http.StatusOK
	}, 30*time.Second, 20*time.Millisecond, "the aggregator answers: %s", r.aggOut)
}

// killAggregator ends the aggregator with SIGKILL: no flush, no goodbye.
func (r *crashRig) killAggregator() {
	require.NoError(r.t, r.aggCmd.Process.Signal(syscall.SIGKILL))
	_ = r.aggCmd.Wait()
}

// announce runs the prolog hook of every job on its nodes.
func (r *crashRig) announce() {
	for _, j := range r.sim.Scenario().Jobs {
		for _, n := range j.Nodes {
			out, err := exec.Command(r.agentBin, "job", "start", "--id", j.ID, "--node", n, "--nodes", strings.Join(j.Nodes, ","),
				"--user", j.User, "--name", j.Name, "--state.dir", r.stateDir(n), "--nats.url", r.agentsURL()).CombinedOutput()
			require.NoError(r.t, err, "prolog of %s on %s: %s", j.ID, n, out)
		}
	}
}

func (r *crashRig) stateDir(node string) string { return filepath.Join(r.dir, "state", node) }

// startAgents starts one agent per node, sampling every 200 ms.
func (r *crashRig) startAgents() {
	for _, n := range r.sim.Scenario().Nodes {
		cmd := exec.Command(r.agentBin, "run", "--node", n, "--interval", "200ms", "--jitter=-1s", "--sources", "lustre",
			"--source.lustre.root", r.sim.LliteRoot(n), "--state.dir", r.stateDir(n), "--nats.url", r.agentsURL(),
			"--jobs.from", "hooks", "--queue.limit", "100000", "--log.level", "warn")
		cmd.Stderr = os.Stderr
		require.NoError(r.t, cmd.Start())
		r.agents = append(r.agents, cmd)
	}
}

// run steps the simulator in real time until stop is closed.
func (r *crashRig) run(stop <-chan struct{}) <-chan struct{} {
	done := make(chan struct{})
	go func() {
		defer close(done)
		tick := time.NewTicker(100 * time.Millisecond)
		defer tick.Stop()
		for {
			select {
			case <-stop:
				return
			case now := <-tick.C:
				r.simMu.Lock()
				err := r.sim.Step(now)
				r.simMu.Unlock()
				if err != nil {
					r.t.Errorf("simulator: %v", err)
					return
				}
			}
		}
	}()
	return done
}

// expected is what each job's nodes' counter files advanced, mapped onto
// the metrics as the agent maps them: computed from the simulator's own
// totals, not from anything the agents or the aggregator said.
func (r *crashRig) expected() map[string]metric.Values {
	r.simMu.Lock()
	defer r.simMu.Unlock()
	table := mapping.Default()
	out := map[string]metric.Values{}
	for _, j := range r.sim.Scenario().Jobs {
		var v metric.Values
		for _, n := range j.Nodes {
			table.Apply("lustre", r.sim.Totals(n), &v)
		}
		out[j.ID] = v
	}
	return out
}

// totals is what the aggregator holds of each job.
func (r *crashRig) totals() (map[string]metric.Values, error) {
	jobs, err := api.NewClient(r.webURL()).Jobs(context.Background(), false)
	if err != nil {
		return nil, err
	}
	out := map[string]metric.Values{}
	for _, j := range jobs {
		out[j.ID] = j.Totals
	}
	return out, nil
}

func (r *crashRig) stopAll() {
	for _, a := range r.agents {
		_ = a.Process.Signal(syscall.SIGTERM)
		_ = a.Wait()
	}
	if r.aggCmd != nil && r.aggCmd.ProcessState == nil {
		_ = r.aggCmd.Process.Signal(syscall.SIGTERM)
		_ = r.aggCmd.Wait()
	}
}

// TestKilledAggregatorLosesNothing kills the aggregator process with
// SIGKILL at random moments, six times, while real agents publish what the
// simulator writes, and starts it again on the same state file and stream
// each time. At the end every job's totals equal exactly what its nodes'
// counter files advanced: nothing lost, nothing counted twice.
func TestKilledAggregatorLosesNothing(t *testing.T) {
	if testing.Short() {
		t.Skip("runs real agent and aggregator processes for about half a minute")
	}
	r := newCrashRig(t)
	r.startAggregator()
	r.announce()
	r.startAgents()
	stop := make(chan struct{})
	stepping := r.run(stop)
	rng := rand.New(rand.NewPCG(uint64(time.Now().UnixNano()), 7))
	time.Sleep(6 * time.Second) // the jobs are under way
	for kill := range 6 {
		time.Sleep(time.Duration(300+rng.IntN(2200)) * time.Millisecond)
		r.killAggregator()
		t.Logf("kill %d at %s", kill+1, time.Now().Format("15:04:05.000"))
		r.startAggregator()
	}
	time.Sleep(2 * time.Second)
	close(stop)
	<-stepping
	r.requireExact()
}

// requireExact waits until the aggregator's totals of every job equal
// what its nodes' counter files advanced, and fails if they never do.
func (r *crashRig) requireExact() {
	t := r.t
	for _, a := range r.agents {
		require.NoError(t, a.Process.Signal(syscall.Signal(0)), "every agent still runs")
	}
	want, began := r.expected(), time.Now()
	require.Positive(t, want["91001"][metric.Creates])
	var got map[string]metric.Values
	ok := assert.Eventually(t, func() bool {
		var err error
		got, err = r.totals()
		return err == nil && got["91001"] == want["91001"] && got["91002"] == want["91002"]
	}, 60*time.Second, 200*time.Millisecond, "totals")
	if ok {
		t.Logf("totals exact %s after the counter files stopped", time.Since(began).Round(100*time.Millisecond))
		return
	}
	for id := range want {
		for m := range metric.Count {
			assert.Equal(t, want[id][m], got[id][m], "job %s %s", id, m)
		}
	}
	t.Logf("aggregator's output:\n%s", r.aggOut)
}

// TestBrokerRestartLosesNothing runs an external broker (in the test
// process, its stream on disk) that the aggregator and the agents reach
// through two proxies, stops it while agents publish, starts it again on
// its store, and lets the aggregator back before the agents, or after
// them: in both orders every job's totals end exactly at what the counter
// files advanced.
func TestBrokerRestartLosesNothing(t *testing.T) {
	if testing.Short() {
		t.Skip("runs real agent and aggregator processes")
	}
	for _, aggregatorFirst := range []bool{true, false} {
		t.Run(map[bool]string{true: "aggregator back first", false: "agents back first"}[aggregatorFirst], func(t *testing.T) {
			store, listen := t.TempDir(), fmt.Sprintf("127.0.0.1:%d", freePort(t))
			srv := natstest.StartAt(t, listen, store)
			toAgg, toAgents := proxytest.Start(t, listen), proxytest.Start(t, listen)
			r := newCrashRig(t)
			r.aggBroker, r.agentBroker = toAgg.NATSURL(), toAgents.NATSURL()
			r.startAggregator()
			r.announce()
			r.startAgents()
			stop := make(chan struct{})
			stepping := r.run(stop)
			time.Sleep(7 * time.Second)
			toAgg.Cut()
			toAgents.Cut()
			srv.Shutdown()
			time.Sleep(2 * time.Second) // the agents queue meanwhile
			natstest.StartAt(t, listen, store)
			first, second := toAgg, toAgents
			if !aggregatorFirst {
				first, second = toAgents, toAgg
			}
			first.Reopen()
			time.Sleep(3 * time.Second)
			second.Reopen()
			time.Sleep(3 * time.Second)
			close(stop)
			<-stepping
			r.requireExact()
		})
	}
}
