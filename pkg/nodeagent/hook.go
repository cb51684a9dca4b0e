package nodeagent

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"time"

	"github.com/nats-io/nats.go"

	"sluice/pkg/bus"
	"sluice/pkg/jobstate"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// HookConfig is what the scheduler hook commands need.
type HookConfig struct {
	// StateDir is the agent's state directory; required.
	StateDir string
	// Node is this node's name.
	Node string
	// NATSURL is the broker; empty records the job without publishing
	// (the running agent publishes it on its next interval).
	NATSURL string
	// Prefix and Cluster name the subjects.
	Prefix, Cluster string
	// Delivery is how the event travels; empty means bus.Stream (it
	// counts as published once the stream has stored it).
	Delivery bus.Delivery
	// Timeout bounds the publish; zero means 2 seconds. A prolog must not
	// hold up a job because the broker is away.
	Timeout time.Duration
	// Logger receives warnings; nil discards them.
	Logger *slog.Logger
}

// JobStart records that a job started on this node and publishes its start
// event if the broker answers within the timeout.
func JobStart(ctx context.Context, cfg HookConfig, r jobstate.Record) error {
	dir, err := cfg.dir()
	if err != nil {
		return err
	}
	if err := jobstate.ValidID(r.ID); err != nil {
		return err
	}
	if old, err := dir.Get(r.ID); err == nil && old.StartSent {
		r.StartSent = true // a repeated prolog: already announced
	}
	if err := dir.Put(r); err != nil {
		return err
	}
	if !r.StartSent && publishEvent(ctx, cfg, EventOf(r, report.JobStart, cfg.Node)) {
		r.StartSent = true
		return dir.Put(r)
	}
	return nil
}

// JobEnd records that a job ended on this node and publishes its end
// event if the broker answers in time. A job never started here is
// recorded as well, so its end still reaches the aggregator.
func JobEnd(ctx context.Context, cfg HookConfig, id string, end time.Time, exit int32) error {
	dir, err := cfg.dir()
	if err != nil {
		return err
	}
	r, err := dir.Get(id)
	if err != nil {
		r = jobstate.Record{ID: id, Start: end, StartSent: true}
	}
	r.End, r.ExitCode = end, exit
	if err := dir.Put(r); err != nil {
		return err
	}
	if !r.EndSent && publishEvent(ctx, cfg, EventOf(r, report.JobEnd, cfg.Node)) {
		r.EndSent = true
		return dir.Put(r)
	}
	return nil
}

func (cfg HookConfig) dir() (*jobstate.Dir, error) {
	if cfg.StateDir == "" {
		return nil, errors.New("job hook: no state directory (--state.dir)")
	}
	return jobstate.Open(JobsDir(cfg.StateDir))
}

// publishEvent reports whether the event reached the broker.
func publishEvent(ctx context.Context, cfg HookConfig, e report.JobEvent) bool {
	if cfg.NATSURL == "" {
		return false
	}
	log := cfg.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	subj, err := bus.NewSubjects(cfg.Prefix, cfg.Cluster)
	if err != nil {
		log.Warn("job event not published", "err", err)
		return false
	}
	timeout := cmp.Or(cfg.Timeout, 2*time.Second)
	nc, err := nats.Connect(cfg.NATSURL, nats.Name("sluice-hook-"+cfg.Node), nats.Timeout(timeout))
	if err != nil {
		log.Warn("job event left for the agent to publish", "job", e.Job, "err", fmt.Errorf("connect %s: %w", cfg.NATSURL, err))
		return false
	}
	defer nc.Close()
	d, err := bus.ParseDelivery(string(cfg.Delivery))
	if err != nil {
		log.Warn("job event not published", "err", err)
		return false
	}
	pub, err := newPublisher(nc, d, subj)
	if err != nil {
		log.Warn("job event left for the agent to publish", "job", e.Job, "err", err)
		return false
	}
	pctx, cancel := context.WithTimeout(ctx, timeout)
	defer cancel()
	m := queued{subject: subj.Job(cfg.Node), id: bus.JobEventID(&e), data: wire.AppendJobEvent(nil, &e)}
	if _, err := pub.deliver(pctx, []queued{m}); err != nil {
		log.Warn("job event left for the agent to publish", "job", e.Job, "err", err)
		return false
	}
	return true
}
