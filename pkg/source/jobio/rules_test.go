package jobio_test

import (
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/jobio"
)

// The rule tests put one job, "7", in a Slurm-like layout; the start times
// of processes that exist before the first read are below its uptime,
// 100000 ticks (1000.00 s).
const (
	jobDir  = "system.slice/slurmstepd.scope/job_7"
	stepDir = jobDir + "/step_0"
)

// newJobTree returns a tree with job 7's directories.
func newJobTree(t *testing.T) *tree {
	tr := newTree(t)
	tr.mkdir(stepDir)
	return tr
}

func TestRuleGrowthOfProcessesReadTwice(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(101, 1, 50000, jobio.ProcIO{RChar: 1000, WChar: 10, SyscR: 5, SyscW: 1, ReadBytes: 4096, WriteBytes: 8192, CancelledWriteBytes: 4096})
	tr.spawn(102, 101, 60000, rchar(500))
	tr.setProcs(stepDir, 101, 102)
	src := tr.source(jobio.Options{})

	// The first read of a job only sets the base: every counter is there,
	// at zero.
	r := read(t, src)["7"]
	require.Equal(t, "jobio:7", r.Key)
	require.Empty(t, r.Epoch)
	require.Equal(t, fixedNow, r.Time)
	require.Len(t, r.Counters, 13)
	for _, name := range jobio.CounterNames() {
		require.Contains(t, r.Counters, name)
		require.Zero(t, r.Counters[name], name)
	}

	tr.setIO(101, jobio.ProcIO{RChar: 1300, WChar: 40, SyscR: 8, SyscW: 2, ReadBytes: 8192, WriteBytes: 8192, CancelledWriteBytes: 8192})
	tr.setIO(102, rchar(800))
	tr.advance(500)
	r = read(t, src)["7"]
	// rchar: (1300-1000) + (800-500) = 600; the rest from 101 alone.
	require.Equal(t, map[string]uint64{
		"proc.rchar": 600, "proc.wchar": 30, "proc.syscr": 3, "proc.syscw": 1,
		"proc.read_bytes": 4096, "proc.write_bytes": 0, "proc.cancelled_write_bytes": 4096,
		"iostat.rbytes": 0, "iostat.wbytes": 0, "iostat.rios": 0, "iostat.wios": 0,
		"iostat.dbytes": 0, "iostat.dios": 0,
	}, r.Counters)
}

func TestRuleNewProcessCountsFullyIfStartedSinceLastRead(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(101, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 101)
	src := tr.source(jobio.Options{})
	require.Zero(t, total(t, src, "7", "proc.rchar")) // read 1 at uptime 100000

	// 103 was forked after read 1 (start 100050 >= 100000): a new process
	// starts at zero, so all of its 700 is the job's. 104 started long
	// before (start 20000) and was moved into the cgroup with 5000 of
	// history: it only sets a base.
	tr.spawn(103, 101, 100050, rchar(700))
	tr.spawn(104, 1, 20000, rchar(5000))
	tr.setProcs(stepDir, 101, 103, 104)
	tr.advance(500) // read 2 at 100500
	require.Equal(t, uint64(700), total(t, src, "7", "proc.rchar"))

	// Both grow: 103 by 50, 104 by 100. 105 started exactly at read 2's
	// uptime (100500): "at or after" counts it, 30.
	tr.setIO(103, rchar(750))
	tr.setIO(104, rchar(5100))
	tr.spawn(105, 101, 100500, rchar(30))
	tr.setProcs(stepDir, 101, 103, 104, 105)
	tr.advance(500)
	// 700 + 50 + 100 + 30 = 880
	require.Equal(t, uint64(880), total(t, src, "7", "proc.rchar"))
}

func TestRuleNewJobSetsBase(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(101, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 101)
	src := tr.source(jobio.Options{})
	read(t, src)

	// Job 8 appears after read 1 with a process started since then: the
	// first reading of a job is a base (the agent's delta.Differ takes it
	// as one anyway), so its 400 is not counted.
	job8 := "system.slice/slurmstepd.scope/job_8/step_0"
	tr.mkdir(job8)
	tr.spawn(201, 1, 100100, rchar(400))
	tr.setProcs(job8, 201)
	tr.advance(500)
	require.Zero(t, total(t, src, "8", "proc.rchar"))
	tr.setIO(201, rchar(450))
	tr.advance(500)
	require.Equal(t, uint64(50), total(t, src, "8", "proc.rchar"))
}

