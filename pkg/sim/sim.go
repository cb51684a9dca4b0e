// Package sim simulates compute nodes' Lustre client counters for a mix of
// jobs, writing each node's llite stats file in the real format so that
// real agents can read them. The demo, the integration tests and the
// benchmarks run on it.
//
// # Basics
//
// A [Scenario] lists nodes and jobs; each job runs on some nodes between two
// offsets from the scenario start and behaves, phase by phase, at given
// per-node rates ([Behaviour]). [Sim.Step] advances every node's cumulative
// counters to an instant and rewrites the files under
// <root>/<node>/llite/<instance>/stats. [Sim.Totals] returns the counters
// exactly as written, so a test can compute what the agents must report
// without trusting the agents.
//
// # Caveats
//
// Rates are integrated with a carried remainder per counter, so over any
// span the written counts equal the rate times the span to within one
// count. Time is whatever the caller passes: the demo compresses a job's
// life into seconds, but rates stay per real second.
package sim

import (
	"bytes"
	"fmt"
	"maps"
	"math"
	"os"
	"path/filepath"
	"slices"
	"time"

	"sluice/pkg/source/lustre"
)

// Behaviour is what a job does on each of its nodes, per second.
type Behaviour struct {
	ReadBytes, ReadSize   float64 // bytes/s read, and bytes per read call
	WriteBytes, WriteSize float64 // bytes/s written, and bytes per write call
	Opens                 float64 // opens/s (each followed by a close)
	Creates, Removes      float64 // creates/s and unlinks/s
	Stats                 float64 // getattr/s
	MetaUpdates           float64 // setattr/s
	Syncs                 float64 // fsync/s
}

// counterRates turns a behaviour into per-second rates of raw llite
// counters ("<name>" sample counts and "<name>.sum" byte sums).
func (b Behaviour) counterRates() map[string]float64 {
	r := map[string]float64{}
	add := func(k string, v float64) {
		if v > 0 {
			r[k] += v
		}
	}
	if b.ReadBytes > 0 && b.ReadSize > 0 {
		add("read_bytes", b.ReadBytes/b.ReadSize)
		add("read_bytes.sum", b.ReadBytes)
	}
	if b.WriteBytes > 0 && b.WriteSize > 0 {
		add("write_bytes", b.WriteBytes/b.WriteSize)
		add("write_bytes.sum", b.WriteBytes)
	}
	add("open", b.Opens)
	add("close", b.Opens)
	add("create", b.Creates)
	add("unlink", b.Removes)
	add("getattr", b.Stats)
	add("setattr", b.MetaUpdates)
	add("fsync", b.Syncs)
	return r
}

// Phase is a behaviour from an offset into the job's life onwards.
type Phase struct {
	After time.Duration
	Behaviour
}

// Job is one simulated batch job.
type Job struct {
	ID, User, Account, Name string
	Nodes                   []string
	// Start and End are offsets from the scenario start.
	Start, End time.Duration
	// Phases must be sorted by After; the first should start at 0.
	Phases []Phase
	// Kind labels what the job is meant to show ("metadata storm", ...).
	Kind string
}

// behaviourAt returns the behaviour at offset into the scenario.
func (j Job) behaviourAt(offset time.Duration) (Behaviour, bool) {
	if offset < j.Start || offset >= j.End {
		return Behaviour{}, false
	}
	var b Behaviour
	for _, p := range j.Phases {
		if offset-j.Start >= p.After {
			b = p.Behaviour
		}
	}
	return b, true
}

// Scenario is a set of nodes and jobs.
type Scenario struct {
	Centre string
	Nodes  []string
	Jobs   []Job
	// Format is the Lustre version layout written; zero means FormatV2_16.
	Format lustre.Format
	// FSName is the simulated filesystem's name; empty means "scratch".
	FSName string
}

// Sim is a running simulation.
type Sim struct {
	sc    Scenario
	root  string
	t0    time.Time
	last  time.Time
	nodes map[string]*node
}

type node struct {
	instance string
	mounted  time.Time
	counts   map[string]float64 // cumulative, fractional
	written  map[string]uint64  // cumulative, as last written
}

