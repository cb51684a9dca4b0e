package aggregate

import (
	"errors"

	"sluice/pkg/ingest"
	"sluice/pkg/model"
	"sluice/pkg/report"
	"sluice/pkg/tracker"
)

// sink is the service as package ingest sees it: each message applied
// under the service lock.
type sink struct{ s *Service }

func (k sink) Sample(smp *report.Sample, r ingest.Receipt) error {
	k.s.mu.Lock()
	err := k.s.tr.SampleAt(smp, r.Seq)
	k.s.placeLocked(r)
	k.s.mu.Unlock()
	return refusal(err)
}

func (k sink) JobEvent(e *report.JobEvent, r ingest.Receipt) error {
	k.s.mu.Lock()
	err := k.s.tr.JobEvent(e)
	k.s.placeLocked(r)
	k.s.mu.Unlock()
	return refusal(err)
}

// Rebuild sums a sample applied before the restart into the open windows
// again.
func (k sink) Rebuild(smp *report.Sample, r ingest.Receipt) {
	k.s.mu.Lock()
	k.s.tr.Rebuild(smp, r.Seq)
	k.s.mu.Unlock()
}

// CaughtUp ends the rebuild: windows close again.
func (k sink) CaughtUp() {
	k.s.mu.Lock()
	defer k.s.mu.Unlock()
	k.s.endRebuildLocked()
}

func (k sink) Skipped(r ingest.Receipt) {
	k.s.mu.Lock()
	k.s.placeLocked(r)
	k.s.mu.Unlock()
}

// placeLocked notes that everything up to r's place in the stream is
// applied; the caller holds mu.
func (s *Service) placeLocked(r ingest.Receipt) {
	if r.Seq > s.applied.Seq {
		s.applied = r
	}
}

func (k sink) Heartbeat(hb *report.Heartbeat) error {
	k.s.mu.Lock()
	a, shared := agentOf(hb, k.s.agents[hb.Node])
	k.s.agents[hb.Node] = a
	if shared {
		k.s.shares.Observe(a.CPUShare)
	}
	k.s.mu.Unlock()
	return nil
}

// refusal names the reason a tracker refusal is counted under.
func refusal(err error) error {
	if err == nil {
		return nil
	}
	reason := "other"
	switch {
	case errors.Is(err, tracker.ErrDuplicate):
		reason = "duplicate"
	case errors.Is(err, tracker.ErrStale):
		reason = "stale"
	case errors.Is(err, tracker.ErrBadInterval):
		reason = "bad_interval"
	case errors.Is(err, tracker.ErrLate):
		reason = "late"
	}
	return ingest.Refuse(reason, err)
}

// agentOf turns a heartbeat into the node's agent status; prev, the
// status from the node's previous heartbeat, gives the CPU share, and
// shared says there was one to give it.
func agentOf(hb *report.Heartbeat, prev model.AgentStatus) (a model.AgentStatus, shared bool) {
	a = model.AgentStatus{
		Node: hb.Node, Version: hb.Version, LastSeen: hb.Time, Interval: hb.Interval,
		CPUSeconds: hb.CPUSeconds, RSSBytes: hb.RSSBytes, Queued: hb.Queued, Dropped: hb.Dropped,
	}
	if dt := hb.Time.Sub(prev.LastSeen).Seconds(); prev.Node != "" && dt > 0 && hb.CPUSeconds >= prev.CPUSeconds {
		a.CPUShare = (hb.CPUSeconds - prev.CPUSeconds) / dt
		shared = true
	}
	for _, c := range hb.Sources {
		a.Sources = append(a.Sources, model.AgentSource{Name: c.Name, Instances: c.Instances, MicrosPerRead: c.MicrosPerRead, OK: c.OK, Malformed: c.Malformed})
	}
	return a, shared
}
