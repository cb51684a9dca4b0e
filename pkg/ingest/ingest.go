// Package ingest takes the agents' messages off the bus: samples and job
// events from the broker's stream (or, as an explicit choice, from core
// NATS), heartbeats from core NATS. It decodes them with package wire and
// hands their domain form (package report) to a Sink. It is the only room
// of the aggregator that knows the wire format.
//
// # Basics
//
// [Consume] reads the stream through the aggregator's durable pull
// consumer, from the stream sequence after the last one the state file
// saved, and hands every message to the Sink with its [Receipt]; the
// aggregator acknowledges a receipt, and with it every earlier message,
// once what they changed is saved. A message's de-duplication key (its
// Nats-Msg-Id header, bus.SampleID or bus.JobEventID) must match its body.
// [Subscribe] is the core NATS form: at most once, no receipts. Every
// message is counted: taken (by kind), or refused by kind and reason,
// whether the wire format refused it (wire.Reason), its key did (no_key,
// bad_key), or the Sink did (a [Refusal]).
//
// # Caveats
//
// The Sink is called from NATS's callback goroutines, one per
// subscription (one for the stream), so it must be safe for concurrent
// use.
package ingest

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"maps"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"sluice/pkg/bus"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// Sink takes decoded messages. An error it returns refuses the message:
// a [Refusal] is counted under its reason, any other error as "other".
// Skipped is told the place of a stream message refused before it reached
// the sink, so that it is acknowledged with the next commit.
//
// After a restart on the stream, Rebuild is given the samples at or
// before the last place saved, from where the open windows begin
// (StreamOptions.From), so that the sink can sum them again; CaughtUp is
// called once, when those are done (at once if there are none), before
// the first message after the place saved.
type Sink interface {
	Sample(*report.Sample, Receipt) error
	JobEvent(*report.JobEvent, Receipt) error
	Heartbeat(*report.Heartbeat) error
	Skipped(Receipt)
	Rebuild(*report.Sample, Receipt)
	CaughtUp()
}

// Refusal is a Sink's refusal of a message, with the reason it is counted
// under (e.g. "duplicate").
type Refusal struct {
	Reason string
	Err    error
}

func (r *Refusal) Error() string { return r.Err.Error() }
func (r *Refusal) Unwrap() error { return r.Err }

// Refuse returns err as a Refusal counted under reason.
func Refuse(reason string, err error) error { return &Refusal{Reason: reason, Err: err} }

// Counts are the ingest counters at one instant.
type Counts struct {
	Taken      map[string]uint64 // decoded messages, by kind
	Refused    map[string]uint64 // by "kind/reason"
	Duplicates uint64            // samples refused as already applied
	// SlowConsumerDropped counts messages the NATS client dropped because
	// the callbacks fell behind.
	SlowConsumerDropped uint64
	// Expired counts stream messages dropped by the stream's age or size
	// bound before the aggregator read them.
	Expired uint64
	// Rebuilt counts the samples read again after a restart to sum the
	// open windows again; RebuildMissing those the stream no longer held.
	Rebuilt, RebuildMissing uint64
	// Pending is the number of stream messages not yet delivered to the
	// aggregator; -1 when unknown (core NATS, or the broker did not say).
	Pending int64
}

// Subscriber is the aggregator's subscriptions and their counters.
type Subscriber struct {
	sink Sink
	log  *slog.Logger
	subs []*nats.Subscription

	// The stream's: its consumer's subscription, resets to read it again
	// from a place passed over, and the decoder and reused sample of the
	// one goroutine that handles its messages.
	stream    jetstream.Stream
	subj      bus.Subjects
	opts      StreamOptions
	ccMu      sync.Mutex // guards consuming and draining
	consuming jetstream.ConsumeContext
	draining  bool
	resets    chan uint64   // buffered 1; resetting says one is on its way
	done      chan struct{} // closed by Drain
	resetting atomic.Bool
	dec       wire.Decoder
	smp       report.Sample

	mu      sync.Mutex
	taken   map[string]uint64
	refused map[string]uint64
	dupes   uint64
	next    uint64 // the stream sequence expected next; 0 before the first
	expired uint64
	rebuilt uint64
	missing uint64 // of the messages to read again

	// saved is the last stream sequence the sink had saved when reading
	// began; caughtUp says the messages up to it are done. Only the
	// stream's goroutine touches them once it runs.
	saved    uint64
	caughtUp bool
}

func newSubscriber(sink Sink, log *slog.Logger) *Subscriber {
	return &Subscriber{sink: sink, log: log, taken: map[string]uint64{}, refused: map[string]uint64{}}
}

// Subscribe subscribes to every sample, job event and heartbeat under
// subj on core NATS and hands them to sink: the explicit choice of
// at-most-once delivery.
func Subscribe(nc *nats.Conn, subj bus.Subjects, sink Sink, log *slog.Logger) (*Subscriber, error) {
	s := newSubscriber(sink, log)
	return s, s.subscribe(nc, map[string]nats.MsgHandler{
		subj.AllSamples(): s.onSample(),
		subj.AllJobs():    s.onJobEvent(),
		subj.AllBeats():   s.onHeartbeat(),
	})
}

