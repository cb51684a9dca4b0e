package ingest

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"sluice/pkg/bus"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// Receipt is a message's place in the stream. Acknowledging it
// acknowledges it and every earlier message (the consumer acknowledges
// all), which the aggregator does once what they changed is saved. The
// zero Receipt (core NATS) acknowledges nothing.
type Receipt struct {
	// Seq is the message's stream sequence; 0 on core NATS.
	Seq uint64
	msg jetstream.Msg
}

// Ack acknowledges the message and every earlier one.
func (r Receipt) Ack() error {
	if r.msg == nil {
		return nil
	}
	return r.msg.Ack()
}

// StreamOptions configure reading the stream.
type StreamOptions struct {
	// Stream bounds the stream, which Consume creates or updates.
	Stream bus.StreamOptions
	// From is the stream sequence to read from: where the samples the
	// open windows had summed begin, or one after Saved; 0 reads the
	// stream from its start.
	From uint64
	// Saved is the last stream sequence whose changes the state file
	// holds: messages up to it go to Sink.Rebuild.
	Saved uint64
	// AckWait is how long the broker waits for an acknowledgement before
	// it delivers a message again; zero means 30 seconds. It must be well
	// over the commit interval.
	AckWait time.Duration
}

// ConsumerName is the durable consumer the aggregator reads through.
const ConsumerName = "sluice-aggregator"

// Consume creates (or updates) the stream of subj's samples and job events,
// sets the aggregator's durable pull consumer to start at o.From, and
// hands every message to sink with its receipt, in stream order, until
// the returned subscriber is drained; heartbeats come on core NATS as
// before. A stream that cannot be created stops it with an error saying so.
//
// The consumer acknowledges all: a receipt acknowledges every earlier
// message too. So a message that never reached the aggregator (in flight
// on a connection that broke) must not be passed over: when a message
// comes after a gap, a gap the stream still holds is read again from its
// start (the consumer is reset there; what was applied already is dropped
// by the (node, sequence) check), and only what the stream no longer holds
// is counted as lost.
func Consume(ctx context.Context, nc *nats.Conn, subj bus.Subjects, sink Sink, o StreamOptions, log *slog.Logger) (*Subscriber, error) {
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, fmt.Errorf("jetstream: %w", err)
	}
	st, err := js.CreateOrUpdateStream(ctx, subj.StreamConfig(o.Stream))
	if err != nil {
		return nil, fmt.Errorf("create the stream %s on the broker at %s: %w (the broker needs JetStream, with room for the stream's bytes)", subj.StreamName(), nc.ConnectedUrlRedacted(), err)
	}
	s := newSubscriber(sink, log)
	s.stream, s.subj, s.opts = st, subj, fitTo(st.CachedInfo().State, o, log)
	s.saved = s.opts.Saved
	s.resets, s.done = make(chan uint64, 1), make(chan struct{})
	if s.opts.From > s.saved {
		s.catchUp()
	}
	if err := s.consumeFrom(ctx, s.opts.From); err != nil {
		return nil, err
	}
	if err := s.subscribeBeats(nc, subj); err != nil {
		s.Drain()
		return nil, err
	}
	go s.resetLoop()
	return s, nil
}

// fitTo checks the places the state file saved against what the stream
// holds. A stream whose last message is before the place saved is not
// the one the state file was read from (deleted and made again): it is
// read from its start, and nothing is summed again.
func fitTo(st jetstream.StreamState, o StreamOptions, log *slog.Logger) StreamOptions {
	if o.Saved > st.LastSeq {
		log.Warn("the stream ends before the place the state file saved: it was made again; reading it from its start",
			"stream_last", st.LastSeq, "saved", o.Saved)
		o.From, o.Saved = 0, 0
	}
	if o.From == 0 {
		o.From = o.Saved + 1
	}
	return o
}

// catchUp tells the sink the messages to read again are done.
func (s *Subscriber) catchUp() {
	if !s.caughtUp {
		s.caughtUp = true
		s.sink.CaughtUp()
	}
}

