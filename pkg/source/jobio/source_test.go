package jobio_test

import (
	"context"
	"io/fs"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source"
	"sluice/pkg/source/jobio"
)

var _ source.Source = (*jobio.Source)(nil)

// copyTree copies directory src into dst, creating dst.
func copyTree(t testing.TB, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(src, path)
		if err != nil {
			return err
		}
		to := filepath.Join(dst, rel)
		if d.IsDir() {
			return os.MkdirAll(to, 0o755)
		}
		b, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		return os.WriteFile(to, b, 0o644) // in place if it exists: same inode
	})
	require.NoError(t, err)
}

func TestSharedNode(t *testing.T) {
	t.Parallel()
	// testdata/jobio/shared_node: two jobs on one node; see its README.
	node := fixture.Path(t, "jobio", "shared_node")
	dir := t.TempDir()
	copyTree(t, filepath.Join(node, "cgroup"), filepath.Join(dir, "cgroup"))
	copyTree(t, filepath.Join(node, "proc"), filepath.Join(dir, "proc"))
	src, err := jobio.NewSource(jobio.Options{CgroupRoot: filepath.Join(dir, "cgroup"), ProcRoot: filepath.Join(dir, "proc")}, nowFunc)
	require.NoError(t, err)
	t.Cleanup(func() { src.Close() })
	require.Equal(t, "jobio", src.Name())
	require.Nil(t, src.Jobs())

	got, err := src.Read(context.Background())
	require.NoError(t, err, "2212 exited before it was read: skipped silently")
	require.Equal(t, []string{"81234", "81240"}, src.Jobs())
	zero := make(map[string]uint64)
	for _, n := range jobio.CounterNames() {
		zero[n] = 0
	}
	require.Equal(t, []source.Reading{
		{Key: "jobio:81234", Job: "81234", Time: fixedNow, Counters: zero},
		{Key: "jobio:81240", Job: "81240", Time: fixedNow, Counters: zero},
	}, got)

	// Five seconds later (next/ written over the copy in place).
	copyTree(t, filepath.Join(node, "next"), dir)
	got, err = src.Read(context.Background())
	require.NoError(t, err)
	want := []source.Reading{
		{
			Key: "jobio:81234", Job: "81234", Time: fixedNow,
			Counters: map[string]uint64{
				// Growth of 2001, 2010, 2011, 2100, 2110 and 2111, plus all
				// of 2112, started at 8640200 after the read at 8640000:
				// rchar 1000+100000+10485760+500+268435456+134217728+4096.
				"proc.rchar": 413244540,
				// 500+10000+1048576+200+134217728+67108864+512
				"proc.wchar": 202386380,
				// 10+50+2560+5+65536+32768+2
				"proc.syscr": 100931,
				// 5+20+256+2+32768+16384+1
				"proc.syscw": 49436,
				// 262144+10485760+268435456+134217728
				"proc.read_bytes": 413401088,
				// 1048576+134217728+67108864
				"proc.write_bytes":           202375168,
				"proc.cancelled_write_bytes": 0,
				// io.stat summed over 8:0, 259:0 and the bare 253:1:
				// rbytes 1384120320-1115684864 = 268435456 (+0)
				"iostat.rbytes": 268435456,
				// (737198080-602980352) + 8192 = 134217728+8192
				"iostat.wbytes": 134225920,
				// 10562-8514
				"iostat.rios": 2048,
				// (5625-4601) + 2
				"iostat.wios":   1026,
				"iostat.dbytes": 4096,
				"iostat.dios":   1,
			},
		},
		{
			Key: "jobio:81240", Job: "81240", Time: fixedNow,
			Counters: map[string]uint64{
				// 2200 idle; 2210 and 2211 ("py ) (x y"):
				// rchar 10485760+8192, wchar 4096+4096, syscr 2560+4,
				// syscw 1+2, write_bytes 4096+4096, cancelled 4096.
				"proc.rchar": 10493952, "proc.wchar": 8192, "proc.syscr": 2564, "proc.syscw": 3,
				"proc.read_bytes": 0, "proc.write_bytes": 8192, "proc.cancelled_write_bytes": 4096,
				// 259:0 wbytes 16384-4096, wios 3-1; 8:0 is bare.
				"iostat.rbytes": 0, "iostat.wbytes": 12288, "iostat.rios": 0, "iostat.wios": 2,
				"iostat.dbytes": 0, "iostat.dios": 0,
			},
		},
	}
	require.Equal(t, want, got)
}

