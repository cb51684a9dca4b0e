package aggregate

import (
	"maps"

	"sluice/pkg/model"
	"sluice/pkg/store"
	"sluice/pkg/tracker"
)

// reported is an event with the job as it was when the event happened.
type reported struct {
	event tracker.Event
	job   model.Summary
}

// flush writes what changed since the last flush in one transaction, with
// the place in the stream it covers, then acknowledges that place and
// reports the events. A failed write keeps the batch for the next try and
// acknowledges nothing.
func (s *Service) flush() {
	s.flushMu.Lock()
	defer s.flushMu.Unlock()
	s.mu.Lock()
	s.collectLocked(&s.pending)
	saved := s.applied
	s.pending.StreamSeq, s.pending.ReplayFrom = saved.Seq, s.tr.ReplayFrom()
	s.mu.Unlock()

	err := s.st.Apply(&s.pending)
	s.mu.Lock()
	s.flushErr = err
	if err != nil {
		s.storeErrors++
	} else {
		s.committed = s.opts.Now()
	}
	s.mu.Unlock()
	if err != nil {
		s.log.Error("store write failed; will retry", "err", err)
		return
	}
	s.pending = store.Batch{}
	// Only now is what the stream gave us up to here saved: acknowledge it,
	// and with it every earlier message. A lost acknowledgement costs a
	// redelivery, which the (node, sequence) check drops.
	if err := saved.Ack(); err != nil {
		s.log.Warn("stream acknowledgement not sent; the broker will deliver again", "seq", saved.Seq, "err", err)
	}
	if s.opts.OnEvent != nil {
		for _, r := range s.unreported {
			s.opts.OnEvent(r.event, r.job)
		}
	}
	s.unreported = nil
}

// collectLocked adds to b what the tracker and the learner changed since
// the last call: job and node records, closed windows (also added to the
// baseline's live day), flags and baseline days. The caller holds mu and
// flushMu.
func (s *Service) collectLocked(b *store.Batch) {
	events := s.tr.Drain()
	jobs, gone := s.tr.DirtyJobs()
	b.Jobs = append(b.Jobs, jobs...) // a later record of a job overwrites an earlier one
	b.GoneJobs = append(b.GoneJobs, gone...)
	if b.Nodes == nil {
		b.Nodes = map[string]model.SeqRecord{}
	}
	maps.Copy(b.Nodes, s.tr.DirtyNodes())
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
}
