package jobio_test

import (
	"context"
	"fmt"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/jobio"
)

// The end-to-end scenario runs whole jobs on a node, the real kernel's
// (realHost, Linux, root, a cgroup2 mount) or a fixture tree that behaves
// like it (fakeHost), and checks that every byte and call each job's
// processes did is counted exactly once: by a source that walks the
// cgroup tree at every read, so that a cgroup removed between reads is
// always noticed by a walk, and by one that walks only at its first read
// and at the read after one that found a job gone (RescanEvery too large
// to come round), so that a removal is mostly noticed by the job's own
// listing.

// workerPlan is what one process of a job does: Rounds rounds of I/O
// (Bytes written in Calls writes to a file of its own, then read back in
// Calls reads), Pause apart, forking child i before round i; then it reaps
// its children. A top-level worker (Top), whose parent is the test outside
// the job, waits for the test's word before it starts, says when its
// rounds and children are over, waits for the word again, does one last
// round and reports its own /proc/<pid>/io (Documentation/filesystems/proc.rst)
// as it exits.
type workerPlan struct {
	Bytes, Calls, Rounds int
	Pause                time.Duration
	Children             []workerPlan
	Top                  bool
	Dir                  string // where it writes its file
}

// work returns the rchar, wchar, syscr and syscw the plan's own rounds and
// its descendants' add up to: a floor for what the kernel counts (a real
// process also reads at start-up).
func (p workerPlan) work() [4]uint64 {
	rounds := p.Rounds
	if p.Top {
		rounds++ // the last round
	}
	w := [4]uint64{uint64(p.Bytes * rounds), uint64(p.Bytes * rounds), uint64(p.Calls * rounds), uint64(p.Calls * rounds)}
	for _, c := range p.Children {
		cw := c.work()
		for i := range w {
			w[i] += cw[i]
		}
	}
	return w
}

// ioHost is the node the scenario runs on.
type ioHost interface {
	// options returns the roots the sources read: CgroupRoot and ProcRoot.
	options() jobio.Options
	// makeJob makes the cgroups of job id, job_<id>/step_0 and step_1, and
	// returns the steps relative to the cgroup root.
	makeJob(id string) []string
	// start starts a top-level worker in step, waiting for its first word.
	start(step string, plan workerPlan) hostWorker
	// removeJob removes job id's cgroups; false while a process still
	// holds one (EBUSY).
	removeJob(id string) bool
	// pass lets time pass between reads.
	pass()
}

// hostWorker is a top-level worker as the test, its parent, sees it.
type hostWorker interface {
	release()          // gives it the word
	done() bool        // its rounds and children are over
	report() [7]uint64 // waits for its last round and its report
	reap()             // reaps it (the test is its parent)
}

// scenarioJob is one job of the scenario and how far it has come.
type scenarioJob struct {
	id string
	// removeFirst removes the cgroup as soon as the workers have exited,
	// so that the next read, a walk for one source, finds it gone with
	// the workers' last round still to count; otherwise a read sees the
	// exited workers first, the test reaps them and then removes it.
	removeFirst bool
	plans       []workerPlan
	workers     []hostWorker
	want        [7]uint64 // the sum of the workers' reports
	phase       int
	mark        int // the reads done when the phase began
}

// The phases of a scenarioJob.
const (
	running       = iota
	exited        // reports in; cgroup there; waiting for a read
	zombiesListed // cgroup removed under the zombies; waiting for a read
	removed       // reaped and removed; waiting for two reads
	finished
)

// scenarioJobs returns the jobs of a scenario: jobs that end at different
// times (the last one alone), with children and grandchildren that exit
// and are reaped inside the job, some removed before the read that sees
// their last round. dir is where the workers write.
func scenarioJobs(dir string) []*scenarioJob {
	leaf := workerPlan{Bytes: 24 << 10, Calls: 6, Rounds: 3, Pause: time.Millisecond, Dir: dir}
	mid := workerPlan{Bytes: 8 << 10, Calls: 4, Rounds: 3, Pause: 2 * time.Millisecond, Children: []workerPlan{leaf}, Dir: dir}
	top := func(rounds int, children ...workerPlan) workerPlan {
		return workerPlan{Bytes: 64 << 10, Calls: 16, Rounds: rounds, Pause: 2 * time.Millisecond, Children: children, Top: true, Dir: dir}
	}
	return []*scenarioJob{
		{id: "9101", removeFirst: true, plans: []workerPlan{top(3)}},
		{id: "9102", plans: []workerPlan{top(6, leaf, mid), top(4, leaf)}},
		{id: "9103", removeFirst: true, plans: []workerPlan{top(10, mid, leaf, leaf), top(8, mid)}},
		{id: "9104", removeFirst: true, plans: []workerPlan{top(40, leaf, mid, leaf)}},
	}
}

