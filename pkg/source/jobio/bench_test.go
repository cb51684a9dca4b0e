package jobio_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"sluice/pkg/source/jobio"
)

// benchTree builds 2 jobs of 20 processes each, 10 in each of two task
// cgroups of step_0, with realistic values; it returns the tree and the
// paths of the 40 io files.
func benchTree(b *testing.B) (*tree, []string) {
	tr := newTree(b)
	var paths []string
	for j, id := range []string{"81234", "81240"} {
		job := "system.slice/slurmstepd.scope/job_" + id
		for task := range 2 {
			dir := fmt.Sprintf("%s/step_0/user/task_%d", job, task)
			tr.mkdir(dir)
			var pids []int
			for i := range 10 {
				pid := 10000 + 1000*j + 100*task + i
				tr.spawn(pid, 1, 50000, jobio.ProcIO{RChar: 1073741824 + uint64(i), WChar: 536870912, SyscR: 262144,
					SyscW: 131072, ReadBytes: 1006632960, WriteBytes: 536870912, CancelledWriteBytes: 8192})
				pids = append(pids, pid)
				paths = append(paths, filepath.Join(tr.proc, strconv.Itoa(pid), "io"))
			}
			tr.setProcs(dir, pids...)
		}
		tr.setIOStat(job, "8:0 rbytes=1115684864 wbytes=602980352 rios=8514 wios=4601 dbytes=0 dios=0\n259:0 rbytes=65536 wbytes=0 rios=16 wios=0 dbytes=0 dios=0\n")
	}
	return tr, paths
}

// BenchmarkSourceRead2Jobs20Procs is one agent interval in steady state:
// 2 jobs x 20 processes, every io file re-read through its kept
// descriptor, each job's cgroup subtree listed and its cgroup.procs and
// io.stat read, and the tree walked every 12th read (the default).
func BenchmarkSourceRead2Jobs20Procs(b *testing.B) {
	tr, _ := benchTree(b)
	src, err := jobio.NewSource(jobio.Options{CgroupRoot: tr.cgroup, ProcRoot: tr.proc}, nowFunc)
	if err != nil {
		b.Fatal(err)
	}
	defer src.Close()
	ctx := context.Background()
	if rs, err := src.Read(ctx); err != nil || len(rs) != 2 {
		b.Fatal(err, len(rs))
	}
	b.ReportAllocs()
	for b.Loop() {
		rs, err := src.Read(ctx)
		if err != nil || len(rs) != 2 {
			b.Fatal(err, len(rs))
		}
	}
}

// BenchmarkPreadBare2Jobs20Procs is the floor for the benchmark above:
// only the 40 preads of the same io files on open descriptors, no parsing.
func BenchmarkPreadBare2Jobs20Procs(b *testing.B) {
	_, paths := benchTree(b)
	files := make([]*os.File, len(paths))
	for i, p := range paths {
		f, err := os.Open(p)
		if err != nil {
			b.Fatal(err)
		}
		defer f.Close()
		files[i] = f
	}
	buf := make([]byte, 1024)
	b.ReportAllocs()
	for b.Loop() {
		for _, f := range files {
			if n, err := preadBare(f, buf); err != nil || n == 0 {
				b.Fatal(err, n)
			}
		}
	}
}
