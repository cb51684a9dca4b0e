package ingest

import (
	"context"
	"log/slog"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/bus"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// places is a sink that keeps the stream places of the samples it gets.
type places struct {
	mu  sync.Mutex
	got []uint64
}

func (p *places) Sample(_ *report.Sample, r Receipt) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.got = append(p.got, r.Seq)
	return nil
}
func (p *places) JobEvent(*report.JobEvent, Receipt) error { return nil }
func (p *places) Heartbeat(*report.Heartbeat) error        { return nil }
func (p *places) Skipped(Receipt)                          {}
func (p *places) Rebuild(*report.Sample, Receipt)          {}
func (p *places) CaughtUp()                                {}
func (p *places) seen() []uint64 {
	p.mu.Lock()
	defer p.mu.Unlock()
	return append([]uint64(nil), p.got...)
}

func tenSamples(t *testing.T) (*nats.Conn, jetstream.Stream) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	js, err := jetstream.New(nc)
	require.NoError(t, err)
	for seq := uint64(1); seq <= 10; seq++ {
		s := report.Sample{Node: "bw001", Seq: seq, Start: time.Unix(int64(seq), 0), End: time.Unix(int64(seq)+1, 0)}
		m := &nats.Msg{Subject: "sluice.default.sample.bw001", Data: wire.AppendSample(nil, &s),
			Header: nats.Header{bus.MsgIDHeader: []string{bus.SampleID(s.Node, s.Seq)}}}
		_, err := js.PublishMsg(context.Background(), m)
		require.NoError(t, err)
	}
	st, err := js.Stream(context.Background(), "SLUICE_DEFAULT")
	require.NoError(t, err)
	return nc, st
}

// TestPassedOverReadsAgainWhatTheStreamHolds: a message arriving after a
// gap (in flight on a connection that broke) must not be acknowledged
// past what was never applied: the first message the stream still holds
// is read again; only what it no longer holds counts as lost.
func TestPassedOverReadsAgainWhatTheStreamHolds(t *testing.T) {
	_, st := tenSamples(t)
	s := newSubscriber(&places{}, slog.New(slog.DiscardHandler))
	s.stream = st
	s.next = 2
	assert.Equal(t, uint64(2), s.passedOver(6), "2..5 are still there: read from 2")
	assert.Zero(t, s.expired)
	require.NoError(t, st.DeleteMsg(context.Background(), 2))
	require.NoError(t, st.DeleteMsg(context.Background(), 3))
	assert.Equal(t, uint64(4), s.passedOver(6), "2 and 3 are gone, 4 is there")
	assert.Equal(t, uint64(2), s.expired)
	s.expired = 0
	require.NoError(t, st.DeleteMsg(context.Background(), 4))
	require.NoError(t, st.DeleteMsg(context.Background(), 5))
	assert.Zero(t, s.passedOver(6), "nothing of 2..5 left")
	assert.Equal(t, uint64(4), s.expired)
	assert.Equal(t, uint64(7), s.next)
	assert.Zero(t, s.passedOver(3), "an earlier message, delivered again, is no gap")
	assert.Equal(t, uint64(7), s.next)
}

// TestResetReadsAgainFromThePlace: a reset restarts the consumer at the
// place passed over, and every message from there comes again.
func TestResetReadsAgainFromThePlace(t *testing.T) {
	nc, _ := tenSamples(t)
	sink := &places{}
	subj, _ := bus.NewSubjects("", "")
	s, err := Consume(context.Background(), nc, subj, sink, StreamOptions{From: 1}, slog.New(slog.DiscardHandler))
	require.NoError(t, err)
	t.Cleanup(s.Drain)
	require.Eventually(t, func() bool { return len(sink.seen()) == 10 }, 10*time.Second, 5*time.Millisecond)
	s.resetting.Store(true)
	s.resets <- 4
	require.Eventually(t, func() bool { return len(sink.seen()) == 17 }, 10*time.Second, 5*time.Millisecond)
	assert.Equal(t, []uint64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 4, 5, 6, 7, 8, 9, 10}, sink.seen())
	assert.False(t, s.resetting.Load())
}
