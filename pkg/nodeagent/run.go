package nodeagent

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/shirou/gopsutil/v3/process"

	"sluice/pkg/bus"
	"sluice/pkg/jobstate"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// Run connects to the broker and samples every interval until ctx ends. A
// broker that is not reachable yet is retried in the background; samples
// queue meanwhile.
func (a *Agent) Run(ctx context.Context) error {
	if a.cfg.NATSURL == "" {
		return errors.New("agent: no broker URL (--nats.url)")
	}
	nc, err := bus.Connect(ctx, a.cfg.NATSURL, "sluice-agent-"+a.cfg.Node)
	if err != nil {
		return fmt.Errorf("agent: %w", err)
	}
	defer nc.Close()
	defer a.closeSources()
	self, err := process.NewProcess(int32(os.Getpid()))
	if err != nil {
		return fmt.Errorf("agent: inspect own process: %w", err)
	}
	a.log.Info("agent started", "interval", a.cfg.Interval, "sources", len(a.cfg.Sources), "nats", a.cfg.NATSURL)
	if _, _, err := a.Collect(ctx); err != nil { // base reading
		a.log.Warn("source read failed", "err", err)
	}
	next := NextTick(time.Now(), a.cfg.Interval, a.Phase())
	timer := time.NewTimer(time.Until(next))
	defer timer.Stop()
	for n := 1; ; n++ {
		select {
		case <-ctx.Done():
			a.flush(nc)
			a.log.Info("agent stopped", "queued", a.queue.len(), "dropped", a.queue.dropped)
			return nil
		case <-timer.C:
		}
		next = NextTick(time.Now(), a.cfg.Interval, a.Phase())
		timer.Reset(time.Until(next))
		a.Step(ctx, nc)
		if n%a.cfg.HeartbeatEvery == 0 {
			a.heartbeat(nc, self)
		}
	}
}

// closeSources releases the files sources keep open between reads.
func (a *Agent) closeSources() {
	for _, src := range a.cfg.Sources {
		if c, ok := src.(io.Closer); ok {
			if err := c.Close(); err != nil {
				a.log.Debug("close source", "source", src.Name(), "err", err)
			}
		}
	}
}

// Step does one interval's work on nc: queue pending job events, take and
// queue the sample, deliver the queue. Run calls it on every tick; tests
// call it directly with a controlled clock (nc nil: nothing is sent).
func (a *Agent) Step(ctx context.Context, nc *nats.Conn) {
	a.syncJobs()
	s, ok, err := a.Collect(ctx)
	if ctx.Err() != nil {
		return // shutting down: the interval was cut short
	}
	if err != nil {
		a.log.Warn("source read failed", "err", err)
	}
	if ok {
		if err := a.saveSeq(); err != nil {
			a.log.Error("sequence not saved; sample withheld", "err", err)
			a.seq--
			return
		}
		a.buf = wire.AppendSample(a.buf[:0], &s)
		a.queue.push(queued{subject: a.subj.Sample(a.cfg.Node), id: bus.SampleID(s.Node, s.Seq), data: append([]byte(nil), a.buf...)})
	}
	a.flush(nc)
}

// flush delivers the queued messages and removes those delivered: stored
// by the stream (the default), or taken by the broker as a flush round
// trip confirms (core NATS). Until then they stay queued and are sent
// again at the next flush: a connection that died without being closed (a
// broker host that crashed, a network that dropped) shows only when the
// answer does not come, and what was published into it would be lost. No
// answer in time also drops the connection, so that samples queue until a
// new one is up. A message sent twice is harmless: the stream stores a
// message id once, the aggregator drops a sample whose node and sequence
// it has applied, and job events merge. A nil or disconnected connection
// leaves everything queued.
func (a *Agent) flush(nc *nats.Conn) {
	if nc == nil || !nc.IsConnected() || a.queue.len() == 0 {
		return
	}
	if a.pubConn != nc {
		pub, err := newPublisher(nc, a.cfg.Delivery, a.subj)
		if err != nil {
			a.log.Warn("cannot publish", "err", err)
			return
		}
		a.pub, a.pubConn = pub, nc
	}
	ctx, cancel := context.WithTimeout(context.Background(), deliverTimeout)
	defer cancel()
	n, err := a.pub.deliver(ctx, a.queue.items)
	a.queue.remove(n)
	if err != nil {
		a.log.Debug("delivery deferred", "queued", a.queue.len(), "err", err)
		if isTimeout(err) {
			_ = nc.ForceReconnect()
		}
	}
}

// syncJobs queues the job events the hooks could not publish and removes
// records whose end has been queued and covered by a sample.
func (a *Agent) syncJobs() {
	for _, r := range a.records() {
		if r.StartSent && (r.End.IsZero() || r.EndSent) && r.Running(a.last) {
			continue // nothing to do
		}
		if !r.StartSent {
			a.queueEvent(r, report.JobStart)
			r.StartSent = true
		}
		if !r.End.IsZero() && !r.EndSent {
			a.queueEvent(r, report.JobEnd)
			r.EndSent = true
		}
		if r.EndSent && !r.Running(a.last) {
			if err := a.jobs.Remove(r.ID); err != nil {
				a.log.Warn("job record not removed", "job", r.ID, "err", err)
			}
			continue
		}
		if err := a.jobs.Put(r); err != nil {
			a.log.Warn("job record not updated", "job", r.ID, "err", err)
		}
	}
}

func (a *Agent) queueEvent(r jobstate.Record, t report.EventType) {
	e := EventOf(r, t, a.cfg.Node)
	a.queue.push(queued{subject: a.subj.Job(a.cfg.Node), id: bus.JobEventID(&e), data: wire.AppendJobEvent(nil, &e)})
}

// EventOf builds the job event for a record.
func EventOf(r jobstate.Record, t report.EventType, node string) report.JobEvent {
	e := report.JobEvent{
		Type: t, Job: r.ID, Node: node, User: r.User, Account: r.Account, Name: r.Name,
		Nodes: r.Nodes, Time: r.Start,
	}
	if t == report.JobEnd {
		e.Time, e.ExitCode = r.End, r.ExitCode
	}
	return e
}

func (a *Agent) heartbeat(nc *nats.Conn, self *process.Process) {
	hb := report.Heartbeat{
		Node: a.cfg.Node, Time: a.cfg.Now(), Version: Version, Interval: a.cfg.Interval,
		Queued: uint32(a.queue.len()), Dropped: a.queue.dropped, Sources: a.Costs(),
	}
	if t, err := self.Times(); err == nil {
		hb.CPUSeconds = t.User + t.System
	}
	if m, err := self.MemoryInfo(); err == nil {
		hb.RSSBytes = m.RSS
	}
	if !nc.IsConnected() { // a heartbeat is only news while it is fresh
		return
	}
	if err := nc.Publish(a.subj.Beat(a.cfg.Node), wire.AppendHeartbeat(nil, &hb)); err != nil {
		a.log.Debug("heartbeat not sent", "err", err)
	}
}