// consumeFrom resets the durable consumer to seq and reads from it,
// unless the subscriber is being drained.
func (s *Subscriber) consumeFrom(ctx context.Context, seq uint64) error {
	s.ccMu.Lock()
	defer s.ccMu.Unlock()
	if s.draining {
		return nil
	}
	cons, err := resetConsumer(ctx, s.stream, s.subj, s.opts, seq)
	if err != nil {
		return err
	}
	s.mu.Lock()
	s.next = seq
	s.mu.Unlock()
	// The reader before it is closed: from here on, messages are the new
	// reader's, and the first ones may come before Consume returns.
	s.resetting.Store(false)
	// Short pulls and heartbeats: after a broker restart the consumer
	// notices within seconds, not the default half minute.
	cc, err := cons.Consume(s.onStreamMsg, jetstream.PullMaxMessages(1000), jetstream.PullExpiry(5*time.Second), jetstream.PullHeartbeat(2*time.Second),
		jetstream.ConsumeErrHandler(func(_ jetstream.ConsumeContext, err error) {
			s.log.Warn("reading the stream", "err", err)
		}))
	if err != nil {
		return fmt.Errorf("read the stream %s: %w", s.subj.StreamName(), err)
	}
	s.consuming = cc
	return nil
}

// resetLoop reads the stream again from each place onStreamMsg found
// missing, until the subscriber is drained.
func (s *Subscriber) resetLoop() {
	for {
		var seq uint64
		select {
		case <-s.done:
			return
		case seq = <-s.resets:
		}
		s.ccMu.Lock()
		cc := s.consuming
		s.ccMu.Unlock()
		cc.Stop()
		<-cc.Closed()
		for {
			ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
			err := s.consumeFrom(ctx, seq)
			cancel()
			if err == nil {
				break
			}
			s.log.Warn("reading the stream again", "from", seq, "err", err)
			time.Sleep(time.Second)
		}
	}
}

// resetConsumer makes the durable consumer afresh at from: whatever the
// broker thinks the last reader had, the state file says where to go on.
func resetConsumer(ctx context.Context, st jetstream.Stream, subj bus.Subjects, o StreamOptions, from uint64) (jetstream.Consumer, error) {
	if err := st.DeleteConsumer(ctx, ConsumerName); err != nil && !errors.Is(err, jetstream.ErrConsumerNotFound) {
		return nil, fmt.Errorf("reset the consumer %s of stream %s: %w", ConsumerName, subj.StreamName(), err)
	}
	cfg := jetstream.ConsumerConfig{
		Durable:        ConsumerName,
		Description:    "the Sluice aggregator; it acknowledges what its state file has saved",
		AckPolicy:      jetstream.AckAllPolicy,
		AckWait:        cmp.Or(o.AckWait, 30*time.Second),
		MaxAckPending:  1 << 20,
		FilterSubjects: []string{subj.AllSamples(), subj.AllJobs()},
		DeliverPolicy:  jetstream.DeliverAllPolicy,
	}
	if from > 1 {
		cfg.DeliverPolicy, cfg.OptStartSeq = jetstream.DeliverByStartSequencePolicy, from
	}
	cons, err := st.CreateConsumer(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("create the consumer %s of stream %s: %w", ConsumerName, subj.StreamName(), err)
	}
	return cons, nil
}

// onStreamMsg takes one message of the stream: it checks nothing was
// passed over before it, checks the message's de-duplication key against
// its body, and hands it to the sink.
func (s *Subscriber) onStreamMsg(m jetstream.Msg) {
	if s.resetting.Load() {
		return // the stream is being read again from an earlier place
	}
	meta, err := m.Metadata()
	if err != nil {
		s.log.Warn("stream message without metadata", "err", err)
		return
	}
	r := Receipt{Seq: meta.Sequence.Stream, msg: m}
	if again := s.passedOver(r.Seq); again > 0 {
		s.resetting.Store(true)
		s.resets <- again // buffered, and no other is on its way
		return
	}
	data, id := m.Data(), m.Headers().Get(bus.MsgIDHeader)
	if r.Seq <= s.saved && !s.caughtUp {
		s.rebuild(data, r)
		return
	}
	s.catchUp()
	k, err := wire.Peek(data)
	switch {
	case err != nil:
		s.refuseAt(wire.KindSample, wire.Reason(err), err, r)
	case k == wire.KindSample:
		s.streamSample(data, id, r)
	case k == wire.KindJobEvent:
		s.streamJobEvent(data, id, r)
	default:
		s.refuseAt(k, "wrong_stream", fmt.Errorf("a %s message in the stream", k), r)
	}
}

