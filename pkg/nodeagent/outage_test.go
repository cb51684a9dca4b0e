package nodeagent_test

import (
	"context"
	"net/url"
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

	"sluice/pkg/bus"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/internal/proxytest"
	"sluice/pkg/nodeagent"
	"sluice/pkg/report"
	"sluice/pkg/source"
	"sluice/pkg/source/lustre"
	"sluice/pkg/wire"
)

// collector records what reaches the broker. Like the aggregator, it keeps
// a sample sequence number the first time it arrives and counts repeats.
type collector struct {
	nc         *nats.Conn
	mu         sync.Mutex
	seqs       []uint64
	seen       map[uint64]bool
	repeats    int
	dropped    uint64
	beats      int
	reconnects int
}

func collect(t *testing.T, brokerURL string) *collector {
	c := &collector{seen: map[uint64]bool{}}
	nc, err := nats.Connect(brokerURL, nats.MaxReconnects(-1), nats.ReconnectWait(10*time.Millisecond),
		nats.ReconnectHandler(func(*nats.Conn) {
			c.mu.Lock()
			defer c.mu.Unlock()
			c.reconnects++
		}))
	require.NoError(t, err)
	t.Cleanup(nc.Close)
	c.nc = nc
	_, err = nc.Subscribe("sluice.default.>", func(m *nats.Msg) {
		c.mu.Lock()
		defer c.mu.Unlock()
		switch k, _ := wire.Peek(m.Data); k {
		case wire.KindSample:
			var s report.Sample
			switch {
			case wire.DecodeSample(m.Data, &s) != nil:
			case c.seen[s.Seq]:
				c.repeats++
			default:
				c.seen[s.Seq] = true
				c.seqs = append(c.seqs, s.Seq)
			}
		case wire.KindHeartbeat:
			var h report.Heartbeat
			if wire.DecodeHeartbeat(m.Data, &h) == nil {
				c.dropped = h.Dropped
				c.beats++
			}
		}
	})
	require.NoError(t, err)
	require.NoError(t, nc.Flush())
	return c
}

func (c *collector) snapshot() ([]uint64, uint64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return append([]uint64(nil), c.seqs...), c.dropped
}

// resubscribed waits until the collector is back on a restarted broker
// and the broker has taken its subscription: the client sends its
// subscriptions again before it reports the reconnect, and the broker
// answers a flush only after what was sent before it.
func (c *collector) resubscribed(t *testing.T) {
	require.Eventually(t, func() bool {
		c.mu.Lock()
		defer c.mu.Unlock()
		return c.reconnects > 0
	}, 20*time.Second, 10*time.Millisecond, "the collector reconnects to the restarted broker")
	require.NoError(t, c.nc.Flush())
}

// persistedSeq is the agent's last sample sequence number, from its state.
func persistedSeq(state string) uint64 {
	b, _ := os.ReadFile(filepath.Join(state, "sequence"))
	n, _ := strconv.ParseUint(strings.TrimSpace(string(b)), 10, 64)
	return n
}

// runAgent runs an agent on one Lustre mount at a 100 ms interval,
// publishing to brokerURL with a heartbeat every interval, until the test
// ends, and returns its state directory. Its sequence file shows every
// sample taken (a reserve of 1). A queueLimit of 0 means the default.
func runAgent(t *testing.T, brokerURL string, queueLimit int) string {
	root, state := t.TempDir(), t.TempDir()
	writeStats(t, root, "scratch-ffff8f0000001000", map[string][2]uint64{"open": {1, 0}})
	a, err := nodeagent.New(nodeagent.Config{
		Node: "bw007", Interval: 100 * time.Millisecond, Jitter: -1, StateDir: state, NATSURL: brokerURL,
		QueueLimit: queueLimit, HeartbeatEvery: 1, SeqReserve: 1,
		Sources: []source.Source{lustre.NewSource(root, nil)},
	})
	require.NoError(t, err)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- a.Run(ctx) }()
	t.Cleanup(func() { cancel(); require.NoError(t, <-done) })
	return state
}