// scenarioReader reads the sources and keeps each job's last totals.
type scenarioReader struct {
	t     *testing.T
	names []string
	srcs  []*jobio.Source
	reads int
	last  []map[string]map[string]uint64 // per source: job id to its last totals
	now   []map[string]bool              // per source: the jobs of the last read
}

func newScenarioReader(t *testing.T, h ioHost) *scenarioReader {
	r := &scenarioReader{t: t, names: []string{"walk every read", "walk after a job ends"}}
	for _, every := range []int{1, 1 << 20} {
		opts := h.options()
		opts.RescanEvery = every
		src, err := jobio.NewSource(opts, nil)
		require.NoError(t, err)
		t.Cleanup(func() { src.Close() })
		r.srcs = append(r.srcs, src)
		r.last = append(r.last, map[string]map[string]uint64{})
		r.now = append(r.now, map[string]bool{})
	}
	return r
}

// read reads every source once; each reading must be of a job Jobs names,
// which is what the agent lists and attributes the reading to.
func (r *scenarioReader) read() {
	r.t.Helper()
	r.reads++
	for i, src := range r.srcs {
		rs, err := src.Read(context.Background())
		require.NoError(r.t, err, r.names[i])
		listed := src.Jobs()
		clear(r.now[i])
		for _, rd := range rs {
			require.Contains(r.t, listed, rd.Job, "%s: read %d reported job %s, which Jobs does not name", r.names[i], r.reads, rd.Job)
			r.now[i][rd.Job] = true
			r.last[i][rd.Job] = rd.Counters
		}
	}
}

// runScenario runs jobs on h to their end and compares each job's totals,
// from both sources, with what its workers reported.
func runScenario(t *testing.T, h ioHost, jobs []*scenarioJob) {
	r := newScenarioReader(t, h)
	steps := make([][]string, len(jobs))
	for i, j := range jobs {
		steps[i] = h.makeJob(j.id)
	}
	// The first read finds the jobs, still empty, and sets their base.
	// The workers start after it, so that they count from their start
	// (rule 2), and the second read lists every one of them, still
	// waiting for its word, so that none can exit unseen.
	r.read()
	for i, j := range jobs {
		for k, p := range j.plans {
			j.workers = append(j.workers, h.start(steps[i][k%len(steps[i])], p))
		}
	}
	r.read()
	for _, j := range jobs {
		for _, w := range j.workers {
			w.release()
		}
	}
	deadline := time.Now().Add(2 * time.Minute)
	for left := len(jobs); left > 0; {
		r.read()
		left = 0
		for _, j := range jobs {
			advance(t, h, r, j)
			if j.phase != finished {
				left++
			}
		}
		h.pass()
		require.False(t, time.Now().After(deadline), "jobs still running: %s", phases(jobs))
	}
	for _, j := range jobs {
		want := truthOf(j.want)
		for i := range r.srcs {
			require.Equal(t, want, r.last[i][j.id], "job %s, source %q", j.id, r.names[i])
		}
	}
}

// advance moves job j on by what the last read allows.
func advance(t *testing.T, h ioHost, r *scenarioReader, j *scenarioJob) {
	switch j.phase {
	case running:
		for _, w := range j.workers {
			if !w.done() {
				return
			}
		}
		endWorkers(t, j)
		j.phase = exited
		if j.removeFirst {
			removeJob(t, h, j.id)
			j.phase = zombiesListed
		}
	case exited, zombiesListed:
		if r.reads == j.mark {
			return // no read since the workers exited
		}
		for _, w := range j.workers {
			w.reap()
		}
		if j.phase == exited {
			removeJob(t, h, j.id)
		}
		j.phase = removed
	case removed:
		if r.reads < j.mark+2 {
			return
		}
		for i := range r.srcs {
			require.False(t, r.now[i][j.id], "job %s still reported by %q two reads after its removal", j.id, r.names[i])
		}
		j.phase = finished
	}
	j.mark = r.reads
}

// endWorkers gives j's workers the word for their last round and sums
// their reports, checking that each holds at least the plan's I/O.
func endWorkers(t *testing.T, j *scenarioJob) {
	for _, w := range j.workers {
		w.release()
	}
	for i, w := range j.workers {
		v := w.report()
		for k, floor := range j.plans[i].work() {
			require.GreaterOrEqual(t, v[k], floor, "job %s worker %d, counter %d: the plan's I/O is not in its report", j.id, i, k)
		}
		for k := range v {
			j.want[k] += v[k]
		}
	}
}

// removeJob removes job id's cgroups, waiting while the kernel still has
// an exiting process in one.
func removeJob(t *testing.T, h ioHost, id string) {
	for deadline := time.Now().Add(30 * time.Second); !h.removeJob(id); {
		require.False(t, time.Now().After(deadline), "job %s's cgroup stays busy", id)
		time.Sleep(100 * time.Microsecond)
	}
}

func phases(jobs []*scenarioJob) string {
	s := ""
	for _, j := range jobs {
		s += fmt.Sprintf(" %s:%d", j.id, j.phase)
	}
	return s
}
