package aggregate

import (
	"errors"

	"github.com/nats-io/nats.go"

	"sluice/pkg/model"
	"sluice/pkg/report"
	"sluice/pkg/store"
	"sluice/pkg/tracker"
	"sluice/pkg/wire"
)

// trackerReason labels a tracker rejection for the rejected counter.
func trackerReason(err error) string {
	switch {
	case errors.Is(err, tracker.ErrDuplicate):
		return "duplicate"
	case errors.Is(err, tracker.ErrStale):
		return "stale"
	case errors.Is(err, tracker.ErrBadInterval):
		return "bad_interval"
	case errors.Is(err, tracker.ErrLate):
		return "late"
	}
	return "other"
}

// onSample returns the samples callback. NATS runs one callback goroutine
// per subscription, so the decoder and the reused sample are its own.
func (s *Service) onSample() nats.MsgHandler {
	var dec wire.Decoder
	var smp report.Sample
	return func(m *nats.Msg) {
		if err := dec.DecodeSample(m.Data, &smp); err != nil {
			s.reject(wire.KindSample, wire.Reason(err), err)
			return
		}
		s.mu.Lock()
		err := s.tr.Sample(&smp)
		s.ingest.Accepted[wire.KindSample.String()]++
		if err != nil {
			s.ingest.Rejected[wire.KindSample.String()+"/"+trackerReason(err)]++
			if errors.Is(err, tracker.ErrDuplicate) {
				s.ingest.Duplicates++
			}
		}
		s.mu.Unlock()
	}
}

func (s *Service) onJobEvent() nats.MsgHandler {
	var ev report.JobEvent
	return func(m *nats.Msg) {
		if err := wire.DecodeJobEvent(m.Data, &ev); err != nil {
			s.reject(wire.KindJobEvent, wire.Reason(err), err)
			return
		}
		s.mu.Lock()
		defer s.mu.Unlock()
		s.ingest.Accepted[wire.KindJobEvent.String()]++
		if err := s.tr.JobEvent(&ev); err != nil {
			s.ingest.Rejected[wire.KindJobEvent.String()+"/"+trackerReason(err)]++
		}
	}
}

func (s *Service) onHeartbeat() nats.MsgHandler {
	return func(m *nats.Msg) {
		var hb report.Heartbeat
		if err := wire.DecodeHeartbeat(m.Data, &hb); err != nil {
			s.reject(wire.KindHeartbeat, wire.Reason(err), err)
			return
		}
		s.mu.Lock()
		defer s.mu.Unlock()
		s.ingest.Accepted[wire.KindHeartbeat.String()]++
		s.agents[hb.Node] = agentOf(&hb, s.agents[hb.Node])
	}
}

// agentOf turns a heartbeat into the node's agent status; prev, the
// status from the node's previous heartbeat, gives the CPU share.
func agentOf(hb *report.Heartbeat, prev model.Agent) model.Agent {
	a := model.Agent{
		Node: hb.Node, Version: hb.Version, LastSeen: hb.Time, Interval: hb.Interval,
		CPUSeconds: hb.CPUSeconds, RSSBytes: hb.RSSBytes, Queued: hb.Queued, Dropped: hb.Dropped,
	}
	if dt := hb.Time.Sub(prev.LastSeen).Seconds(); prev.Node != "" && dt > 0 && hb.CPUSeconds >= prev.CPUSeconds {
		a.CPUShare = (hb.CPUSeconds - prev.CPUSeconds) / dt
	}
	for _, c := range hb.Sources {
		a.Sources = append(a.Sources, model.AgentSource{Name: c.Name, Instances: c.Instances, MicrosPerRead: c.MicrosPerRead, OK: c.OK, Malformed: c.Malformed})
	}
	return a
}

func (s *Service) reject(k wire.Kind, reason string, err error) {
	s.mu.Lock()
	s.ingest.Rejected[k.String()+"/"+reason]++
	s.mu.Unlock()
	s.log.Debug("message rejected", "kind", k, "reason", reason, "err", err)
}

// flush writes what changed since the last flush in one transaction, then
// reports the events. A failed write keeps the batch for the next try.
func (s *Service) flush() {
	s.flushMu.Lock()
	defer s.flushMu.Unlock()
	s.mu.Lock()
	events := s.tr.Drain()
	b := &s.pending
	jobs, gone := s.tr.DirtyJobs()
	b.Jobs = append(b.Jobs, jobs...) // a later copy of a job overwrites an earlier one
	b.GoneJobs = append(b.GoneJobs, gone...)
	if b.Nodes == nil {
		b.Nodes = map[string]tracker.SeqSet{}
	}
	for n, seqs := range s.tr.DirtyNodes() {
		b.Nodes[n] = seqs
	}
	b.Watermark = s.tr.Watermark()
	for _, e := range events {
		switch {
		case e.Window != nil:
			b.Windows = append(b.Windows, *e.Window)
			s.learn.window(e.Window)
		case e.Flag != nil:
			b.Flags = append(b.Flags, *e.Flag)
		}
	}
	b.Days = s.learn.drain(b.Days)
	for _, e := range events {
		sum, _ := s.tr.Job(e.Job)
		s.unreported = append(s.unreported, reported{e, sum})
	}
	s.mu.Unlock()

	if err := s.st.Apply(b); err != nil {
		s.log.Error("store write failed; will retry", "err", err)
		s.mu.Lock()
		s.ingest.StoreErrors++
		s.flushErr = err
		s.mu.Unlock()
		return
	}
	s.mu.Lock()
	s.flushErr = nil
	s.mu.Unlock()
	s.pending = store.Batch{}
	if s.opts.OnEvent != nil {
		for _, r := range s.unreported {
			s.opts.OnEvent(r.event, r.job)
		}
	}
	s.unreported = nil
}

// reported is an event with the job as it was when the event happened.
type reported struct {
	event tracker.Event
	job   model.Summary
}
