package ingest_test

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
	"sluice/pkg/ingest"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// recorder is a sink that keeps what it is given.
type recorder struct {
	mu      sync.Mutex
	seqs    []uint64 // sample sequence numbers
	places  []uint64 // stream sequences, of every message
	skipped []uint64
	rebuilt []uint64 // sample sequence numbers given to Rebuild
	// caughtUp is how many messages Sample, JobEvent and Skipped had been
	// given when CaughtUp was called; -1 until then.
	caughtUp int
	calls    int // CaughtUp calls
}

func (r *recorder) Rebuild(s *report.Sample, _ ingest.Receipt) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.rebuilt = append(r.rebuilt, s.Seq)
}

func (r *recorder) CaughtUp() {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.caughtUp, r.calls = len(r.places), r.calls+1
}

func (r *recorder) Sample(s *report.Sample, at ingest.Receipt) error {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.seqs = append(r.seqs, s.Seq)
	r.places = append(r.places, at.Seq)
	return nil
}

func (r *recorder) JobEvent(_ *report.JobEvent, at ingest.Receipt) error {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.places = append(r.places, at.Seq)
	return nil
}

func (r *recorder) Heartbeat(*report.Heartbeat) error { return nil }

func (r *recorder) Skipped(at ingest.Receipt) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.skipped = append(r.skipped, at.Seq)
	r.places = append(r.places, at.Seq)
}

func (r *recorder) seen() int {
	r.mu.Lock()
	defer r.mu.Unlock()
	return len(r.places)
}

// publish stores n samples of node bw001 (sequences 1..n) in the stream.
func publish(t *testing.T, nc *nats.Conn, n int) {
	t.Helper()
	js, err := jetstream.New(nc)
	require.NoError(t, err)
	for seq := 1; seq <= n; seq++ {
		s := report.Sample{Node: "bw001", Seq: uint64(seq), Start: time.Unix(int64(seq), 0), End: time.Unix(int64(seq)+1, 0)}
		m := &nats.Msg{Subject: "sluice.default.sample.bw001", Data: wire.AppendSample(nil, &s),
			Header: nats.Header{bus.MsgIDHeader: []string{bus.SampleID(s.Node, s.Seq)}}}
		_, err := js.PublishMsg(context.Background(), m)
		require.NoError(t, err)
	}
}

func consume(t *testing.T, nc *nats.Conn, from uint64) (*ingest.Subscriber, *recorder) {
	t.Helper()
	return consumeWith(t, nc, ingest.StreamOptions{From: from})
}

func consumeWith(t *testing.T, nc *nats.Conn, o ingest.StreamOptions) (*ingest.Subscriber, *recorder) {
	t.Helper()
	subj, _ := bus.NewSubjects("", "")
	rec := &recorder{caughtUp: -1}
	sub, err := ingest.Consume(context.Background(), nc, subj, rec, o, slog.New(slog.DiscardHandler))
	require.NoError(t, err)
	t.Cleanup(sub.Drain)
	return sub, rec
}

// TestConsumeReadsOnFromTheSavedPlace: the consumer starts after the last
// stream sequence the state file saved, whatever an earlier reader did.
func TestConsumeReadsOnFromTheSavedPlace(t *testing.T) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	publish(t, nc, 10)
	first, rec := consume(t, nc, 0)
	require.Eventually(t, func() bool { return rec.seen() == 10 }, 10*time.Second, 5*time.Millisecond)
	assert.Equal(t, []uint64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, rec.seqs)
	first.Drain()

	_, again := consume(t, nc, 7)
	require.Eventually(t, func() bool { return again.seen() == 4 }, 10*time.Second, 5*time.Millisecond)
	assert.Equal(t, []uint64{7, 8, 9, 10}, again.places)
}

// TestMessagesTheStreamDroppedAreCounted: messages gone from the stream
// before they were read (here deleted; the age or size bound does the
// same) are counted as lost, not passed over in silence.
func TestMessagesTheStreamDroppedAreCounted(t *testing.T) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	publish(t, nc, 10)
	js, err := jetstream.New(nc)
	require.NoError(t, err)
	st, err := js.Stream(context.Background(), "SLUICE_DEFAULT")
	require.NoError(t, err)
	for _, seq := range []uint64{3, 4, 8} {
		require.NoError(t, st.DeleteMsg(context.Background(), seq))
	}
	sub, rec := consume(t, nc, 2)
	require.Eventually(t, func() bool { return rec.seen() == 6 }, 10*time.Second, 5*time.Millisecond)
	assert.Equal(t, []uint64{2, 5, 6, 7, 9, 10}, rec.seqs)
	c := sub.Counts()
	assert.Equal(t, uint64(3), c.Expired)
	assert.Equal(t, int64(0), c.Pending)
}

