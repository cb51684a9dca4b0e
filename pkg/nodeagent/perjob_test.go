package nodeagent_test

import (
	"cmp"
	"context"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/metric"
	"sluice/pkg/nodeagent"
	"sluice/pkg/report"
	"sluice/pkg/source"
	"sluice/pkg/source/jobio"
	"sluice/pkg/source/lustre"
)

// jobDir returns job id's cgroup in the shared_node fixture's layout.
func jobDir(tree, id string) string {
	return filepath.Join(tree, "cgroup", "system.slice", "slurmstepd.scope", "job_"+id)
}

// attributed sums what the aggregator gives job over samples: its block
// where the sample has one, else the node's values (pkg/tracker/tracker.go,
// attributions).
func attributed(samples []report.Sample, job string) metric.Values {
	var sum metric.Values
	for _, s := range samples {
		v, ok := s.Values, slices.Contains(s.Jobs, job)
		for _, pj := range s.PerJob {
			if pj.Job == job {
				v, ok = pj.Values, true
			}
		}
		if ok {
			sum.Add(v)
		}
	}
	return sum
}

// TestPerJobValuesNeverDropped runs the agent over the shared_node fixture
// (testdata/jobio/shared_node, laid out after cgroup-v2.rst and proc.rst)
// with the jobio source alone, as on a node whose filesystem client the
// agent does not read: job 81234's rank 2110 reads 4096 bytes in 4 calls,
// and whatever the node's state, the aggregator must be given exactly that.
func TestPerJobValuesNeverDropped(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name     string
		alone    bool // job 81240's cgroup is gone before the first read
		rescan   int  // the source's RescanEvery: 1 walks at every read
		jobsFrom nodeagent.JobsFrom
		removed  bool // 81234's cgroup goes right after its last I/O
	}{
		{name: "two jobs", rescan: 1},
		{name: "a job alone", alone: true, rescan: 1},
		{name: "a job alone, the hooks have no record of it", alone: true, rescan: 1, jobsFrom: nodeagent.JobsFromHooks},
		{name: "cgroup removed right before a walk", rescan: 1, removed: true},
		{name: "cgroup removed between walks", rescan: 100, removed: true},
		{name: "alone, cgroup removed right before a walk", alone: true, rescan: 1, removed: true},
		{name: "alone, cgroup removed between walks", alone: true, rescan: 100, removed: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			tree := t.TempDir()
			require.NoError(t, os.CopyFS(tree, os.DirFS(fixture.Path(t, "jobio", "shared_node"))))
			if tt.alone {
				require.NoError(t, os.RemoveAll(jobDir(tree, "81240")))
			}
			clk := &clock{t: t0}
			jobs, err := jobio.NewSource(jobio.Options{
				CgroupRoot: filepath.Join(tree, "cgroup"), ProcRoot: filepath.Join(tree, "proc"), RescanEvery: tt.rescan,
			}, clk.now)
			require.NoError(t, err)
			a, err := nodeagent.New(nodeagent.Config{
				Node: "bw007", StateDir: t.TempDir(), Now: clk.now,
				JobsFrom: cmp.Or(tt.jobsFrom, nodeagent.JobsFromCgroups), Sources: []source.Source{jobs},
			})
			require.NoError(t, err)
			_, _, err = a.Collect(context.Background())
			require.NoError(t, err)

			bumpProcIO(t, filepath.Join(tree, "proc", "2110", "io"), map[string]uint64{"rchar": 4096, "syscr": 4})
			if tt.removed {
				// The job's processes have exited (zombies, whose io files
				// still read) and the scheduler removes its cgroup.
				require.NoError(t, os.RemoveAll(jobDir(tree, "81234")))
			}
			var samples []report.Sample
			for range 3 {
				clk.add(5 * time.Second)
				s, ok, err := a.Collect(context.Background())
				require.NoError(t, err)
				require.True(t, ok)
				for _, pj := range s.PerJob {
					require.Contains(t, s.Jobs, pj.Job, "a block for a job the sample does not list")
				}
				samples = append(samples, s)
			}
			got := attributed(samples, "81234")
			require.Equal(t, uint64(4096), got[metric.ReadBytes])
			require.Equal(t, uint64(4), got[metric.ReadOps])
			require.Zero(t, attributed(samples, "81240")[metric.ReadBytes], "81240 did no I/O")
			if tt.removed {
				require.NotContains(t, samples[2].Jobs, "81234", "dropped after its last interval")
			}
		})
	}
}

