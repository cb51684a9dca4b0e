package ingest

import (
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
	// From is the stream sequence to read from: one after the last one
	// saved; 0 reads the stream from its start.
	From uint64
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
func Consume(ctx context.Context, nc *nats.Conn, subj bus.Subjects, sink Sink, o StreamOptions, log *slog.Logger) (*Subscriber, error) {
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, fmt.Errorf("jetstream: %w", err)
	}
	st, err := js.CreateOrUpdateStream(ctx, subj.StreamConfig(o.Stream))
	if err != nil {
		return nil, fmt.Errorf("create the stream %s on the broker at %s: %w (the broker needs JetStream, with room for the stream's bytes)", subj.StreamName(), nc.ConnectedUrlRedacted(), err)
	}
	cons, err := resetConsumer(ctx, js, st, subj, o)
	if err != nil {
		return nil, err
	}
	s := newSubscriber(sink, log)
	s.stream, s.next = st, o.From
	if err := s.subscribeBeats(nc, subj); err != nil {
		return nil, err
	}
	cc, err := cons.Consume(s.onStreamMsg, jetstream.PullMaxMessages(1000),
		jetstream.ConsumeErrHandler(func(_ jetstream.ConsumeContext, err error) {
			log.Warn("reading the stream", "err", err)
		}))
	if err != nil {
		s.Drain()
		return nil, fmt.Errorf("read the stream %s: %w", subj.StreamName(), err)
	}
	s.consuming = cc
	return s, nil
}

// resetConsumer makes the durable consumer afresh at o.From: whatever the
// broker thinks the last reader had, the state file says where to go on.
func resetConsumer(ctx context.Context, js jetstream.JetStream, st jetstream.Stream, subj bus.Subjects, o StreamOptions) (jetstream.Consumer, error) {
	if err := st.DeleteConsumer(ctx, ConsumerName); err != nil && !errors.Is(err, jetstream.ErrConsumerNotFound) {
		return nil, fmt.Errorf("reset the consumer %s of stream %s: %w", ConsumerName, subj.StreamName(), err)
	}
	cfg := jetstream.ConsumerConfig{
		Durable:        ConsumerName,
		Description:    "the Sluice aggregator; it acknowledges what its state file has saved",
		AckPolicy:      jetstream.AckAllPolicy,
		AckWait:        o.AckWait,
		MaxAckPending:  1 << 20,
		FilterSubjects: []string{subj.AllSamples(), subj.AllJobs()},
		DeliverPolicy:  jetstream.DeliverAllPolicy,
	}
	if cfg.AckWait == 0 {
		cfg.AckWait = 30 * time.Second
	}
	if o.From > 1 {
		cfg.DeliverPolicy, cfg.OptStartSeq = jetstream.DeliverByStartSequencePolicy, o.From
	}
	cons, err := st.CreateConsumer(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("create the consumer %s of stream %s: %w", ConsumerName, subj.StreamName(), err)
	}
	return cons, nil
}

// onStreamMsg takes one message of the stream: it counts the messages the
// stream dropped before they were read (its age or byte bound), checks the
// message's de-duplication key against its body, and hands it to the sink.
func (s *Subscriber) onStreamMsg(m jetstream.Msg) {
	meta, err := m.Metadata()
	if err != nil {
		s.log.Warn("stream message without metadata", "err", err)
		return
	}
	r := Receipt{Seq: meta.Sequence.Stream, msg: m}
	s.noteGap(r.Seq)
	data, id := m.Data(), m.Headers().Get(bus.MsgIDHeader)
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

// noteGap counts the messages between the one expected next and seq: the
// stream dropped them (age or size bound) before the aggregator read them.
func (s *Subscriber) noteGap(seq uint64) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.next > 0 && seq > s.next {
		s.expired += seq - s.next
		s.log.Warn("the stream dropped messages before they were read", "from", s.next, "to", seq-1)
	}
	if seq >= s.next {
		s.next = seq + 1
	}
}
