// Package nodeagent is the node agent's loop: every interval it reads each
// counter source, turns the readings into reset-aware deltas, maps them onto
// the project's metrics and publishes one sample naming the jobs running on
// the node; it also publishes the job events the scheduler hooks recorded
// and a periodic heartbeat with the agent's own cost.
//
// # Basics
//
// [New] validates a [Config]; [Agent.Run] runs until its context ends.
// [Agent.Collect] is one interval's work without publishing, used by
// benchmarks, tests and the self-benchmark.
//
// # Caveats
//
// An Agent is driven by one goroutine (Run's); Collect must not be called
// concurrently with Run. While the broker is away, samples wait in a bounded
// queue and are sent in order once it is back; past the bound the oldest
// are dropped and counted.
package nodeagent

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"log/slog"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats.go"

	"sluice/pkg/bus"
	"sluice/pkg/delta"
	"sluice/pkg/jobstate"
	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/report"
	"sluice/pkg/source"
)

// Version is the agent's build version, reported in heartbeats.
var Version = "dev"

// Config configures an agent. Zero values mean the documented defaults.
type Config struct {
	// Node is the node name; empty means the host name.
	Node string
	// Interval is the sampling interval; zero means 5 seconds.
	Interval time.Duration
	// Sources are the counter sources to read, in order. New hands each
	// source.Summer its mapping row, so a source must not be shared with
	// another agent built on a different mapping.
	Sources []source.Source
	// Mapping maps raw counters to metrics; nil means mapping.Default().
	Mapping mapping.Table
	// StateDir holds the hooks' job records (in JobsDir) and the sample
	// sequence number; required.
	StateDir string
	// NATSURL is the broker; required by Run.
	NATSURL string
	// Prefix and Cluster name the subjects (see package bus).
	Prefix, Cluster string
	// Delivery is how samples and job events travel; empty means
	// bus.Stream (JetStream: a sample leaves the queue only once the
	// stream has stored it).
	Delivery bus.Delivery
	// Jitter is the width of the window in which this node's sampling
	// phase lies: each node samples at a stable offset into the interval
	// derived from its name, so thousands of nodes do not publish in the
	// same millisecond. Zero means the whole interval; a negative value
	// samples on interval boundaries.
	Jitter time.Duration
	// JobsFrom says where running jobs are learnt from; empty means
	// JobsFromBoth. A job a per-job source gave values for is listed
	// whatever JobsFrom says, so that its values are never dropped.
	JobsFrom JobsFrom
	// QueueLimit bounds the samples held while the broker is away; zero
	// means 720 (one hour at the default interval).
	QueueLimit int
	// HeartbeatEvery is how many intervals pass between heartbeats; zero
	// means 6.
	HeartbeatEvery int
	// SeqReserve is how many sample sequence numbers one write of the
	// sequence file reserves; zero means 720 (an hour at the default
	// interval). See saveSeq.
	SeqReserve int
	// Logger receives the agent's logs; nil discards them.
	Logger *slog.Logger
	// Now is the clock; nil means time.Now.
	Now func() time.Time
}

// Agent is a configured node agent.
type Agent struct {
	cfg     Config
	subj    bus.Subjects
	log     *slog.Logger
	jobs    *jobstate.Dir
	deltas  map[string]*delta.Differ // per source kind
	costs   map[string]*cost
	seq     uint64    // the last sequence number a sample took
	saved   uint64    // the highest one the sequence file allows (see saveSeq)
	last    time.Time // end of the previous interval; zero before the first read
	queue   *queue
	pub     publisher // over pubConn, made on first use
	pubConn *nats.Conn
	buf     []byte
	recs    recordCache
	insts   []delta.Instance // reused by Collect
	// disagreed holds the jobs already logged as known to only one of
	// hooks and cgroups.
	disagreed map[string]bool
}

// recordCache keeps the last listing of the job state directory; the
// directory's modification time says when it must be read again.
type recordCache struct {
	mtime time.Time
	recs  []jobstate.Record
}

type cost struct {
	reads     uint64
	total     time.Duration
	instances int
	ok        bool
	malformed uint64 // counter lines skipped since start
}

