package jobio_test

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/jobio"
)

// nodeSim drives several jobs on one fake node through their whole lives,
// as a scheduler and the kernel would (cgroup-v2.rst, proc.rst, and
// kernel/exit.c for what a reap adds to the parent): a job's cgroup
// appears and the source finds it; its shell starts, forked by the step
// daemon outside the job; processes fork, do I/O, exit and are reaped by
// their parents inside the job; the shell exits last, the scheduler
// removes the cgroup and the step daemon reaps the shell, once a read has
// seen it as a zombie (before that its last part is the documented loss).
// Removal, reads and walks come in every order.
type nodeSim struct {
	t     *testing.T
	tr    *tree
	rng   *rand.Rand
	src   *jobio.Source
	jobs  []*nodeJob
	procs map[int]*simProc
	jobOf map[int]*nodeJob
	free  []int
	next  int // the next job id
	reads int
}

// nodeJob is one job of a nodeSim.
type nodeJob struct {
	id, dir string
	steps   []string
	seen    bool // reported by a read: its shell may start
	shell   *simProc
	alive   bool              // a read has listed its shell: it may exit
	truth   [7]uint64         // I/O since its first reading
	last    map[string]uint64 // its totals at its last reading
	exited  bool              // its shell has exited
	read    bool              // a read has come since the shell exited
	removed bool              // its cgroup has gone
	after   int               // reads since the removal
}

func newNodeSim(t *testing.T, seed uint64) *nodeSim {
	rng := rand.New(rand.NewPCG(seed, 7))
	s := &nodeSim{t: t, tr: newTree(t), rng: rng, procs: map[int]*simProc{}, jobOf: map[int]*nodeJob{}, next: 300}
	for pid := 1001; pid < 1031; pid++ {
		s.free = append(s.free, pid)
	}
	// From a walk at every read to one every seven.
	s.src = s.tr.source(jobio.Options{RescanEvery: 1 + rng.IntN(7)})
	return s
}

// step applies one random event and says what it was.
func (s *nodeSim) step() string {
	s.tr.advance(uint64(1 + s.rng.IntN(3)))
	switch n := s.rng.IntN(100); {
	case n < 6:
		return s.newJob()
	case n < 14:
		return s.startShell()
	case n < 40:
		return s.io()
	case n < 52:
		return s.fork()
	case n < 62:
		return s.exitLeaf()
	case n < 72:
		return s.reapInside()
	case n < 76:
		return s.endJob()
	case n < 82:
		return s.removeJob()
	case n < 88:
		return s.reapShell()
	default:
		s.read()
		return "read"
	}
}

func (s *nodeSim) newJob() string {
	if len(s.active()) >= 3 {
		return "new job: node full"
	}
	j := &nodeJob{id: fmt.Sprint(s.next), dir: fmt.Sprintf("system.slice/slurmstepd.scope/job_%d", s.next)}
	s.next++
	j.steps = []string{j.dir + "/step_0", j.dir + "/step_1"}
	for _, d := range j.steps {
		s.tr.mkdir(d)
	}
	s.jobs = append(s.jobs, j)
	return "new job " + j.id
}

func (s *nodeSim) startShell() string {
	j := s.pickJob(func(j *nodeJob) bool { return j.seen && j.shell == nil && !j.removed })
	if j == nil || len(s.free) == 0 {
		return "shell: none"
	}
	j.shell = s.spawn(j, 1, j.steps[0])
	return fmt.Sprintf("shell %d of %s", j.shell.pid, j.id)
}

func (s *nodeSim) io() string {
	p := s.pickProc(func(p *simProc) bool { return !p.zombie })
	if p == nil {
		return "io: none"
	}
	j := s.jobOf[p.pid]
	for i := range p.self {
		d := uint64(s.rng.IntN(1 << 16))
		p.self[i] += d
		j.truth[i] += d
	}
	s.tr.setIO(p.pid, p.value())
	return fmt.Sprintf("io %d", p.pid)
}