// New prepares a simulation writing under root, with the scenario starting
// at t0. It writes every node's initial (empty) stats file.
func New(sc Scenario, root string, t0 time.Time) (*Sim, error) {
	if sc.Format == 0 {
		sc.Format = lustre.FormatV2_16
	}
	if sc.FSName == "" {
		sc.FSName = "scratch"
	}
	s := &Sim{sc: sc, root: root, t0: t0, last: t0, nodes: map[string]*node{}}
	for i, n := range sc.Nodes {
		s.nodes[n] = &node{
			instance: fmt.Sprintf("%s-ffff8f%010x", sc.FSName, 0x1000*(i+1)),
			mounted:  t0.Add(-time.Hour),
			counts:   map[string]float64{},
			written:  map[string]uint64{},
		}
	}
	for _, j := range sc.Jobs {
		for _, n := range j.Nodes {
			if s.nodes[n] == nil {
				return nil, fmt.Errorf("sim: job %s runs on unknown node %q", j.ID, n)
			}
		}
	}
	return s, s.write(t0)
}

// Scenario returns the scenario being simulated.
func (s *Sim) Scenario() Scenario { return s.sc }

// Root is the directory holding the nodes' trees.
func (s *Sim) Root() string { return s.root }

// LliteRoot is the llite directory of one node, the agent's
// --source.lustre.root.
func (s *Sim) LliteRoot(node string) string { return filepath.Join(s.root, node, "llite") }

// Step advances the counters to t (integrating each job's rates over the
// time since the previous step, in steps of at most one second so phase
// changes land on time) and rewrites the files.
func (s *Sim) Step(t time.Time) error {
	for s.last.Before(t) {
		next := s.last.Add(time.Second)
		if next.After(t) {
			next = t
		}
		s.advance(s.last, next)
		s.last = next
	}
	return s.write(t)
}

func (s *Sim) advance(from, to time.Time) {
	dt := to.Sub(from).Seconds()
	mid := from.Add(to.Sub(from) / 2).Sub(s.t0)
	for _, j := range s.sc.Jobs {
		b, ok := j.behaviourAt(mid)
		if !ok {
			continue
		}
		rates := b.counterRates()
		for _, n := range j.Nodes {
			nd := s.nodes[n]
			for k, r := range rates {
				nd.counts[k] += r * dt
			}
		}
	}
}

// write renders every node's stats file; counts are floored so the file
// only ever grows.
func (s *Sim) write(t time.Time) error {
	var buf bytes.Buffer
	for _, name := range s.sc.Nodes {
		nd := s.nodes[name]
		st := lustre.Stats{SnapshotTime: t, StartTime: nd.mounted, HasStartTime: true}
		for k, v := range nd.counts {
			nd.written[k] = uint64(math.Floor(v))
		}
		st.Counters = countersOf(nd.written)
		buf.Reset()
		if err := lustre.Write(&buf, st, s.sc.Format); err != nil {
			return fmt.Errorf("sim: node %s: %w", name, err)
		}
		dir := filepath.Join(s.LliteRoot(name), nd.instance)
		if err := os.MkdirAll(dir, 0o755); err != nil {
			return fmt.Errorf("sim: %w", err)
		}
		if err := writeAtomic(filepath.Join(dir, "stats"), buf.Bytes()); err != nil {
			return fmt.Errorf("sim: node %s: %w", name, err)
		}
	}
	return nil
}

// countersOf builds llite counter lines from raw counts: "<name>" is the
// sample count and "<name>.sum" the byte sum of a bytes counter.
func countersOf(raw map[string]uint64) []lustre.Counter {
	var cs []lustre.Counter
	for _, k := range slices.Sorted(maps.Keys(raw)) {
		if len(k) > 4 && k[len(k)-4:] == ".sum" {
			continue
		}
		c := lustre.Counter{Name: k, Samples: raw[k], Unit: "usecs", Fields: 4}
		if sum, ok := raw[k+".sum"]; ok {
			c.Unit, c.Sum = "bytes", sum
			if c.Samples > 0 {
				c.Min, c.Max = sum/c.Samples, sum/c.Samples
			}
		} else {
			c.Min, c.Max, c.Sum = 1, 1, c.Samples
		}
		cs = append(cs, c)
	}
	return cs
}

func writeAtomic(path string, data []byte) error {
	tmp := path + ".tmp"
	if err := os.WriteFile(tmp, data, 0o644); err != nil {
		return err
	}
	return os.Rename(tmp, path)
}

// Totals returns a node's cumulative raw counters as last written.
func (s *Sim) Totals(node string) map[string]uint64 {
	nd := s.nodes[node]
	if nd == nil {
		return nil
	}
	out := make(map[string]uint64, len(nd.written))
	for k, v := range nd.written {
		out[k] = v
	}
	return out
}