func TestRuleReapedChildCountsOnce(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(201, 1, 50000, rchar(1000))
	tr.spawn(202, 201, 60000, rchar(300))
	tr.setProcs(stepDir, 201, 202)
	src := tr.source(jobio.Options{})
	read(t, src) // base: 201 at 1000, 202 at 300

	// 202 reads 50 more (350, never seen), exits, and 201 reaps it: the
	// kernel adds 350 to 201, which also read 20 itself: 1000+20+350 = 1370.
	tr.reap(202)
	tr.setIO(201, rchar(1370))
	tr.setProcs(stepDir, 201)
	// 201 grew 370; minus 202's last read 300: 70 = 20 (201) + 50 (202).
	require.Equal(t, uint64(70), total(t, src, "7", "proc.rchar"))

	tr.setIO(201, rchar(1380))
	require.Equal(t, uint64(80), total(t, src, "7", "proc.rchar"))
}

func TestRuleZombieReadAcrossReads(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(201, 1, 50000, rchar(1000))
	tr.spawn(202, 201, 60000, rchar(300))
	tr.setProcs(stepDir, 201, 202)
	src := tr.source(jobio.Options{})
	read(t, src)

	// 202 exits at 350 but is not reaped yet: a zombie leaves cgroup.procs
	// and its io file still reads. Its last 50 counts, with 201's own 20.
	tr.setIO(202, rchar(350))
	tr.setProcs(stepDir, 201)
	tr.setIO(201, rchar(1020))
	require.Equal(t, uint64(70), total(t, src, "7", "proc.rchar"))

	// Nothing new while it stays a zombie.
	require.Equal(t, uint64(70), total(t, src, "7", "proc.rchar"))

	// 201 reaps it: 1020+350 = 1370. The growth of 350 is all 202's, which
	// was counted already: debt 350 pays it.
	tr.reap(202)
	tr.setIO(201, rchar(1370))
	require.Equal(t, uint64(70), total(t, src, "7", "proc.rchar"))

	tr.setIO(201, rchar(1380))
	require.Equal(t, uint64(80), total(t, src, "7", "proc.rchar"))
}

func TestRuleDebtCarriesOverWhenTheReapShowsLate(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(201, 1, 50000, rchar(1000))
	tr.spawn(202, 201, 60000, rchar(300))
	tr.setProcs(stepDir, 201, 202)
	src := tr.source(jobio.Options{})
	read(t, src)

	// 202 is reaped, but 201's io was read just before the reap, so it
	// does not show 202's 350 yet, only its own 20. Debt 300 takes the 20
	// (clamped at zero) and 280 is left.
	tr.reap(202)
	tr.setIO(201, rchar(1020))
	tr.setProcs(stepDir, 201)
	require.Zero(t, total(t, src, "7", "proc.rchar"))

	// Now 201 shows the reap and 5 more of its own: 1020+350+5 = 1375,
	// growth 355, minus the 280 left: 75 = 25 (201) + 50 (202's unseen).
	tr.setIO(201, rchar(1375))
	require.Equal(t, uint64(75), total(t, src, "7", "proc.rchar"))
}

func TestRuleReapedChainHandsDebtToGrandparent(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(301, 1, 50000, rchar(1000))  // G
	tr.spawn(302, 301, 51000, rchar(400)) // P
	tr.spawn(303, 302, 52000, rchar(100)) // C
	tr.setProcs(stepDir, 301, 302, 303)
	src := tr.source(jobio.Options{})
	read(t, src)

	// Within one interval: C reads 30 more and is reaped by P (400+10+130 =
	// 540), then P is reaped by G (1000+5+540 = 1545).
	tr.reap(303)
	tr.reap(302)
	tr.setIO(301, rchar(1545))
	tr.setProcs(stepDir, 301)
	// G grew 545; debt: P's 400 and C's 100 (C's parent P went at the same
	// read, so C's debt goes on to G): 45 = 5 (G) + 10 (P) + 30 (C).
	require.Equal(t, uint64(45), total(t, src, "7", "proc.rchar"))
}