func (s *nodeSim) fork() string {
	p := s.pickProc(func(p *simProc) bool { return !p.zombie })
	if p == nil || len(s.free) == 0 {
		return "fork: none"
	}
	j := s.jobOf[p.pid]
	c := s.spawn(j, p.pid, j.steps[s.rng.IntN(len(j.steps))])
	return fmt.Sprintf("fork %d -> %d", p.pid, c.pid)
}

// exitLeaf has a process other than a shell, without children, exit.
func (s *nodeSim) exitLeaf() string {
	p := s.pickProc(func(p *simProc) bool { return !p.zombie && p.ppid != 1 && !s.hasChildren(p) })
	if p == nil {
		return "exit: none"
	}
	p.zombie = true
	s.writeProcs()
	return fmt.Sprintf("exit %d", p.pid)
}

// reapInside has a parent inside the job reap a zombie child.
func (s *nodeSim) reapInside() string {
	z := s.pickProc(func(p *simProc) bool { return p.zombie && p.ppid != 1 })
	if z == nil {
		return "reap: none"
	}
	parent := s.procs[z.ppid]
	v := z.value()
	for i, x := range [7]uint64{v.RChar, v.WChar, v.SyscR, v.SyscW, v.ReadBytes, v.WriteBytes, v.CancelledWriteBytes} {
		parent.reaped[i] += x
	}
	s.tr.setIO(parent.pid, parent.value())
	s.forget(z)
	return fmt.Sprintf("reap %d by %d", z.pid, parent.pid)
}

// endJob has a job's shell exit once it is the job's last process, and
// once a read has listed it: a process whose parent is outside the job and
// that no read saw is the documented loss.
func (s *nodeSim) endJob() string {
	j := s.pickJob(func(j *nodeJob) bool { return j.alive && !j.exited && !s.hasChildren(j.shell) })
	if j == nil {
		return "end: none"
	}
	j.shell.zombie, j.exited = true, true
	s.writeProcs()
	return "end " + j.id
}

// removeJob removes the cgroup of a job whose processes have all exited:
// a cgroup with only zombies can be removed (cgroup-v2.rst).
func (s *nodeSim) removeJob() string {
	j := s.pickJob(func(j *nodeJob) bool { return !j.removed && (j.exited || j.seen && j.shell == nil) })
	if j == nil {
		return "remove: none"
	}
	s.tr.rmdir(j.dir)
	j.removed = true
	return "remove " + j.id
}

// reapShell has the step daemon reap a shell that a read saw exited.
func (s *nodeSim) reapShell() string {
	j := s.pickJob(func(j *nodeJob) bool { return j.exited && j.read && s.procs[j.shell.pid] == j.shell })
	if j == nil {
		return "reap shell: none"
	}
	s.forget(j.shell)
	return "reap shell of " + j.id
}

// spawn forks a new process of job j in cgroup dir.
func (s *nodeSim) spawn(j *nodeJob, ppid int, dir string) *simProc {
	i := s.rng.IntN(len(s.free))
	pid := s.free[i]
	s.free = slices.Delete(s.free, i, i+1)
	p := &simProc{pid: pid, ppid: ppid, start: s.tr.ticks, dir: dir}
	s.procs[pid], s.jobOf[pid] = p, j
	s.tr.spawn(pid, ppid, p.start, p.value())
	s.writeProcs()
	return p
}

// forget removes a reaped process from procfs; its pid is free again.
func (s *nodeSim) forget(p *simProc) {
	delete(s.procs, p.pid)
	delete(s.jobOf, p.pid)
	s.tr.reap(p.pid)
	s.free = append(s.free, p.pid)
}