func TestDiscovery(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		dirs    []string // cgroup directories to create
		opts    jobio.Options
		want    []string
		wantErr bool
	}{
		{
			name: "slurm layout, steps and tasks below the job",
			dirs: []string{"system.slice/slurmstepd.scope/job_81234/step_0/user/task_0", "system.slice/slurmstepd.scope/system"},
			want: []string{"81234"},
		},
		{
			name: "job<id> without underscore, at the top",
			dirs: []string{"job12", "job_013"},
			want: []string{"013", "12"},
		},
		{
			name: "not jobs",
			dirs: []string{"jobs.slice/x", "system.slice/job_abc", "a/myjob_5", "a/job_5x", "a/job_", "user.slice/user-1000.slice/session-3.scope"},
		},
		{
			name: "a job nested in a job belongs to the outer one",
			dirs: []string{"job_5/step_0/job_6"},
			want: []string{"5"},
		},
		{
			name: "depth 6 found, depth 7 not",
			dirs: []string{"a/b/c/d/e/job_6", "a/b/c/d/e/f/job_7"},
			want: []string{"6"},
		},
		{
			name: "MaxDepth 7 finds depth 7",
			dirs: []string{"a/b/c/d/e/job_6", "a/b/c/d/e/f/job_7"},
			opts: jobio.Options{MaxDepth: 7},
			want: []string{"6", "7"},
		},
		{
			name: "MaxDepth 1",
			dirs: []string{"job_1", "a/job_2"},
			opts: jobio.Options{MaxDepth: 1},
			want: []string{"1"},
		},
		{
			// A PBS-like layout, "<service>/jobid/<id>.<server>", from memory.
			name: "custom pattern",
			dirs: []string{"pbs_jobs.service/jobid/4242.pbs01", "pbs_jobs.service/jobid/x.pbs01", "job_1"},
			opts: jobio.Options{JobPattern: `(?:^|/)jobid/(\d+)\.[^/]+$`},
			want: []string{"4242"},
		},
		{
			name: "an empty capture is not a job",
			dirs: []string{"job_", "job_3"},
			opts: jobio.Options{JobPattern: `(?:^|/)job_(\d*)$`},
			want: []string{"3"},
		},
		{
			name: "no directories",
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			tr := newTree(t)
			for _, d := range tt.dirs {
				tr.mkdir(d)
			}
			src := tr.source(tt.opts)
			got, err := src.Read(context.Background())
			if tt.wantErr {
				require.Error(t, err)
				return
			}
			require.NoError(t, err)
			require.Len(t, got, len(tt.want))
			require.Equal(t, tt.want, src.Jobs())
		})
	}
}

func TestDiscoveryTopMostDirectoryPerID(t *testing.T) {
	t.Parallel()
	tr := newTree(t)
	// Job 5 matches at depth 1 and again at depth 3 in another branch; the
	// shallower one is the job's cgroup and the other is ignored.
	tr.mkdir("job_5/step_0")
	tr.mkdir("a/b/job_5")
	tr.spawn(11, 1, 50000, rchar(100))
	tr.spawn(12, 1, 50000, rchar(100))
	tr.setProcs("job_5/step_0", 11)
	tr.setProcs("a/b/job_5", 12)
	src := tr.source(jobio.Options{})
	read(t, src)
	tr.setIO(11, rchar(110))
	tr.setIO(12, rchar(200))
	require.Equal(t, uint64(10), total(t, src, "5", "proc.rchar"))
}