// TestJobAloneKeepsNodeMetricsOfTheFilesystem checks that a job alone on a
// node takes the metrics jobio measures from its own processes and the
// rest (opens) from the filesystem client, as a job sharing a node does.
func TestJobAloneKeepsNodeMetricsOfTheFilesystem(t *testing.T) {
	t.Parallel()
	tree := t.TempDir()
	require.NoError(t, os.CopyFS(tree, os.DirFS(fixture.Path(t, "jobio", "shared_node"))))
	require.NoError(t, os.RemoveAll(jobDir(tree, "81240")))
	lroot := t.TempDir()
	clk := &clock{t: t0}
	writeStats(t, lroot, "scratch-ffff8f0000001000", map[string][2]uint64{"open": {100, 0}, "read_bytes": {10, 10 << 20}})
	jobs, err := jobio.NewSource(jobio.Options{CgroupRoot: filepath.Join(tree, "cgroup"), ProcRoot: filepath.Join(tree, "proc")}, clk.now)
	require.NoError(t, err)
	a, err := nodeagent.New(nodeagent.Config{
		Node: "bw007", StateDir: t.TempDir(), Now: clk.now, JobsFrom: nodeagent.JobsFromCgroups,
		Sources: []source.Source{lustre.NewSource(lroot, clk.now), jobs},
	})
	require.NoError(t, err)
	_, _, err = a.Collect(context.Background())
	require.NoError(t, err)

	clk.add(5 * time.Second)
	writeStats(t, lroot, "scratch-ffff8f0000001000", map[string][2]uint64{"open": {160, 0}, "read_bytes": {20, 30 << 20}})
	bumpProcIO(t, filepath.Join(tree, "proc", "2110", "io"), map[string]uint64{"rchar": 4096, "syscr": 4})
	s, ok, err := a.Collect(context.Background())
	require.NoError(t, err)
	require.True(t, ok)
	require.Equal(t, []string{"81234"}, s.Jobs)
	require.Len(t, s.PerJob, 1)
	v := s.PerJob[0].Values
	require.Equal(t, uint64(4096), v[metric.ReadBytes], "its own processes, not the node's 20 MiB")
	require.Equal(t, uint64(4), v[metric.ReadOps])
	require.Equal(t, uint64(60), v[metric.Opens], "the node's")
}

// TestCheckReportsWhatCollectGives checks agent check's claim about the
// jobio source against what the samples then carry: every metric it lists
// for the source reaches each reported job's block, alone or not.
func TestCheckReportsWhatCollectGives(t *testing.T) {
	t.Parallel()
	for _, alone := range []bool{true, false} {
		t.Run(map[bool]string{true: "a job alone", false: "two jobs"}[alone], func(t *testing.T) {
			t.Parallel()
			tree := t.TempDir()
			require.NoError(t, os.CopyFS(tree, os.DirFS(fixture.Path(t, "jobio", "shared_node"))))
			if alone {
				require.NoError(t, os.RemoveAll(jobDir(tree, "81240")))
			}
			clk := &clock{t: t0}
			jobs, err := jobio.NewSource(jobio.Options{CgroupRoot: filepath.Join(tree, "cgroup"), ProcRoot: filepath.Join(tree, "proc")}, clk.now)
			require.NoError(t, err)
			a, err := nodeagent.New(nodeagent.Config{
				Node: "bw007", StateDir: t.TempDir(), Now: clk.now, JobsFrom: nodeagent.JobsFromCgroups,
				Sources: []source.Source{jobs},
			})
			require.NoError(t, err)
			reports, err := a.Check(context.Background())
			require.NoError(t, err)
			require.Len(t, reports, 1)
			r := reports[0]
			require.True(t, r.PerJob)
			require.Equal(t, []metric.ID{metric.ReadBytes, metric.WriteBytes, metric.ReadOps, metric.WriteOps}, r.Metrics)

			_, _, err = a.Collect(context.Background())
			require.NoError(t, err)
			clk.add(5 * time.Second)
			for _, pid := range []string{"2110", "2210"} {
				bumpProcIO(t, filepath.Join(tree, "proc", pid, "io"), map[string]uint64{"rchar": 1, "wchar": 1, "syscr": 1, "syscw": 1})
			}
			s, _, err := a.Collect(context.Background())
			require.NoError(t, err)
			require.Len(t, s.PerJob, len(r.Instances), "a block per job check reported")
			for _, pj := range s.PerJob {
				for _, id := range r.Metrics {
					require.NotZero(t, pj.Values[id], "job %s, %s", pj.Job, id)
				}
			}
		})
	}
}