func TestRulePidReuseIsANewProcess(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(401, 1, 50000, rchar(1000))
	tr.spawn(402, 401, 60000, rchar(300))
	tr.setProcs(stepDir, 401, 402)
	src := tr.source(jobio.Options{})
	read(t, src) // uptime 100000

	// 402 reads 20 more, is reaped by 401 (1000+320 = 1320), and 401 forks
	// a new process that gets pid 402 again, started at 100100, with 40.
	tr.reap(402)
	tr.setIO(401, rchar(1320))
	tr.spawn(402, 401, 100100, rchar(40))
	tr.setProcs(stepDir, 401, 402)
	tr.advance(200)
	// 401: 320 - old 402's 300 = 20; new 402 started since the last read:
	// 40. Total 60. (Taking it for the old process would count 401's 320
	// in full and lose the new one: 320.)
	require.Equal(t, uint64(60), total(t, src, "7", "proc.rchar"))

	// The new 402 is keyed apart and its parent is 401: it reads 5 more
	// (65) and 401 reaps it (1320+45 = 1365): 401's 45 is all debt.
	tr.setIO(402, rchar(45))
	require.Equal(t, uint64(65), total(t, src, "7", "proc.rchar"))
	tr.reap(402)
	tr.setIO(401, rchar(1365))
	tr.setProcs(stepDir, 401)
	require.Equal(t, uint64(65), total(t, src, "7", "proc.rchar"))
}

func TestRuleCounterGoingDownSetsNewBase(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(501, 1, 50000, jobio.ProcIO{RChar: 1000, WChar: 100})
	tr.setProcs(stepDir, 501)
	src := tr.source(jobio.Options{})
	read(t, src)

	// rchar goes down to 900 (a new base, never a negative), wchar grows 50.
	tr.setIO(501, jobio.ProcIO{RChar: 900, WChar: 150})
	r := read(t, src)["7"]
	require.Zero(t, r.Counters["proc.rchar"])
	require.Equal(t, uint64(50), r.Counters["proc.wchar"])

	// Growth from the new base counts: 950-900 = 50.
	tr.setIO(501, jobio.ProcIO{RChar: 950, WChar: 150})
	require.Equal(t, uint64(50), total(t, src, "7", "proc.rchar"))
}

func TestRuleIOStatGrowthAndRebase(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.setProcs(stepDir)
	src := tr.source(jobio.Options{})
	iostat := func() map[string]uint64 {
		t.Helper()
		c := read(t, src)["7"].Counters
		return map[string]uint64{"rbytes": c["iostat.rbytes"], "wbytes": c["iostat.wbytes"],
			"rios": c["iostat.rios"], "wios": c["iostat.wios"], "dbytes": c["iostat.dbytes"], "dios": c["iostat.dios"]}
	}
	zero := map[string]uint64{"rbytes": 0, "wbytes": 0, "rios": 0, "wios": 0, "dbytes": 0, "dios": 0}

	// First read: a base, even though the job cgroup has done I/O.
	tr.setIOStat(jobDir, "8:0 rbytes=1000 wbytes=2000 rios=10 wios=20 dbytes=0 dios=0\n253:0 \n")
	require.Equal(t, zero, iostat())

	// Growth summed over devices, extra keys ignored: rbytes 500+100,
	// wbytes 600, rios 5+1, wios 6, dbytes 4096, dios 1.
	tr.setIOStat(jobDir, "8:0 rbytes=1500 wbytes=2600 rios=15 wios=26 dbytes=4096 dios=1 use_delay=0 delay_nsec=0\n"+
		"253:0 rbytes=100 wbytes=0 rios=1 wios=0 dbytes=0 dios=0\n")
	want := map[string]uint64{"rbytes": 600, "wbytes": 600, "rios": 6, "wios": 6, "dbytes": 4096, "dios": 1}
	require.Equal(t, want, iostat())

	// The cgroup was recreated: the sum went down, a new base.
	tr.setIOStat(jobDir, "8:0 rbytes=50 wbytes=0 rios=1 wios=0 dbytes=0 dios=0\n")
	require.Equal(t, want, iostat())
	tr.setIOStat(jobDir, "8:0 rbytes=80 wbytes=0 rios=2 wios=0 dbytes=0 dios=0\n")
	want["rbytes"], want["rios"] = 630, 7
	require.Equal(t, want, iostat())

	// No io.stat (io controller disabled): nothing added; when it comes
	// back its first values are a new base again.
	require.NoError(t, removeFile(tr, jobDir+"/io.stat"))
	require.Equal(t, want, iostat())
	tr.setIOStat(jobDir, "8:0 rbytes=5000 wbytes=0 rios=9 wios=0 dbytes=0 dios=0\n")
	require.Equal(t, want, iostat())
	tr.setIOStat(jobDir, "8:0 rbytes=5001 wbytes=0 rios=9 wios=0 dbytes=0 dios=0\n")
	want["rbytes"] = 631
	require.Equal(t, want, iostat())
}