// TestKeyMustMatchBody: a sample without a de-duplication key, or with
// another sample's, is refused, counted by reason, and its place still
// reaches the sink so that it is acknowledged.
func TestKeyMustMatchBody(t *testing.T) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	s := report.Sample{Node: "bw001", Seq: 5, Start: time.Unix(5, 0), End: time.Unix(6, 0)}
	body := wire.AppendSample(nil, &s)
	for _, id := range []string{"", bus.SampleID("bw001", 6), bus.SampleID("bw002", 5), bus.SampleID("bw001", 5)} {
		m := &nats.Msg{Subject: "sluice.default.sample.bw001", Data: body, Header: nats.Header{}}
		if id != "" {
			m.Header.Set(bus.MsgIDHeader, id)
		}
		require.NoError(t, nc.PublishMsg(m))
	}
	require.NoError(t, nc.Flush())
	sub, rec := consume(t, nc, 0)
	require.Eventually(t, func() bool { return rec.seen() == 4 }, 10*time.Second, 5*time.Millisecond)
	assert.Equal(t, []uint64{5}, rec.seqs, "only the sample with its own key")
	assert.Equal(t, []uint64{1, 2, 3}, rec.skipped)
	c := sub.Counts()
	assert.Equal(t, uint64(1), c.Refused["sample/no_key"])
	assert.Equal(t, uint64(2), c.Refused["sample/bad_key"])
}

// TestSavedMessagesAreReadAgainToRebuild: after a restart, the messages
// from where the open windows begin up to the place saved go to Rebuild,
// then CaughtUp is called once, before the first message after it.
func TestSavedMessagesAreReadAgainToRebuild(t *testing.T) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	publish(t, nc, 10)
	sub, rec := consumeWith(t, nc, ingest.StreamOptions{From: 3, Saved: 6})
	require.Eventually(t, func() bool { return rec.seen() == 4 }, 10*time.Second, 5*time.Millisecond)
	rec.mu.Lock()
	defer rec.mu.Unlock()
	assert.Equal(t, []uint64{3, 4, 5, 6}, rec.rebuilt)
	assert.Equal(t, []uint64{7, 8, 9, 10}, rec.seqs)
	assert.Equal(t, 1, rec.calls)
	assert.Equal(t, 0, rec.caughtUp, "caught up before the first message after the place saved")
	assert.Equal(t, uint64(4), sub.Counts().Rebuilt)
}

// TestNothingToRebuildCatchesUpAtOnce: with the open windows beginning
// after the place saved, nothing is read again.
func TestNothingToRebuildCatchesUpAtOnce(t *testing.T) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	publish(t, nc, 4)
	_, rec := consumeWith(t, nc, ingest.StreamOptions{From: 5, Saved: 4})
	rec.mu.Lock()
	defer rec.mu.Unlock()
	assert.Equal(t, 1, rec.calls)
	assert.Empty(t, rec.rebuilt)
}

// TestStreamMadeAgainIsReadFromItsStart: a stream that ends before the
// place the state file saved is not the one it was read from; reading it
// from the saved place would pass over everything in it.
func TestStreamMadeAgainIsReadFromItsStart(t *testing.T) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	publish(t, nc, 3)
	_, rec := consumeWith(t, nc, ingest.StreamOptions{From: 90, Saved: 120})
	require.Eventually(t, func() bool { return rec.seen() == 3 }, 10*time.Second, 5*time.Millisecond)
	rec.mu.Lock()
	defer rec.mu.Unlock()
	assert.Equal(t, []uint64{1, 2, 3}, rec.seqs)
	assert.Empty(t, rec.rebuilt)
}

// TestMissingSavedMessagesAreNotCountedAsLost: messages to read again
// that the stream dropped were applied before the restart; they are
// counted apart from samples lost.
func TestMissingSavedMessagesAreNotCountedAsLost(t *testing.T) {
	srv := natstest.Start(t)
	nc := natstest.Connect(t, srv.URL())
	publish(t, nc, 10)
	js, err := jetstream.New(nc)
	require.NoError(t, err)
	st, err := js.Stream(context.Background(), "SLUICE_DEFAULT")
	require.NoError(t, err)
	for _, seq := range []uint64{4, 5, 6, 7} {
		require.NoError(t, st.DeleteMsg(context.Background(), seq))
	}
	sub, rec := consumeWith(t, nc, ingest.StreamOptions{From: 2, Saved: 5})
	require.Eventually(t, func() bool { return rec.seen() == 3 }, 10*time.Second, 5*time.Millisecond)
	c := sub.Counts()
	assert.Equal(t, uint64(2), c.RebuildMissing, "4 and 5 were saved")
	assert.Equal(t, uint64(2), c.Expired, "6 and 7 were not")
	rec.mu.Lock()
	defer rec.mu.Unlock()
	assert.Equal(t, []uint64{2, 3}, rec.rebuilt)
	assert.Equal(t, []uint64{8, 9, 10}, rec.seqs)
	assert.Equal(t, 1, rec.calls)
}