func TestJobProcessesAreTheWholeSubtree(t *testing.T) {
	t.Parallel()
	tr := newTree(t)
	job := "system.slice/slurmstepd.scope/job_9"
	// Processes in the job directory itself, in a step, in a task two
	// levels deeper, and one seven levels below the job (MaxDepth 6: not
	// read). 21 is listed twice (it moved between the reads of two files).
	tr.mkdir(job + "/step_0/user/task_0")
	tr.mkdir(job + "/a/b/c/d/e/f/g")
	for pid := 20; pid <= 24; pid++ {
		tr.spawn(pid, 1, 50000, rchar(1000))
	}
	tr.setProcs(job, 20)
	tr.setProcs(job+"/step_0", 21)
	tr.setProcs(job+"/step_0/user/task_0", 21, 22)
	tr.setProcs(job+"/a/b/c/d/e/f", 23)
	tr.setProcs(job+"/a/b/c/d/e/f/g", 24)
	src := tr.source(jobio.Options{RescanEvery: 100})
	read(t, src)
	for pid := 20; pid <= 24; pid++ {
		tr.setIO(pid, rchar(1001))
	}
	// 20, 21 (once), 22 and 23 (depth 6 below the job): 4.
	require.Equal(t, uint64(4), total(t, src, "9", "proc.rchar"))

	// A new step appears between walks (RescanEvery 100): its processes
	// are seen at the next read, and one started since the last read counts
	// in full.
	tr.mkdir(job + "/step_1/user/task_0")
	tr.spawn(30, 1, tr.ticks+1, rchar(70))
	tr.setProcs(job+"/step_1/user/task_0", 30)
	tr.advance(500)
	require.Equal(t, uint64(74), total(t, src, "9", "proc.rchar"))

	// The step is removed: its process is gone (reaped outside the job).
	tr.reap(30)
	tr.rmdir(job + "/step_1")
	require.Equal(t, uint64(74), total(t, src, "9", "proc.rchar"))
}

func TestJobsChangeOnlyAtWalks(t *testing.T) {
	t.Parallel()
	tr := newTree(t)
	tr.mkdir("job_1")
	src := tr.source(jobio.Options{RescanEvery: 3})
	read(t, src) // walk
	require.Equal(t, []string{"1"}, src.Jobs())
	tr.mkdir("job_2")
	require.Len(t, read(t, src), 1)
	require.Len(t, read(t, src), 1)
	require.Equal(t, []string{"1"}, src.Jobs())
	require.Len(t, read(t, src), 2, "the fourth read walks again")
	require.Equal(t, []string{"1", "2"}, src.Jobs())
	jobs := src.Jobs()
	jobs[0] = "x"
	require.Equal(t, []string{"1", "2"}, src.Jobs(), "Jobs returns a copy")
}

func TestNoJobsIsNotAnError(t *testing.T) {
	t.Parallel()
	tr := newTree(t)
	tr.mkdir("system.slice/sshd.service")
	got, err := tr.source(jobio.Options{}).Read(context.Background())
	require.NoError(t, err)
	require.Empty(t, got)
}

func TestMissingCgroupRoot(t *testing.T) {
	t.Parallel()
	tr := newTree(t)
	root := filepath.Join(t.TempDir(), "cgroup")
	src, err := jobio.NewSource(jobio.Options{CgroupRoot: root, ProcRoot: tr.proc}, nil)
	require.NoError(t, err)
	_, err = src.Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData)
	require.ErrorContains(t, err, root)

	// It appears (cgroupfs mounted later): read again.
	require.NoError(t, os.MkdirAll(filepath.Join(root, "job_3"), 0o755))
	got, err := src.Read(context.Background())
	require.NoError(t, err)
	require.Len(t, got, 1)
	require.False(t, got[0].Time.IsZero(), "nil now means time.Now")

	// And goes again: the job is reported once more, and the walk that
	// follows finds no root and forgets the jobs.
	require.NoError(t, os.RemoveAll(root))
	got, err = src.Read(context.Background())
	require.NoError(t, err)
	require.Len(t, got, 1)
	_, err = src.Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData)
	require.Empty(t, src.Jobs())
}