// writeProcs rewrites the cgroup.procs of every cgroup still there: live
// processes only, as a zombie is not listed.
func (s *nodeSim) writeProcs() {
	for _, j := range s.jobs {
		if j.removed {
			continue
		}
		for _, d := range j.steps {
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
}

func (s *nodeSim) hasChildren(p *simProc) bool {
	for _, c := range s.procs {
		if c.ppid == p.pid {
			return true
		}
	}
	return false
}

// active returns the jobs whose cgroup is still there.
func (s *nodeSim) active() []*nodeJob {
	var out []*nodeJob
	for _, j := range s.jobs {
		if !j.removed {
			out = append(out, j)
		}
	}
	return out
}

func (s *nodeSim) pickJob(ok func(*nodeJob) bool) *nodeJob {
	var c []*nodeJob
	for _, j := range s.jobs {
		if ok(j) {
			c = append(c, j)
		}
	}
	if len(c) == 0 {
		return nil
	}
	return c[s.rng.IntN(len(c))]
}

func (s *nodeSim) pickProc(ok func(*simProc) bool) *simProc {
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

// read reads the source and checks each reading: its job is one Jobs
// names, no total went down or exceeds the job's I/O, a job whose cgroup
// is there is reported, and a removed one is reported at most once.
func (s *nodeSim) read() {
	s.t.Helper()
	s.reads++
	got := read(s.t, s.src)
	listed := s.src.Jobs()
	for id := range got {
		require.Contains(s.t, listed, id, "read %d reported job %s, which Jobs does not name", s.reads, id)
	}
	for _, j := range s.jobs {
		r, ok := got[j.id]
		if j.removed {
			j.after++
			require.False(s.t, ok && j.after > 1, "job %s reported %d reads after its removal", j.id, j.after)
		} else if j.seen {
			require.True(s.t, ok, "job %s, reported before, missing at read %d", j.id, s.reads)
		}
		if j.exited {
			j.read = true
		}
		if j.shell != nil && !j.removed {
			j.alive = true
		}
		if !ok {
			continue
		}
		j.seen = true
		truth := truthOf(j.truth)
		for name, v := range r.Counters {
			require.GreaterOrEqual(s.t, v, j.last[name], "job %s: %s went down at read %d", j.id, name, s.reads)
			require.LessOrEqual(s.t, v, truth[name], "job %s: %s above the I/O done, at read %d", j.id, name, s.reads)
		}
		j.last = r.Counters
	}
}

// truthOf returns v by counter name; the iostat counters stay zero.
func truthOf(v [7]uint64) map[string]uint64 {
	m := make(map[string]uint64)
	for i, n := range jobio.CounterNames() {
		if i < len(v) {
			m[n] = v[i]
		} else {
			m[n] = 0
		}
	}
	return m
}

// finish ends every job: its processes exit, leaves first, and are reaped
// inside the job; its shell exits; its cgroup goes; a read sees the shell,
// which is then reaped; two more reads drop the jobs.
func (s *nodeSim) finish() {
	for s.pickJob(func(j *nodeJob) bool { return !j.seen && !j.removed }) != nil {
		s.read() // a walk finds every job within RescanEvery reads
	}
	for s.pickProc(func(p *simProc) bool { return p.ppid != 1 }) != nil {
		s.exitLeaf()
		s.reapInside()
	}
	s.read() // lists every shell
	for s.endJob() != "end: none" {
	}
	for s.removeJob() != "remove: none" {
	}
	s.read()
	for s.reapShell() != "reap shell: none" {
	}
	s.read()
	s.read()
}

func TestPropertyEveryJobCountedToItsEnd(t *testing.T) {
	t.Parallel()
	// Whatever the order of forks, exits, reaps inside the job, a job's
	// end, its cgroup's removal and reads that walk or not, every job's
	// last totals are its I/O exactly, and every reading is of a job that
	// Jobs names (what the agent attributes a sample to).
	for seed := range uint64(25) {
		s := newNodeSim(t, seed)
		var log []string
		for range 400 {
			log = append(log, s.step())
		}
		s.finish()
		for _, j := range s.jobs {
			if j.seen {
				require.Equal(t, truthOf(j.truth), j.last, "seed %d, job %s, events %v", seed, j.id, log)
			}
		}
	}
}