// New validates cfg and loads the persisted sequence number.
func New(cfg Config) (*Agent, error) {
	if cfg.Node == "" {
		h, err := os.Hostname()
		if err != nil {
			return nil, fmt.Errorf("agent: node name: %w", err)
		}
		cfg.Node = strings.SplitN(h, ".", 2)[0]
	}
	cfg.Interval = cmp.Or(cfg.Interval, 5*time.Second)
	cfg.QueueLimit = cmp.Or(cfg.QueueLimit, 720)
	cfg.HeartbeatEvery = cmp.Or(cfg.HeartbeatEvery, 6)
	cfg.SeqReserve = max(cmp.Or(cfg.SeqReserve, 720), 1)
	cfg.JobsFrom = cmp.Or(cfg.JobsFrom, JobsFromBoth)
	if !slices.Contains([]JobsFrom{JobsFromHooks, JobsFromCgroups, JobsFromBoth}, cfg.JobsFrom) {
		return nil, fmt.Errorf("agent: jobs from %q: want hooks, cgroups or both", cfg.JobsFrom)
	}
	if cfg.Mapping == nil {
		cfg.Mapping = mapping.Default()
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.New(slog.DiscardHandler)
	}
	if cfg.Now == nil {
		cfg.Now = time.Now
	}
	if cfg.Interval < 100*time.Millisecond {
		return nil, fmt.Errorf("agent: interval %s is below 100ms", cfg.Interval)
	}
	if len(cfg.Sources) == 0 {
		return nil, errors.New("agent: no counter sources configured")
	}
	if cfg.StateDir == "" {
		return nil, errors.New("agent: no state directory (--state.dir)")
	}
	subj, err := bus.NewSubjects(cfg.Prefix, cfg.Cluster)
	if err != nil {
		return nil, fmt.Errorf("agent: %w", err)
	}
	if cfg.Delivery, err = bus.ParseDelivery(string(cfg.Delivery)); err != nil {
		return nil, fmt.Errorf("agent: %w", err)
	}
	jobs, err := jobstate.Open(JobsDir(cfg.StateDir))
	if err != nil {
		return nil, fmt.Errorf("agent: %w", err)
	}
	a := &Agent{
		cfg: cfg, subj: subj, log: cfg.Logger.With("node", cfg.Node), jobs: jobs,
		deltas: map[string]*delta.Differ{}, costs: map[string]*cost{},
		queue: newQueue(cfg.QueueLimit), disagreed: map[string]bool{},
	}
	for _, s := range cfg.Sources {
		a.deltas[s.Name()] = delta.NewDiffer()
		a.costs[s.Name()] = &cost{}
		if sm, ok := s.(source.Summer); ok {
			sm.SumWith(cfg.Mapping[s.Name()])
		}
	}
	if a.seq, err = a.loadSeq(); err != nil {
		return nil, err
	}
	a.saved = a.seq
	return a, nil
}

// Phase is this node's offset into each interval: a hash of the node name
// modulo the jitter window, stable across restarts.
func (a *Agent) Phase() time.Duration {
	window := a.cfg.Jitter
	if window == 0 || window > a.cfg.Interval {
		window = a.cfg.Interval
	}
	if window < 0 {
		return 0
	}
	h := fnv.New64a()
	h.Write([]byte(a.cfg.Node))
	return time.Duration(h.Sum64() % uint64(window))
}

// NextTick is the first instant after now that lies phase past a multiple
// of interval (on the wall clock, so nodes keep their spread).
func NextTick(now time.Time, interval, phase time.Duration) time.Time {
	t := now.Truncate(interval).Add(phase)
	for !t.After(now) {
		t = t.Add(interval)
	}
	return t
}

// Node is the node name in use.
func (a *Agent) Node() string { return a.cfg.Node }

// JobsDir is where, under a state directory, the job records live. The
// sequence number sits beside it, so writing it does not touch the job
// directory's modification time that the agent watches.
func JobsDir(stateDir string) string { return filepath.Join(stateDir, "jobs") }

func (a *Agent) seqFile() string { return filepath.Join(a.cfg.StateDir, "sequence") }

func (a *Agent) loadSeq() (uint64, error) {
	data, err := os.ReadFile(a.seqFile())
	if errors.Is(err, os.ErrNotExist) {
		return 0, nil
	}
	if err != nil {
		return 0, fmt.Errorf("agent: read sequence: %w", err)
	}
	n, err := strconv.ParseUint(strings.TrimSpace(string(data)), 10, 64)
	if err != nil {
		return 0, fmt.Errorf("agent: sequence file %s: %w", a.seqFile(), err)
	}
	return n, nil
}

