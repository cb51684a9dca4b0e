package jobio_test

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/jobio"
)

// fakeHost runs the scenario's workers as simulated processes in a
// fixture tree (see tree): each pass lets some processes take one step of
// their plan. What the tree shows follows the kernel as its documentation
// describes it: a process's /proc/<pid>/io holds its own I/O plus the
// totals of the children it reaped (kernel/exit.c, wait_task_zombie); an
// exited process is a zombie, gone from cgroup.procs (cgroup-v2.rst) with
// its io file still readable, until its parent reaps it and its /proc
// entry goes; a cgroup holding only zombies can be removed, one with a
// live process cannot.
type fakeHost struct {
	t     *testing.T
	tr    *tree
	rng   *rand.Rand
	procs []*fakeProc // not reaped yet, in fork order
	pid   int         // the last pid handed out
}

// fakeProc is one simulated process.
type fakeProc struct {
	h            *fakeHost
	pid, ppid    int
	start        uint64
	step         string
	plan         workerPlan
	self, reaped [7]uint64
	round, words int
	kids         []*fakeProc
	zombie, fin  bool // exited; a top-level worker's rounds and children are over
	reported     bool
	last         [7]uint64 // its report
}

func newFakeHost(t *testing.T, seed uint64) *fakeHost {
	return &fakeHost{t: t, tr: newTree(t), rng: rand.New(rand.NewPCG(seed, 3)), pid: 4000}
}

func (h *fakeHost) options() jobio.Options {
	return jobio.Options{CgroupRoot: h.tr.cgroup, ProcRoot: h.tr.proc}
}

func (h *fakeHost) makeJob(id string) []string {
	steps := []string{"job_" + id + "/step_0", "job_" + id + "/step_1"}
	for _, s := range steps {
		h.tr.mkdir(s)
	}
	return steps
}

func (h *fakeHost) start(step string, plan workerPlan) hostWorker {
	return h.spawn(1, step, plan) // its parent, the test, is outside the job
}

func (h *fakeHost) removeJob(id string) bool {
	for _, p := range h.procs {
		if !p.zombie && strings.HasPrefix(p.step, "job_"+id+"/") {
			return false
		}
	}
	h.tr.rmdir("job_" + id)
	return true
}

// pass moves the clock on by 10 to 30 ms and lets each live process take
// a step with even odds, so that reads fall anywhere in the processes'
// lives.
func (h *fakeHost) pass() {
	h.tr.advance(uint64(1 + h.rng.IntN(3)))
	for _, p := range slices.Clone(h.procs) {
		if !p.zombie && h.rng.IntN(2) == 0 {
			p.step1()
		}
	}
}

// spawn forks a process of plan in step; it starts now, at zero.
func (h *fakeHost) spawn(ppid int, step string, plan workerPlan) *fakeProc {
	h.pid++
	p := &fakeProc{h: h, pid: h.pid, ppid: ppid, start: h.tr.ticks, step: step, plan: plan}
	h.procs = append(h.procs, p)
	h.tr.spawn(p.pid, ppid, p.start, p.value())
	h.writeProcs(step)
	return p
}

// writeProcs rewrites step's cgroup.procs: its live processes.
func (h *fakeHost) writeProcs(step string) {
	var pids []int
	for _, p := range h.procs {
		if p.step == step && !p.zombie {
			pids = append(pids, p.pid)
		}
	}
	h.tr.setProcs(step, pids...)
}

// forget takes a reaped process out of procfs.
func (h *fakeHost) forget(p *fakeProc) {
	h.tr.reap(p.pid)
	h.procs = slices.DeleteFunc(h.procs, func(q *fakeProc) bool { return q == p })
}

// step1 is one step of p's plan: a round (forking a child first, if the
// plan has one for this round), then reaping exited children, then, for a
// child, exiting; a top-level worker is then done, and after the second
// word does its last round, reports and exits.
func (p *fakeProc) step1() {
	switch {
	case p.plan.Top && p.words == 0:
	case p.round < p.plan.Rounds:
		if p.round < len(p.plan.Children) {
			p.kids = append(p.kids, p.h.spawn(p.pid, p.step, p.plan.Children[p.round]))
		}
		p.io()
		p.round++
	case len(p.kids) > 0:
		p.kids = slices.DeleteFunc(p.kids, func(k *fakeProc) bool {
			if k.zombie {
				p.reapKid(k)
			}
			return k.zombie
		})
	case !p.plan.Top:
		p.exit()
	case !p.fin:
		p.fin = true
	case p.words >= 2:
		p.io()
		p.last, p.reported = p.self, true
		for i := range p.last {
			p.last[i] += p.reaped[i]
		}
		p.exit()
	}
}

// io is one round: Bytes written in Calls calls and read back; the
// written pages are dirtied, so write_bytes grows too.
func (p *fakeProc) io() {
	b, c := uint64(p.plan.Bytes), uint64(p.plan.Calls)
	for i, d := range [7]uint64{b, b, c, c, 0, b, 0} {
		p.self[i] += d
	}
	p.h.tr.setIO(p.pid, p.value())
}

func (p *fakeProc) exit() {
	p.zombie = true
	p.h.writeProcs(p.step)
}

// reapKid reaps zombie child k: its totals join p's.
func (p *fakeProc) reapKid(k *fakeProc) {
	v := k.value()
	for i, x := range [7]uint64{v.RChar, v.WChar, v.SyscR, v.SyscW, v.ReadBytes, v.WriteBytes, v.CancelledWriteBytes} {
		p.reaped[i] += x
	}
	p.h.tr.setIO(p.pid, p.value())
	p.h.forget(k)
}

// value is what /proc/<pid>/io shows.
func (p *fakeProc) value() jobio.ProcIO {
	var v [7]uint64
	for i := range v {
		v[i] = p.self[i] + p.reaped[i]
	}
	return jobio.ProcIO{RChar: v[0], WChar: v[1], SyscR: v[2], SyscW: v[3], ReadBytes: v[4], WriteBytes: v[5], CancelledWriteBytes: v[6]}
}

func (p *fakeProc) release() { p.words++ }

func (p *fakeProc) done() bool { return p.fin }

func (p *fakeProc) report() [7]uint64 {
	for !p.reported {
		p.h.pass()
	}
	return p.last
}

func (p *fakeProc) reap() { p.h.forget(p) }

// TestFixtureEveryByteCountedOnce runs the end-to-end scenario on a fixture
// tree, whatever the machine allows, with the processes' steps and the
// reads interleaved differently for each seed: every byte and call each
// job did must be counted once, by both sources.
func TestFixtureEveryByteCountedOnce(t *testing.T) {
	t.Parallel()
	for seed := range uint64(20) {
		t.Run(fmt.Sprint("seed ", seed), func(t *testing.T) {
			t.Parallel()
			h := newFakeHost(t, seed)
			jobs := scenarioJobs("")
			runScenario(t, h, jobs)
			for _, j := range jobs {
				var floor [4]uint64
				for _, p := range j.plans {
					for i, w := range p.work() {
						floor[i] += w
					}
				}
				// The simulated processes do nothing but their plans.
				require.Equal(t, floor, [4]uint64{j.want[0], j.want[1], j.want[2], j.want[3]}, "job %s", j.id)
			}
		})
	}
}
