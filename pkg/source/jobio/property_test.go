package jobio_test

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/jobio"
)

// simProc is one process of the simulated job, with the kernel's
// accounting: its /proc/<pid>/io shows its own I/O plus the totals of the
// children it reaped (kernel/exit.c, wait_task_zombie).
type simProc struct {
	pid, ppid int // ppid 1 is outside the job
	start     uint64
	self      [7]uint64
	reaped    [7]uint64
	zombie    bool
	dir       string
}

// value is what /proc/<pid>/io shows.
func (p *simProc) value() jobio.ProcIO {
	var v [7]uint64
	for i := range v {
		v[i] = p.self[i] + p.reaped[i]
	}
	return jobio.ProcIO{RChar: v[0], WChar: v[1], SyscR: v[2], SyscW: v[3], ReadBytes: v[4], WriteBytes: v[5], CancelledWriteBytes: v[6]}
}

// sim drives a fake tree through random process events and checks the
// Source's readings after each read.
type sim struct {
	t     *testing.T
	tr    *tree
	rng   *rand.Rand
	src   *jobio.Source
	procs map[int]*simProc
	free  []int
	dirs  []string
	leaky bool // allow events whose I/O cannot all be seen
	truth [7]uint64
	last  map[string]uint64
	reads int
	// lastRead is the uptime of the last read, in ticks.
	lastRead uint64
}

const simJob = "system.slice/slurmstepd.scope/job_42"

// newSim returns a job with a root process (pid 100, never exits) and two
// children, already read once (the base).
func newSim(t *testing.T, seed uint64, leaky bool) *sim {
	s := &sim{
		t: t, tr: newTree(t), rng: rand.New(rand.NewPCG(seed, 99)),
		procs: make(map[int]*simProc), leaky: leaky,
		dirs: []string{simJob, simJob + "/step_0/user/task_0", simJob + "/step_0/user/task_1", simJob + "/step_batch"},
	}
	for _, d := range s.dirs {
		s.tr.mkdir(d)
	}
	for pid := 101; pid < 116; pid++ { // a small pool, so pids are reused
		s.free = append(s.free, pid)
	}
	s.add(&simProc{pid: 100, ppid: 1, start: 500, self: [7]uint64{5000, 4000, 30, 20, 4096, 8192, 0}, dir: s.dirs[3]})
	for range 2 {
		s.add(&simProc{pid: s.takePid(), ppid: 100, start: 600, self: [7]uint64{100, 100, 1, 1, 0, 0, 0}, dir: s.dirs[1]})
	}
	s.src = s.tr.source(jobio.Options{RescanEvery: 5})
	s.read()
	s.truth = [7]uint64{} // the first read is the base
	return s
}

func (s *sim) takePid() int {
	i := s.rng.IntN(len(s.free))
	pid := s.free[i]
	s.free = slices.Delete(s.free, i, i+1)
	return pid
}

func (s *sim) add(p *simProc) {
	s.procs[p.pid] = p
	s.tr.spawn(p.pid, p.ppid, p.start, p.value())
	s.writeProcs()
}

// writeProcs rewrites every cgroup.procs: live processes only (a zombie
// does not appear in cgroup.procs, cgroup-v2.rst).
func (s *sim) writeProcs() {
	for _, d := range s.dirs {
		var pids []int
		for _, p := range s.procs {
			if p.dir == d && !p.zombie {
				pids = append(pids, p.pid)
			}
		}
		slices.Sort(pids)
		s.tr.setProcs(d, pids...)
	}
}

// pick returns a random process for which ok holds, or nil.
func (s *sim) pick(ok func(*simProc) bool) *simProc {
	var c []*simProc
	for _, p := range s.procs {
		if ok(p) {
			c = append(c, p)
		}
	}
	if len(c) == 0 {
		return nil
	}
	slices.SortFunc(c, func(a, b *simProc) int { return a.pid - b.pid })
	return c[s.rng.IntN(len(c))]
}

func (s *sim) live(p *simProc) bool { return !p.zombie }

func (s *sim) hasChildren(p *simProc) bool {
	for _, c := range s.procs {
		if c.ppid == p.pid {
			return true
		}
	}
	return false
}