// rebuild hands a sample saved before the restart to the sink to sum
// again; other messages at or before the place saved need nothing. The
// key was checked when the message was first taken.
func (s *Subscriber) rebuild(data []byte, r Receipt) {
	if k, err := wire.Peek(data); err == nil && k == wire.KindSample && s.dec.DecodeSample(data, &s.smp) == nil {
		s.sink.Rebuild(&s.smp, r)
		s.mu.Lock()
		s.rebuilt++
		s.mu.Unlock()
	}
	if r.Seq == s.saved {
		s.catchUp()
	}
}

func (s *Subscriber) streamSample(data []byte, id string, r Receipt) {
	if err := s.dec.DecodeSample(data, &s.smp); err != nil {
		s.refuseAt(wire.KindSample, wire.Reason(err), err, r)
		return
	}
	if reason, err := checkKey(id, bus.SampleID(s.smp.Node, s.smp.Seq)); err != nil {
		s.refuseAt(wire.KindSample, reason, err, r)
		return
	}
	s.count(wire.KindSample, "", s.sink.Sample(&s.smp, r))
}

func (s *Subscriber) streamJobEvent(data []byte, id string, r Receipt) {
	var ev report.JobEvent
	if err := wire.DecodeJobEvent(data, &ev); err != nil {
		s.refuseAt(wire.KindJobEvent, wire.Reason(err), err, r)
		return
	}
	if reason, err := checkKey(id, bus.JobEventID(&ev)); err != nil {
		s.refuseAt(wire.KindJobEvent, reason, err, r)
		return
	}
	s.count(wire.KindJobEvent, "", s.sink.JobEvent(&ev, r))
}

// checkKey compares a message's de-duplication key with the one its body
// gives: a message without one, or with another's, could be stored in
// place of a real one, and is refused.
func checkKey(got, want string) (reason string, err error) {
	switch got {
	case want:
		return "", nil
	case "":
		return "no_key", errors.New("no de-duplication key")
	}
	return "bad_key", fmt.Errorf("de-duplication key %q, body says %q", got, want)
}

// refuseAt counts a refused stream message and tells the sink its place,
// so that it is acknowledged with the next commit.
func (s *Subscriber) refuseAt(k wire.Kind, reason string, err error, r Receipt) {
	s.count(k, reason, err)
	s.sink.Skipped(r)
}

// passedOver looks at the messages between the one expected next and
// seq. Those the stream no longer holds (its age or size bound, or a
// deletion) are counted as lost; the first it still holds is returned, to
// be read again from there. 0 means nothing is missing.
func (s *Subscriber) passedOver(seq uint64) uint64 {
	s.mu.Lock()
	next := s.next
	s.mu.Unlock()
	if next == 0 || seq <= next {
		s.advance(seq)
		return 0
	}
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	lost := uint64(0)
	if info, err := s.stream.Info(ctx); err == nil && info.State.FirstSeq > next {
		lost = min(info.State.FirstSeq, seq) - next
		next += lost
	}
	for ; next < seq; next++ {
		_, err := s.stream.GetMsg(ctx, next)
		if err == nil || !errors.Is(err, jetstream.ErrMsgNotFound) {
			s.countLost(lost, next)
			return next // still there (or the broker cannot say): read it
		}
		lost++
	}
	s.countLost(lost, seq)
	s.advance(seq)
	return 0
}

// countLost counts n messages the stream no longer held, the last of
// them just before before: those after the place saved as lost samples,
// those at or before it as missing from the rebuild of the open windows.
func (s *Subscriber) countLost(n, before uint64) {
	if n == 0 {
		return
	}
	first := before - n
	missing := min(n, s.saved+1-min(first, s.saved+1))
	s.mu.Lock()
	s.expired += n - missing
	s.missing += missing
	s.mu.Unlock()
	if missing > 0 {
		s.log.Warn("the stream no longer held samples to read again: the open windows miss them", "missing", missing, "before", before)
	}
	if n > missing {
		s.log.Warn("the stream no longer held messages before they were read", "lost", n-missing, "before", before)
	}
}

// advance notes seq as read.
func (s *Subscriber) advance(seq uint64) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if seq >= s.next {
		s.next = seq + 1
	}
}
