// Package ingest takes the agents' messages off the bus: it subscribes to
// samples, job events and heartbeats, decodes them with package wire, and
// hands their domain form (package report) to a Sink. It is the only room
// of the aggregator that knows the wire format.
//
// # Basics
//
// [Subscribe] subscribes one callback per kind. Each callback owns its
// decoder and its reused message, so decoding takes no lock; the Sink is
// called once per message that decodes. Every message is counted: taken
// (by kind), or refused by kind and reason, whether the wire format
// refused it (wire.Reason) or the Sink did (a [Refusal]).
//
// # Caveats
//
// The Sink is called from NATS's callback goroutines, one per
// subscription, so it must be safe for concurrent use.
package ingest

import (
	"errors"
	"fmt"
	"log/slog"
	"maps"
	"sync"

	"github.com/nats-io/nats.go"

	"sluice/pkg/bus"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// Sink takes decoded messages. An error it returns refuses the message:
// a [Refusal] is counted under its reason, any other error as "other".
type Sink interface {
	Sample(*report.Sample) error
	JobEvent(*report.JobEvent) error
	Heartbeat(*report.Heartbeat) error
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
}

// Subscriber is the aggregator's subscriptions and their counters.
type Subscriber struct {
	sink Sink
	log  *slog.Logger
	subs []*nats.Subscription

	mu      sync.Mutex
	taken   map[string]uint64
	refused map[string]uint64
	dupes   uint64
}

// Subscribe subscribes to every sample, job event and heartbeat under
// subj and hands them to sink.
func Subscribe(nc *nats.Conn, subj bus.Subjects, sink Sink, log *slog.Logger) (*Subscriber, error) {
	s := &Subscriber{sink: sink, log: log, taken: map[string]uint64{}, refused: map[string]uint64{}}
	for subject, h := range map[string]nats.MsgHandler{
		subj.AllSamples(): s.onSample(),
		subj.AllJobs():    s.onJobEvent(),
		subj.AllBeats():   s.onHeartbeat(),
	} {
		sub, err := nc.Subscribe(subject, h)
		if err != nil {
			s.Drain()
			return nil, fmt.Errorf("subscribe %s: %w", subject, err)
		}
		s.subs = append(s.subs, sub)
		// Samples arrive in bursts from thousands of nodes; give the
		// subscription room before the client drops (and counts) any.
		if err := sub.SetPendingLimits(1<<20, 512<<20); err != nil {
			s.Drain()
			return nil, fmt.Errorf("pending limits on %s: %w", subject, err)
		}
	}
	if err := nc.Flush(); err != nil {
		s.Drain()
		return nil, fmt.Errorf("flush subscriptions: %w", err)
	}
	return s, nil
}

// Drain stops taking messages once those already received are handled.
func (s *Subscriber) Drain() {
	for _, sub := range s.subs {
		_ = sub.Drain()
	}
}

// Counts returns the counters now.
func (s *Subscriber) Counts() Counts {
	s.mu.Lock()
	c := Counts{Taken: maps.Clone(s.taken), Refused: maps.Clone(s.refused), Duplicates: s.dupes}
	s.mu.Unlock()
	for _, sub := range s.subs {
		if n, err := sub.Dropped(); err == nil {
			c.SlowConsumerDropped += uint64(n)
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
		s.count(wire.KindSample, "", s.sink.Sample(&smp))
	}
}

func (s *Subscriber) onJobEvent() nats.MsgHandler {
	var ev report.JobEvent
	return func(m *nats.Msg) {
		if err := wire.DecodeJobEvent(m.Data, &ev); err != nil {
			s.count(wire.KindJobEvent, wire.Reason(err), err)
			return
		}
		s.count(wire.KindJobEvent, "", s.sink.JobEvent(&ev))
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
