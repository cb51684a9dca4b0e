package jobio_test

import (
	"fmt"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/jobio"
)

// The tests below use a RescanEvery far above their number of reads, so
// that only the link-count check and the kept descriptors can show a
// change between walks.

func TestNewStepCgroupSeenAtNextRead(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.mkdir(stepDir + "/user/task_0")
	tr.spawn(101, 1, 50000, rchar(1000))
	tr.setProcs(stepDir+"/user/task_0", 101)
	src := tr.source(jobio.Options{RescanEvery: 1000})
	read(t, src)

	// A new step with a task cgroup, whose process started since the last
	// read: counted in full at the next read.
	tr.mkdir(jobDir + "/step_1/user/task_0")
	tr.spawn(102, 1, tr.ticks+1, rchar(30))
	tr.setProcs(jobDir+"/step_1/user/task_0", 102)
	tr.advance(500)
	require.Equal(t, uint64(30), total(t, src, "7", "proc.rchar"))

	// A new task cgroup deep in an existing step (only its parent's link
	// count changes), likewise.
	tr.mkdir(stepDir + "/user/task_1")
	tr.spawn(103, 1, tr.ticks+1, rchar(7))
	tr.setProcs(stepDir+"/user/task_1", 103)
	tr.setIO(102, rchar(40))
	tr.advance(500)
	require.Equal(t, uint64(47), total(t, src, "7", "proc.rchar"))

	// The cached listing is re-read: growth in every cgroup counts.
	tr.setIO(101, rchar(1001))
	tr.setIO(102, rchar(41))
	tr.setIO(103, rchar(8))
	require.Equal(t, uint64(50), total(t, src, "7", "proc.rchar"))
	require.Equal(t, []string{"7"}, src.Jobs())
}

func TestRemovedStepCgroupNoticedAtNextRead(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name string
		step string // the cgroup that goes
		dir  string // the cgroup holding the process, step or below it
	}{
		{name: "step with a task below", step: jobDir + "/step_1", dir: jobDir + "/step_1/user/task_0"},
		// At MaxDepth (6) below the job no directory descriptor is kept:
		// only the parent's link count shows the removal.
		{name: "leaf at MaxDepth", step: jobDir + "/a/b/c/d/e/f", dir: jobDir + "/a/b/c/d/e/f"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			tr := newJobTree(t)
			tr.mkdir(tt.dir)
			tr.spawn(201, 1, 50000, rchar(1000))
			tr.spawn(202, 1, 50000, rchar(500))
			tr.setProcs(stepDir, 201)
			tr.setProcs(tt.dir, 202)
			src := tr.source(jobio.Options{RescanEvery: 1000})
			read(t, src)

			// The step goes; 202 was moved out of the job, still alive, and
			// reads 100 more. A kept descriptor of the removed cgroup.procs
			// would still list it; the removal is noticed, so 202 departed:
			// its growth until now counts once, then it is frozen.
			tr.setIO(202, rchar(600))
			tr.rmdir(tt.step)
			require.Equal(t, uint64(100), total(t, src, "7", "proc.rchar"))
			tr.setIO(202, rchar(650))
			tr.setIO(201, rchar(1001))
			require.Equal(t, uint64(101), total(t, src, "7", "proc.rchar"))
		})
	}
}

func TestReplacedStepCgroupNoticedAtNextRead(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.mkdir(jobDir + "/step_1")
	tr.spawn(301, 1, 50000, rchar(1000))
	tr.setProcs(jobDir+"/step_1", 301)
	src := tr.source(jobio.Options{RescanEvery: 1000})
	read(t, src)

	// step_1 is removed and made again between two reads: the same
	// names and link counts, new directories. 301 was reaped; 302, started
	// since the last read, is in the new step_1.
	tr.reap(301)
	tr.rmdir(jobDir + "/step_1")
	tr.mkdir(jobDir + "/step_1")
	tr.spawn(302, 1, tr.ticks+1, rchar(25))
	tr.setProcs(jobDir+"/step_1", 302)
	tr.advance(500)
	require.Equal(t, uint64(25), total(t, src, "7", "proc.rchar"))
	tr.setIO(302, rchar(30))
	require.Equal(t, uint64(30), total(t, src, "7", "proc.rchar"))
}

func TestLongCgroupProcsReadWhole(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	// 900 pids (over 5 KiB) of processes that have exited, then one that
	// runs: the file is read past its first read and its first page.
	var b strings.Builder
	for pid := 10000; pid < 10900; pid++ {
		fmt.Fprintf(&b, "%d\n", pid)
	}
	b.WriteString("401\n")
	tr.spawn(401, 1, 50000, rchar(1000))
	tr.write(tr.cgroup+"/"+stepDir+"/cgroup.procs", b.String())
	for _, rescan := range []int{1, 1000} {
		src := tr.source(jobio.Options{RescanEvery: rescan})
		read(t, src)
		tr.setIO(401, rchar(1000+uint64(rescan)))
		require.Equal(t, uint64(rescan), total(t, src, "7", "proc.rchar"), "RescanEvery %d", rescan)
		tr.setIO(401, rchar(1000))
	}
}