// saveSeq makes sure the sequence file allows a.seq before a sample
// carrying it leaves, so that a restarted agent, which starts after what
// the file says, never reuses one. One write reserves SeqReserve numbers:
// writing the file at every interval was a fifth of a running agent's CPU
// time. A restart skips what was reserved and not used, and the gap means
// nothing to the aggregator, which uses sequence numbers only to drop
// duplicates.
func (a *Agent) saveSeq() error {
	if a.seq <= a.saved {
		return nil
	}
	upTo := a.seq + uint64(a.cfg.SeqReserve) - 1
	tmp := a.seqFile() + ".tmp"
	if err := os.WriteFile(tmp, []byte(strconv.FormatUint(upTo, 10)), 0o644); err != nil {
		return fmt.Errorf("agent: write sequence: %w", err)
	}
	if err := os.Rename(tmp, a.seqFile()); err != nil {
		return fmt.Errorf("agent: write sequence: %w", err)
	}
	a.saved = upTo
	return nil
}

// Collect reads every source once and returns the sample for the interval
// since the previous Collect. The first call only sets the base: ok is
// false. Source errors other than missing data are returned joined, with
// the sample built from the sources that could be read.
func (a *Agent) Collect(ctx context.Context) (s report.Sample, ok bool, err error) {
	now := a.cfg.Now()
	var errs []error
	split := perJob{values: map[string]*metric.Values{}}
	for _, src := range a.cfg.Sources {
		readings, rerr := a.read(ctx, src)
		if rerr != nil {
			if errors.Is(rerr, source.ErrNoData) {
				a.log.Debug("source has no data", "source", src.Name(), "err", rerr)
			} else {
				errs = append(errs, rerr)
			}
		}
		insts := a.insts[:0]
		jobOf := map[string]string{}
		for _, r := range readings {
			in := delta.Instance{Key: r.Key, Epoch: r.Epoch, Values: r.Sums}
			if r.Counters != nil {
				a.cfg.Mapping.Apply(src.Name(), r.Counters, &in.Values)
			}
			insts = append(insts, in)
			if r.Job != "" {
				jobOf[r.Key] = r.Job
				split.sources = append(split.sources, src.Name())
			}
		}
		a.insts = insts
		for _, d := range a.deltas[src.Name()].Update(insts) {
			if d.Reset {
				a.log.Debug("counter reset", "source", src.Name(), "instance", d.Key)
			}
			split.target(jobOf[d.Key], &s.Values).Add(d.Values)
		}
	}
	start := a.last
	a.last = now
	if start.IsZero() {
		return report.Sample{}, false, errors.Join(errs...)
	}
	a.seq++
	s.Node, s.Seq, s.Start, s.End = a.cfg.Node, a.seq, start, now
	s.Jobs = split.listed(a.runningJobs(start))
	s.PerJob = split.blocks(s.Jobs, s.Values, a.cfg.Mapping)
	return s, true, errors.Join(errs...)
}

func (a *Agent) read(ctx context.Context, src source.Source) ([]source.Reading, error) {
	t0 := time.Now()
	readings, err := src.Read(ctx)
	c := a.costs[src.Name()]
	c.reads++
	c.total += time.Since(t0)
	c.instances = len(readings)
	c.ok = err == nil
	for _, r := range readings {
		if r.Malformed > 0 {
			c.malformed += uint64(r.Malformed)
			a.log.Warn("malformed counter lines skipped", "source", src.Name(), "instance", r.Key, "lines", r.Malformed, "total", c.malformed)
		}
	}
	return readings, err
}

// records returns the job records, read again only when the directory
// changed. A modification time under two seconds old is not trusted, since
// file systems stamp times coarsely and two changes can share one stamp.
func (a *Agent) records() []jobstate.Record {
	fi, err := os.Stat(a.jobs.Path())
	if err == nil && fi.ModTime().Equal(a.recs.mtime) && time.Since(fi.ModTime()) > 2*time.Second {
		return a.recs.recs
	}
	recs, err := a.jobs.List()
	if err != nil {
		a.log.Warn("job state unreadable", "dir", a.jobs.Path(), "err", err)
		a.recs = recordCache{}
		return recs
	}
	a.recs = recordCache{recs: recs}
	if fi != nil {
		a.recs.mtime = fi.ModTime()
	}
	return recs
}

// Costs returns, per source kind, the mean read time, the instance count
// at the last read and the malformed lines skipped so far.
func (a *Agent) Costs() []report.SourceCost {
	out := make([]report.SourceCost, 0, len(a.cfg.Sources))
	for _, src := range a.cfg.Sources {
		c := a.costs[src.Name()]
		var micros float64
		if c.reads > 0 {
			micros = float64(c.total.Microseconds()) / float64(c.reads)
		}
		out = append(out, report.SourceCost{Name: src.Name(), Instances: uint32(c.instances), MicrosPerRead: micros, OK: c.ok, Malformed: c.malformed})
	}
	return out
}