func TestCgroupRootNotADirectory(t *testing.T) {
	t.Parallel()
	root := filepath.Join(t.TempDir(), "cgroup")
	require.NoError(t, os.WriteFile(root, nil, 0o644))
	src, err := jobio.NewSource(jobio.Options{CgroupRoot: root}, nil)
	require.NoError(t, err)
	_, err = src.Read(context.Background())
	require.Error(t, err)
	require.NotErrorIs(t, err, source.ErrNoData)
}

func TestNewSourceOptions(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   jobio.Options
		wantErr string
	}{
		{name: "zero value: defaults", input: jobio.Options{}},
		{name: "bad pattern", input: jobio.Options{JobPattern: `job_(\d+`}, wantErr: "JobPattern"},
		{name: "pattern without a group", input: jobio.Options{JobPattern: `job_\d+`}, wantErr: "capture group"},
		{name: "negative MaxDepth", input: jobio.Options{MaxDepth: -1}, wantErr: "MaxDepth"},
		{name: "negative RescanEvery", input: jobio.Options{RescanEvery: -2}, wantErr: "RescanEvery"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			src, err := jobio.NewSource(tt.input, nil)
			if tt.wantErr != "" {
				require.ErrorContains(t, err, tt.wantErr)
				require.Nil(t, src)
				return
			}
			require.NoError(t, err)
			require.NotNil(t, src)
		})
	}
}

func TestReadErrors(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(41, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 41)
	src := tr.source(jobio.Options{})

	// A process whose io cannot be read (here a directory: EISDIR) is an
	// error, returned with the readings.
	require.NoError(t, os.MkdirAll(filepath.Join(tr.proc, "42", "io"), 0o755))
	tr.write(filepath.Join(tr.proc, "42", "stat"), statLine(42, "x", 'S', 1, 50000))
	tr.setProcs(stepDir, 41, 42)
	got, err := src.Read(context.Background())
	require.Error(t, err)
	require.ErrorContains(t, err, "job 7")
	require.Len(t, got, 1)

	// Without /proc/uptime, new processes only set a base, and Read says so.
	tr.setProcs(stepDir, 41)
	require.NoError(t, os.Remove(filepath.Join(tr.proc, "uptime")))
	tr.spawn(43, 41, 100001, rchar(500))
	tr.setProcs(stepDir, 41, 43)
	got, err = src.Read(context.Background())
	require.ErrorContains(t, err, "uptime")
	require.Zero(t, got[0].Counters["proc.rchar"])
}

func TestReadCanceled(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	src := tr.source(jobio.Options{})
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	_, err := src.Read(ctx)
	require.ErrorIs(t, err, context.Canceled)
}

func TestCloseStartsAfresh(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(51, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 51)
	src := tr.source(jobio.Options{})
	read(t, src)
	tr.setIO(51, rchar(1100))
	require.Equal(t, uint64(100), total(t, src, "7", "proc.rchar"))
	require.NoError(t, src.Close())
	require.Nil(t, src.Jobs())
	require.Zero(t, total(t, src, "7", "proc.rchar"), "a new base after Close")
}

func TestMalformedCounted(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(61, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 61)
	// Two bad lines in cgroup.procs and the io_stat/malformed fixture (7).
	tr.write(filepath.Join(tr.cgroup, stepDir, "cgroup.procs"), "61\nx\n-3\n")
	tr.setIOStat(jobDir, string(fixture.Read(t, "jobio", "io_stat", "malformed")))
	r := read(t, tr.source(jobio.Options{}))["7"]
	require.Equal(t, 9, r.Malformed)
}