// subscribeBeats subscribes to the heartbeats, which stay on core NATS:
// each supersedes the last.
func (s *Subscriber) subscribeBeats(nc *nats.Conn, subj bus.Subjects) error {
	return s.subscribe(nc, map[string]nats.MsgHandler{subj.AllBeats(): s.onHeartbeat()})
}

// subscribe subscribes each subject's handler and waits until the broker
// has taken the subscriptions.
func (s *Subscriber) subscribe(nc *nats.Conn, handlers map[string]nats.MsgHandler) error {
	for subject, h := range handlers {
		sub, err := nc.Subscribe(subject, h)
		if err != nil {
			s.Drain()
			return fmt.Errorf("subscribe %s: %w", subject, err)
		}
		s.subs = append(s.subs, sub)
		// Samples arrive in bursts from thousands of nodes; give the
		// subscription room before the client drops (and counts) any.
		if err := sub.SetPendingLimits(1<<20, 512<<20); err != nil {
			s.Drain()
			return fmt.Errorf("pending limits on %s: %w", subject, err)
		}
	}
	if err := nc.Flush(); err != nil {
		s.Drain()
		return fmt.Errorf("flush subscriptions: %w", err)
	}
	return nil
}

// Drain stops taking messages once those already received are handled.
func (s *Subscriber) Drain() {
	s.ccMu.Lock()
	cc, already := s.consuming, s.draining
	s.draining = true
	s.ccMu.Unlock()
	if cc != nil && !already {
		cc.Drain()
		<-cc.Closed()
		close(s.done)
	}
	for _, sub := range s.subs {
		_ = sub.Drain()
	}
}

// Counts returns the counters now; on the stream it asks the broker how
// many messages are still to be read (at most a second).
func (s *Subscriber) Counts() Counts {
	s.mu.Lock()
	c := Counts{Taken: maps.Clone(s.taken), Refused: maps.Clone(s.refused), Duplicates: s.dupes, Expired: s.expired,
		Rebuilt: s.rebuilt, RebuildMissing: s.missing, Pending: -1}
	s.mu.Unlock()
	for _, sub := range s.subs {
		if n, err := sub.Dropped(); err == nil {
			c.SlowConsumerDropped += uint64(n)
		}
	}
	if s.stream != nil {
		ctx, cancel := context.WithTimeout(context.Background(), time.Second)
		defer cancel()
		if ci, err := s.stream.Consumer(ctx, ConsumerName); err == nil {
			if info, err := ci.Info(ctx); err == nil {
				c.Pending = int64(info.NumPending)
			}
		}
	}
	return c
}

func (s *Subscriber) onSample() nats.MsgHandler {
	var dec wire.Decoder
	var smp report.Sample
	return func(m *nats.Msg) {
		if err := dec.DecodeSample(m.Data, &smp); err != nil {
			s.count(wire.KindSample, wire.Reason(err), err)
			return
		}
		s.count(wire.KindSample, "", s.sink.Sample(&smp, Receipt{}))
	}
}

func (s *Subscriber) onJobEvent() nats.MsgHandler {
	var ev report.JobEvent
	return func(m *nats.Msg) {
		if err := wire.DecodeJobEvent(m.Data, &ev); err != nil {
			s.count(wire.KindJobEvent, wire.Reason(err), err)
			return
		}
		s.count(wire.KindJobEvent, "", s.sink.JobEvent(&ev, Receipt{}))
	}
}

func (s *Subscriber) onHeartbeat() nats.MsgHandler {
	return func(m *nats.Msg) {
		var hb report.Heartbeat // the sink may keep its slices
		if err := wire.DecodeHeartbeat(m.Data, &hb); err != nil {
			s.count(wire.KindHeartbeat, wire.Reason(err), err)
			return
		}
		s.count(wire.KindHeartbeat, "", s.sink.Heartbeat(&hb))
	}
}

// count records one message: refused by the wire format (decodeReason
// set), taken and refused by the sink (err set), or taken.
func (s *Subscriber) count(k wire.Kind, decodeReason string, err error) {
	reason := decodeReason
	if reason == "" && err != nil {
		reason = "other"
		if r := (*Refusal)(nil); errors.As(err, &r) {
			reason = r.Reason
		}
	}
	s.mu.Lock()
	if decodeReason == "" {
		s.taken[k.String()]++
	}
	if reason != "" {
		s.refused[k.String()+"/"+reason]++
		if reason == "duplicate" {
			s.dupes++
		}
	}
	s.mu.Unlock()
	if err != nil {
		s.log.Debug("message refused", "kind", k, "reason", reason, "err", err)
	}
}