// runOutage runs an agent, stops the broker for `outage` samples, starts it
// again on the same address and returns every sequence number received
// once the agent has caught up, and the last dropped count reported.
//
// The agent reaches the broker through a proxy, so that the outage has
// exact edges: what the agent sent either reached the collector or is
// still in the agent's queue. The agent is cut off just as it sends a
// heartbeat, which it sends only after the broker has confirmed every
// sample sent before (a sample cut off between its delivery and the
// confirmation would stay queued, be dropped and yet have arrived), and
// before the broker stops. It is let back only once the collector is
// subscribed on the new broker (a sample the broker takes before that
// reaches no one, yet leaves the agent's queue as delivered).
func runOutage(t *testing.T, queueLimit int, outage uint64) ([]uint64, uint64, uint64) {
	srv := natstest.Start(t)
	u, err := url.Parse(srv.URL())
	require.NoError(t, err)
	c := collect(t, srv.URL())
	px := proxytest.Start(t, u.Host)
	state := runAgent(t, px.NATSURL(), queueLimit)

	waitFor := func(cond func() bool, what string) {
		require.Eventually(t, cond, 20*time.Second, 10*time.Millisecond, what)
	}
	waitFor(func() bool { s, _ := c.snapshot(); return len(s) >= 3 }, "first samples")
	beat := []byte(bus.Subjects{Prefix: bus.DefaultPrefix, Cluster: bus.DefaultCluster}.Beat("bw007") + " ")
	select {
	case <-px.CutAt(beat):
	case <-time.After(20 * time.Second):
		require.FailNow(t, "the agent sent no heartbeat to be cut off at")
	}
	// The broker answers this flush after it has handed the collector
	// every sample it confirmed to the agent, so none is lost in the
	// shutdown.
	require.NoError(t, c.nc.Flush())
	srv.Shutdown()
	down := persistedSeq(state)
	waitFor(func() bool { return persistedSeq(state) >= down+outage }, "samples taken while the broker is down")
	natstest.StartAt(t, u.Host, srv.StoreDir())
	c.resubscribed(t)
	px.Reopen()
	last := persistedSeq(state)
	waitFor(func() bool { s, _ := c.snapshot(); return len(s) > 0 && s[len(s)-1] > last }, "catching up after the restart")
	c.mu.Lock()
	beats := c.beats
	c.mu.Unlock()
	// A heartbeat sent after the catch-up carries the final dropped count.
	waitFor(func() bool { c.mu.Lock(); defer c.mu.Unlock(); return c.beats > beats }, "a heartbeat after the catch-up")
	seqs, dropped := c.snapshot()
	return seqs, dropped, last
}

func TestOutageLosesNothingWithinTheBound(t *testing.T) {
	seqs, dropped, _ := runOutage(t, 1000, 10)
	require.NotEmpty(t, seqs)
	for i, s := range seqs {
		require.Equal(t, uint64(i+1), s, "samples arrive in order, none missing: %v", seqs)
	}
	assert.Zero(t, dropped)
}

func TestOutageBeyondTheBoundDropsTheOldestAndSaysSo(t *testing.T) {
	const limit = 4
	seqs, dropped, _ := runOutage(t, limit, 12)
	missing := uint64(0)
	for i := 1; i < len(seqs); i++ {
		require.Greater(t, seqs[i], seqs[i-1], "still in order")
		missing += seqs[i] - seqs[i-1] - 1
	}
	assert.Positive(t, missing, "an outage longer than the queue loses samples")
	assert.Equal(t, missing, dropped, "and the heartbeat counts exactly those")
}

// TestConnectionThatStopsAnsweringLosesNothing freezes the network between
// the agent and the broker without closing anything, as a crashed broker
// host or a dropping switch does: what the agent published into the dead
// connection must reach the broker once the network is back, sent again
// from the queue, because no flush round trip confirmed it.
func TestConnectionThatStopsAnsweringLosesNothing(t *testing.T) {
	srv := natstest.Start(t)
	c := collect(t, srv.URL())
	px := proxytest.Start(t, strings.TrimPrefix(srv.URL(), "nats://"))
	state := runAgent(t, px.NATSURL(), 0)

	waitFor := func(cond func() bool, what string) {
		require.Eventually(t, cond, 30*time.Second, 10*time.Millisecond, what)
	}
	waitFor(func() bool { s, _ := c.snapshot(); return len(s) >= 3 }, "first samples")
	px.Freeze(true)
	frozenAt := persistedSeq(state)
	// Long enough for the flush round trip to time out (2 s) and for
	// samples to be taken meanwhile.
	time.Sleep(3 * time.Second)
	px.Freeze(false)
	last := persistedSeq(state)
	require.Greater(t, last, frozenAt, "samples were taken while the network was frozen")
	waitFor(func() bool { s, _ := c.snapshot(); return len(s) > 0 && s[len(s)-1] >= last }, "catching up")
	seqs, dropped := c.snapshot()
	for i, s := range seqs {
		require.Equal(t, uint64(i+1), s, "every sample arrives, in order: %v", seqs)
	}
	assert.Zero(t, dropped)
	stored, repeats := streamed(t, srv.URL())
	assert.GreaterOrEqual(t, len(stored), int(last), "the stream holds every sample")
	assert.Zero(t, repeats, "what was sent again after the freeze is stored once (its message id)")
}