// step applies one random event.
func (s *sim) step() string {
	s.tr.advance(uint64(1 + s.rng.IntN(3)))
	switch n := s.rng.IntN(100); {
	case n < 30: // I/O by a live process
		p := s.pick(s.live)
		for i := range p.self {
			d := uint64(s.rng.IntN(1 << 16))
			p.self[i] += d
			s.truth[i] += d
		}
		s.tr.setIO(p.pid, p.value())
		return fmt.Sprintf("io %d", p.pid)
	case n < 45: // fork
		if len(s.free) == 0 {
			return "fork: no pid"
		}
		parent := s.pick(s.live)
		c := &simProc{pid: s.takePid(), ppid: parent.pid, start: s.tr.ticks, dir: parent.dir}
		s.add(c)
		return fmt.Sprintf("fork %d -> %d", parent.pid, c.pid)
	case n < 57: // exit: becomes a zombie
		p := s.pick(func(p *simProc) bool {
			return !p.zombie && p.pid != 100 && (s.leaky || !s.hasChildren(p))
		})
		if p == nil {
			return "exit: none"
		}
		p.zombie = true
		for _, c := range s.procs { // orphans go to init, outside the job
			if c.ppid == p.pid {
				c.ppid = 1
				s.tr.setPPID(c.pid, 1, c.start)
			}
		}
		s.writeProcs()
		return fmt.Sprintf("exit %d", p.pid)
	case n < 72: // reap
		z := s.pick(func(p *simProc) bool { return p.zombie })
		if z == nil {
			return "reap: none"
		}
		s.reap(z)
		return fmt.Sprintf("reap %d by %d", z.pid, z.ppid)
	case n < 78: // migrate within the job
		p := s.pick(s.live)
		p.dir = s.dirs[s.rng.IntN(len(s.dirs))]
		s.writeProcs()
		return fmt.Sprintf("migrate %d", p.pid)
	case n < 82 && s.leaky: // a process with history moved into the job
		if len(s.free) == 0 {
			return "move in: no pid"
		}
		// It started before the last read: one that started since then
		// is taken for a new process and counted in full (a caveat).
		p := &simProc{pid: s.takePid(), ppid: 1, start: s.lastRead - 1 - uint64(s.rng.IntN(1000)), dir: s.dirs[1]}
		for i := range p.self {
			p.self[i] = uint64(s.rng.IntN(1 << 20))
		}
		s.add(p)
		return fmt.Sprintf("move in %d", p.pid)
	default:
		s.read()
		return "read"
	}
}

// reapAll reaps every zombie, children before parents.
func (s *sim) reapAll() {
	for {
		z := s.pick(func(p *simProc) bool { return p.zombie && !s.hasChildren(p) })
		if z == nil {
			return
		}
		s.reap(z)
	}
}

// reap has z's parent reap it: the parent's io grows by z's totals
// (wait_task_zombie), unless the parent is init, outside the job.
func (s *sim) reap(z *simProc) {
	if parent := s.procs[z.ppid]; parent != nil {
		v := z.value()
		for i, x := range [7]uint64{v.RChar, v.WChar, v.SyscR, v.SyscW, v.ReadBytes, v.WriteBytes, v.CancelledWriteBytes} {
			parent.reaped[i] += x
		}
		s.tr.setIO(parent.pid, parent.value())
	}
	delete(s.procs, z.pid)
	s.tr.reap(z.pid)
	s.free = append(s.free, z.pid)
}

// read reads the source and checks that no total went down and none
// exceeds the true I/O since the first read.
func (s *sim) read() map[string]uint64 {
	s.t.Helper()
	s.reads++
	s.lastRead = s.tr.ticks
	got := read(s.t, s.src)["42"].Counters
	require.Len(s.t, got, 13)
	truth := s.truthMap()
	for name, v := range got {
		require.GreaterOrEqual(s.t, v, s.last[name], "%s went down at read %d", name, s.reads)
		require.LessOrEqual(s.t, v, truth[name], "%s counted more than was done, at read %d", name, s.reads)
	}
	s.last = got
	return got
}

// truthMap returns the true I/O since the first read by counter name.
func (s *sim) truthMap() map[string]uint64 {
	m := make(map[string]uint64)
	for i, n := range jobio.CounterNames() {
		if i < 7 {
			m[n] = s.truth[i]
		} else {
			m[n] = 0
		}
	}
	return m
}

func TestPropertyReapedInsideJobCountsExactlyOnce(t *testing.T) {
	t.Parallel()
	// Every exited process is reaped by its parent inside the job (a
	// process exits only after its children, and the run ends with every
	// zombie reaped): the job's total must equal
	// the true I/O since the first read, counted once, whatever the order
	// of forks, exits, zombies, reaps, pid reuse, moves between the job's
	// cgroups and reads.
	for seed := range uint64(25) {
		s := newSim(t, seed, false)
		var log []string
		for range 300 {
			log = append(log, s.step())
		}
		// A process that forked, did I/O and exited since the last read is
		// invisible until its parent reaps it: end with every zombie reaped.
		s.reapAll()
		got := s.read()
		require.Equal(t, s.truthMap(), got, "seed %d, events %v", seed, log)
	}
}

func TestPropertyNeverOverCounts(t *testing.T) {
	t.Parallel()
	// With processes reaped outside the job, orphans handed to init and
	// processes moved in with history, some I/O cannot be seen; the totals
	// must still never go down and never exceed the true I/O.
	for seed := range uint64(25) {
		s := newSim(t, 1000+seed, true)
		var log []string
		for range 300 {
			log = append(log, s.step())
		}
		got := s.read()
		for name, want := range s.truthMap() {
			require.LessOrEqual(t, got[name], want, "%s, seed %d, events %v", name, seed, log)
		}
	}
}