func TestRuleJobRemovedIsReportedOnceMore(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(601, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 601)
	src := tr.source(jobio.Options{})
	read(t, src)
	tr.setIO(601, rchar(1100))
	require.Equal(t, uint64(100), total(t, src, "7", "proc.rchar"))
	require.Equal(t, []string{"7"}, src.Jobs())

	// The job ends: 601 reads 50 more and exits (a zombie, its parent is
	// the step daemon outside the job), and the scheduler removes the
	// cgroup. The job is reported once more, with the zombie's last 50, and
	// is still listed as running: its last interval is in that reading.
	tr.setIO(601, rchar(1150))
	tr.rmdir(jobDir)
	got := read(t, src)
	require.Contains(t, got, "7")
	require.Equal(t, uint64(150), got["7"].Counters["proc.rchar"])
	require.Equal(t, []string{"7"}, src.Jobs(), "the job of the last reading")

	// Then it is dropped.
	require.Empty(t, read(t, src))
	require.Empty(t, src.Jobs())
}

// TestRuleJobRemovedKeepsItsLastInterval removes a job's cgroup at the
// moments the source can notice it: right before a walk (the walk no
// longer finds it), between walks (its own listing fails), and right
// before a walk that comes early because another job ended at the read
// before. In each the read that notices it must report the job's last
// interval and Jobs must name the job, and the read after must drop it.
func TestRuleJobRemovedKeepsItsLastInterval(t *testing.T) {
	t.Parallel()
	const job8 = "system.slice/slurmstepd.scope/job_8"
	tests := []struct {
		name        string
		rescanEvery int
		// before runs after the base read and returns how many reads to do
		// before job 7's removal; it may end job 8 meanwhile.
		before func(tr *tree) int
		// reaped says 601's last 50 reach the reading through its parent
		// 600, which reaped it inside the job, not as a zombie.
		reaped bool
	}{
		{name: "right before a walk", rescanEvery: 1},
		{name: "between walks", rescanEvery: 100},
		{name: "right before a walk, child reaped inside the job", rescanEvery: 1, reaped: true},
		{name: "between walks, child reaped inside the job", rescanEvery: 100, reaped: true},
		{name: "right before the walk another job's end brings", rescanEvery: 100, before: func(tr *tree) int {
			tr.rmdir(job8) // noticed by its listing; the next read walks
			return 1
		}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			tr := newJobTree(t)
			tr.mkdir(job8 + "/step_0")
			tr.spawn(600, 1, 50000, rchar(5000)) // 7's shell; its parent is outside the job
			tr.spawn(601, 600, 60000, rchar(1000))
			tr.setProcs(stepDir, 600, 601)
			src := tr.source(jobio.Options{RescanEvery: tt.rescanEvery})
			require.Equal(t, []string{"7", "8"}, mapKeys(read(t, src)))
			tr.setIO(601, rchar(1100))
			require.Equal(t, uint64(100), total(t, src, "7", "proc.rchar"))
			if tt.before != nil {
				for range tt.before(tr) {
					read(t, src)
				}
			}

			// 601 reads 50 more and exits. Either 600 reaps it, reading 5
			// itself (5000+5+1150), and exits, or 601 stays a zombie beside
			// 600; both are zombies then, and the cgroup goes.
			tr.setIO(601, rchar(1150))
			if tt.reaped {
				tr.reap(601)
				tr.setIO(600, rchar(6155))
			}
			tr.setProcs(stepDir)
			tr.rmdir(jobDir)
			got := read(t, src)
			require.Contains(t, got, "7", "reported once more")
			want := uint64(150)
			if tt.reaped {
				want = 155
			}
			require.Equal(t, want, got["7"].Counters["proc.rchar"], "its last interval")
			require.Contains(t, src.Jobs(), "7", "listed with its last reading")

			got = read(t, src)
			require.NotContains(t, got, "7")
			require.NotContains(t, src.Jobs(), "7")
		})
	}
}

