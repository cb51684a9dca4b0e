package nodeagent_test

import (
	"context"
	"net/url"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/bus"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// streamed reads every sample the default stream holds now, in stream
// order, and returns their sequence numbers, each once, and how many
// stream messages carried a sample already seen.
func streamed(t *testing.T, brokerURL string) (seqs []uint64, repeats int) {
	t.Helper()
	js, err := jetstream.New(natstest.Connect(t, brokerURL))
	require.NoError(t, err)
	subj, _ := bus.NewSubjects("", "")
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	st, err := js.Stream(ctx, subj.StreamName())
	require.NoError(t, err)
	info, err := st.Info(ctx)
	require.NoError(t, err)
	cons, err := st.OrderedConsumer(ctx, jetstream.OrderedConsumerConfig{FilterSubjects: []string{subj.AllSamples()}})
	require.NoError(t, err)
	seen := map[uint64]bool{}
	for {
		batch, err := cons.Fetch(500, jetstream.FetchMaxWait(300*time.Millisecond))
		require.NoError(t, err)
		n, at := 0, uint64(0)
		for m := range batch.Messages() {
			n++
			meta, err := m.Metadata()
			require.NoError(t, err)
			if at = meta.Sequence.Stream; at > info.State.LastSeq {
				break // published after the call: not asked for
			}
			var s report.Sample
			require.NoError(t, wire.DecodeSample(m.Data(), &s))
			assert.Equal(t, bus.SampleID(s.Node, s.Seq), m.Headers().Get(bus.MsgIDHeader), "each sample carries its key")
			if seen[s.Seq] {
				repeats++
				continue
			}
			seen[s.Seq] = true
			seqs = append(seqs, s.Seq)
		}
		require.NoError(t, batch.Error())
		if n == 0 || at >= info.State.LastSeq {
			return seqs, repeats
		}
	}
}

// TestStreamKeepsWhatNoOneReads: with nobody subscribed at all, and the
// broker stopped and started again on its store while the agent goes on
// sampling, the stream ends up holding every sample the agent took, each
// once, in order. This is what lets an aggregator that was down read
// everything it missed.
func TestStreamKeepsWhatNoOneReads(t *testing.T) {
	srv := natstest.Start(t)
	u, err := url.Parse(srv.URL())
	require.NoError(t, err)
	state := runAgent(t, srv.URL(), 0)
	waitFor := func(cond func() bool, what string) {
		require.Eventually(t, cond, 30*time.Second, 10*time.Millisecond, what)
	}
	waitFor(func() bool { return persistedSeq(state) >= 5 }, "first samples")
	srv.Shutdown()
	down := persistedSeq(state)
	waitFor(func() bool { return persistedSeq(state) >= down+8 }, "samples taken while the broker is down")
	back := natstest.StartAt(t, u.Host, srv.StoreDir())
	last := persistedSeq(state)
	waitFor(func() bool { s, _ := streamed(t, back.URL()); return len(s) > 0 && s[len(s)-1] >= last }, "the queue delivered after the restart")
	seqs, repeats := streamed(t, back.URL())
	for i, s := range seqs {
		require.Equal(t, uint64(i+1), s, "every sample stored, in order: %v", seqs)
	}
	assert.Zero(t, repeats, "a sample resent after a lost acknowledgement is stored once")
}