func TestRuleJobWithoutWalkNoticesRemovalAtOnce(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(601, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 601)
	src := tr.source(jobio.Options{RescanEvery: 100})
	read(t, src)
	tr.rmdir(jobDir)
	tr.mkdir("system.slice/slurmstepd.scope/job_8")
	require.Contains(t, read(t, src), "7", "reported once more")
	require.Equal(t, []string{"7"}, src.Jobs(), "job 8 waits for the next walk")
	// A job that ended makes the next read walk again.
	got := read(t, src)
	require.NotContains(t, got, "7")
	require.Contains(t, got, "8")
	require.Equal(t, []string{"8"}, src.Jobs())
}

func TestRuleProcessGoneBeforeReadIsSkipped(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(701, 1, 50000, rchar(1000))
	// 702 is listed but has no /proc entry; 703 has io but no stat; 704's
	// io was reaped (empty) after the listing.
	tr.spawn(703, 1, 50000, rchar(5))
	require.NoError(t, removeProcFile(tr, 703, "stat"))
	tr.spawn(704, 1, 50000, rchar(5))
	tr.reap(704)
	tr.setProcs(stepDir, 701, 702, 703, 704)
	src := tr.source(jobio.Options{})
	read(t, src) // no error
	tr.setIO(701, rchar(1010))
	require.Equal(t, uint64(10), total(t, src, "7", "proc.rchar"))
}

func TestRuleOrphanIsReparented(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(801, 1, 10000, rchar(1000)) // R, a subreaper inside the job
	tr.spawn(802, 801, 20000, rchar(200))
	tr.spawn(803, 802, 30000, rchar(100))
	tr.setProcs(stepDir, 801, 802, 803)
	src := tr.source(jobio.Options{})
	read(t, src)

	// 802 reads 10 more and exits; the kernel reparents 803 to 801, which
	// reaps 802: 1000+210 = 1210. Growth 210 - 802's 200 = 10.
	tr.reap(802)
	tr.setPPID(803, 801, 30000)
	tr.setIO(801, rchar(1210))
	tr.setProcs(stepDir, 801, 803)
	require.Equal(t, uint64(10), total(t, src, "7", "proc.rchar"))

	// 803 reads 50 more and is reaped by its new parent: 1210+150 = 1360.
	// Its debt of 100 goes to 801, so the growth of 150 counts 50. (Left
	// with 802 as its parent, the debt would be lost and 801's 150 counted
	// in full: 160.)
	tr.reap(803)
	tr.setIO(801, rchar(1360))
	tr.setProcs(stepDir, 801)
	require.Equal(t, uint64(60), total(t, src, "7", "proc.rchar"))
}

func TestRuleMovedOutThenBackIn(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(901, 1, 50000, rchar(1000))
	tr.spawn(902, 1, 50000, rchar(500))
	tr.setProcs(stepDir, 901, 902)
	src := tr.source(jobio.Options{})
	read(t, src)

	// 902 is moved out of the job and reads 100 before the next read;
	// 901 reads 10. 902's growth until the read still counts: 110.
	tr.setIO(902, rchar(600))
	tr.setIO(901, rchar(1010))
	tr.setProcs(stepDir, 901)
	require.Equal(t, uint64(110), total(t, src, "7", "proc.rchar"))

	// Outside the job it reads 300 more: frozen, not counted.
	tr.setIO(902, rchar(900))
	require.Equal(t, uint64(110), total(t, src, "7", "proc.rchar"))

	// Moved back in at 950: a new base. Then 10 more counts.
	tr.setIO(902, rchar(950))
	tr.setProcs(stepDir, 901, 902)
	require.Equal(t, uint64(110), total(t, src, "7", "proc.rchar"))
	tr.setIO(902, rchar(960))
	require.Equal(t, uint64(120), total(t, src, "7", "proc.rchar"))
}

func TestRuleMalformedIOFileKeepsLastValues(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(1001, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 1001)
	src := tr.source(jobio.Options{})
	read(t, src)

	// A garbled file (a key missing) is not taken as zeros, which would
	// rebase and then count the whole value again: it is skipped.
	tr.write(tr.proc+"/1001/io", "rchar: 1100\nwchar 7\n")
	r := read(t, src)["7"]
	require.Zero(t, r.Counters["proc.rchar"])
	require.Equal(t, 1, r.Malformed)
	tr.setIO(1001, rchar(1200))
	require.Equal(t, uint64(200), total(t, src, "7", "proc.rchar"))
}
