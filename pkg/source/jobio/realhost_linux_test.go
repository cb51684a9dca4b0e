package jobio_test

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/jobio"
)

// workerEnv turns the test binary into a worker process of the real-kernel
// scenario: its value is the worker's plan in JSON.
const workerEnv = "SLUICE_JOBIO_TEST_WORKER"

func TestMain(m *testing.M) {
	if plan := os.Getenv(workerEnv); plan != "" {
		runWorker(plan) // does not return
	}
	os.Exit(m.Run())
}

// TestRealCgroupEveryByteCountedOnce runs the end-to-end scenario on this
// machine's kernel: job cgroups made under a cgroup2 mount, workers that
// are this test binary run again, and /proc. It needs root and a cgroup2
// mount, and skips, saying why, without them;
// TestFixtureEveryByteCountedOnce covers the same scenario everywhere.
func TestRealCgroupEveryByteCountedOnce(t *testing.T) {
	h := newRealHost(t)
	runScenario(t, h, scenarioJobs(t.TempDir()))
}

// reportSize is the size of a worker's report: the seven /proc/<pid>/io
// values, little-endian, in ProcIO's order.
const reportSize = 7 * 8

// runWorker is a worker process: it does its plan (see workerPlan) and
// exits. A top-level worker talks with the test on descriptor 3 (it
// writes: one byte when done, then its report) and 4 (it reads one byte
// per word).
func runWorker(planJSON string) {
	var p workerPlan
	if err := json.Unmarshal([]byte(planJSON), &p); err != nil {
		workerFail(err)
	}
	var talk, word *os.File
	if p.Top {
		talk, word = os.NewFile(3, "report"), os.NewFile(4, "word")
		waitWord(word)
	}
	f, err := os.CreateTemp(p.Dir, "worker-*")
	if err != nil {
		workerFail(err)
	}
	kids := doRounds(f, p)
	for _, k := range kids {
		if err := k.Wait(); err != nil { // the reap: its totals join ours
			workerFail(fmt.Errorf("child: %w", err))
		}
	}
	if p.Top {
		if _, err := talk.Write([]byte{'d'}); err != nil {
			workerFail(err)
		}
		waitWord(word)
		ioRound(f, p)
	}
	f.Close()
	if err := os.Remove(f.Name()); err != nil {
		workerFail(err)
	}
	if p.Top {
		reportSelf(talk)
	}
	// Not os.Exit: nothing may do I/O after the report (the race
	// detector's exit hook could).
	syscall.Exit(0)
}

// doRounds does p's rounds on f, starting child i before round i, and
// returns the children started.
func doRounds(f *os.File, p workerPlan) []*exec.Cmd {
	var kids []*exec.Cmd
	for r := range p.Rounds {
		if r < len(p.Children) {
			kids = append(kids, startChild(p.Children[r]))
		}
		ioRound(f, p)
		time.Sleep(p.Pause)
	}
	return kids
}

// ioRound writes p.Bytes to f in p.Calls pwrite calls and reads them back
// in as many pread calls.
func ioRound(f *os.File, p workerPlan) {
	buf := make([]byte, p.Bytes)
	for _, read := range []bool{false, true} {
		off := 0
		for c := range p.Calls {
			n := p.Bytes / p.Calls
			if c == p.Calls-1 {
				n = p.Bytes - off
			}
			var err error
			if read {
				_, err = f.ReadAt(buf[off:off+n], int64(off))
			} else {
				_, err = f.WriteAt(buf[off:off+n], int64(off))
			}
			if err != nil {
				workerFail(err)
			}
			off += n
		}
	}
}

// startChild starts a child worker, which inherits our cgroup.
func startChild(p workerPlan) *exec.Cmd {
	js, err := json.Marshal(p)
	if err != nil {
		workerFail(err)
	}
	cmd := exec.Command("/proc/self/exe")
	cmd.Env = append(os.Environ(), workerEnv+"="+string(js))
	cmd.Stderr = os.Stderr
	if err := cmd.Start(); err != nil {
		workerFail(err)
	}
	return cmd
}

// reportSelf writes our /proc/self/io to w, with the read that gets it and
// the write that sends it added: the kernel counts a call after it has
// printed the file (vfs_read and vfs_write in fs/read_write.c, from
// memory), and nothing follows but the exit.
func reportSelf(w *os.File) {
	f, err := os.Open("/proc/self/io")
	if err != nil {
		workerFail(err)
	}
	b := make([]byte, 4096)
	n, err := f.Read(b) // one read(2): procfs hands the whole file at once
	if err != nil {
		workerFail(err)
	}
	f.Close()
	v, err := jobio.ParseProcIO(bytes.NewReader(b[:n]))
	if err != nil {
		workerFail(err)
	}
	v.RChar, v.SyscR = v.RChar+uint64(n), v.SyscR+1
	v.WChar, v.SyscW = v.WChar+reportSize, v.SyscW+1
	out := make([]byte, 0, reportSize)
	for _, x := range []uint64{v.RChar, v.WChar, v.SyscR, v.SyscW, v.ReadBytes, v.WriteBytes, v.CancelledWriteBytes} {
		out = binary.LittleEndian.AppendUint64(out, x)
	}
	if _, err := w.Write(out); err != nil { // one write(2) of 56 bytes to a pipe
		workerFail(err)
	}
}

func waitWord(r *os.File) {
	if _, err := io.ReadFull(r, make([]byte, 1)); err != nil {
		workerFail(err)
	}
}

func workerFail(err error) {
	fmt.Fprintln(os.Stderr, "worker:", err)
	syscall.Exit(2)
}

// realHost is this machine's kernel: a cgroup of the test's own directly
// below the cgroup2 mount, with the jobs below it, and /proc.
type realHost struct {
	t     *testing.T
	root  string
	procs []*realProc
}

// realRoots numbers the test's cgroups within this process.
var realRoots atomic.Int64

// cgroup2Magic is CGROUP2_SUPER_MAGIC (include/uapi/linux/magic.h).
const cgroup2Magic = 0x63677270

// newRealHost makes the test's cgroup, or skips the test, saying why,
// where the machine does not allow it. Everything it makes is removed
// when the test ends, its processes killed first.
func newRealHost(t *testing.T) *realHost {
	mount := ""
	for _, m := range []string{"/sys/fs/cgroup/unified", "/sys/fs/cgroup"} {
		var st syscall.Statfs_t
		if syscall.Statfs(m, &st) == nil && st.Type == cgroup2Magic {
			mount = m
			break
		}
	}
	if mount == "" {
		t.Skip("skipped: no cgroup2 mount at /sys/fs/cgroup/unified or /sys/fs/cgroup; TestFixtureEveryByteCountedOnce covers the scenario")
	}
	if os.Geteuid() != 0 {
		t.Skipf("skipped: making cgroups under %s needs root (uid %d); TestFixtureEveryByteCountedOnce covers the scenario", mount, os.Geteuid())
	}
	root := filepath.Join(mount, fmt.Sprintf("sluice-jobio-test-%d-%d", os.Getpid(), realRoots.Add(1)))
	if err := os.Mkdir(root, 0o755); err != nil {
		if errors.Is(err, fs.ErrPermission) || errors.Is(err, syscall.EROFS) {
			t.Skipf("skipped: cannot make a cgroup under %s: %v", mount, err)
		}
		t.Fatal(err)
	}
	h := &realHost{t: t, root: root}
	t.Cleanup(h.cleanup)
	h.probe()
	return h
}

// probe moves a waiting worker into a cgroup and kills it, and skips the
// test if the kernel refuses the move.
func (h *realHost) probe() {
	require.NoError(h.t, os.Mkdir(filepath.Join(h.root, "probe"), 0o755))
	p, err := h.startIn("probe", workerPlan{Top: true, Dir: h.t.TempDir()})
	if err != nil {
		h.t.Skipf("skipped: cannot move a process into a cgroup under %s: %v", h.root, err)
	}
	p.cmd.Process.Kill()
	p.cmd.Wait()
	p.waited = true
	removeRetrying(h.t, filepath.Join(h.root, "probe"))
}

func (h *realHost) options() jobio.Options {
	return jobio.Options{CgroupRoot: h.root, ProcRoot: "/proc"}
}

func (h *realHost) makeJob(id string) []string {
	steps := []string{"job_" + id + "/step_0", "job_" + id + "/step_1"}
	for _, s := range steps {
		require.NoError(h.t, os.MkdirAll(filepath.Join(h.root, s), 0o755))
	}
	return steps
}

func (h *realHost) start(step string, plan workerPlan) hostWorker {
	p, err := h.startIn(step, plan)
	require.NoError(h.t, err)
	return p
}

// startIn starts a top-level worker, waiting for its first word, and
// moves it into step, as a scheduler moves a task it has just forked.
// Nothing reads the sources meanwhile, so its start-up reads count as a
// new process's (rule 2), which its report includes.
func (h *realHost) startIn(step string, plan workerPlan) (*realProc, error) {
	js, err := json.Marshal(plan)
	require.NoError(h.t, err)
	talkR, talkW, err := os.Pipe()
	require.NoError(h.t, err)
	wordR, wordW, err := os.Pipe()
	require.NoError(h.t, err)
	p := &realProc{t: h.t, word: wordW, said: make(chan struct{}), result: make(chan reportResult, 1)}
	p.cmd = exec.Command("/proc/self/exe")
	p.cmd.Env = append(os.Environ(), workerEnv+"="+string(js))
	p.cmd.ExtraFiles = []*os.File{talkW, wordR}
	p.cmd.Stderr = &p.stderr
	require.NoError(h.t, p.cmd.Start())
	talkW.Close()
	wordR.Close()
	h.procs = append(h.procs, p)
	go p.listen(talkR)
	pid := []byte(strconv.Itoa(p.cmd.Process.Pid))
	return p, os.WriteFile(filepath.Join(h.root, step, "cgroup.procs"), pid, 0o644)
}

func (h *realHost) removeJob(id string) bool {
	for _, d := range []string{"job_" + id + "/step_0", "job_" + id + "/step_1", "job_" + id} {
		err := os.Remove(filepath.Join(h.root, d))
		switch {
		case err == nil, errors.Is(err, fs.ErrNotExist):
		case errors.Is(err, syscall.EBUSY):
			// An exited process leaves its cgroup a moment after it
			// becomes a zombie.
			return false
		default:
			h.t.Fatal(err)
		}
	}
	return true
}

func (h *realHost) pass() { time.Sleep(time.Millisecond) }

// cleanup kills every process left in the test's cgroups, reaps the
// test's own children and removes the cgroups, deepest first.
func (h *realHost) cleanup() {
	var dirs []string
	filepath.WalkDir(h.root, func(path string, d fs.DirEntry, err error) error {
		if err == nil && d.IsDir() {
			dirs = append(dirs, path)
		}
		return nil
	})
	slices.Reverse(dirs) // children after their parents in a walk
	for _, d := range dirs {
		killAll(d)
	}
	for _, p := range h.procs {
		if !p.waited {
			p.cmd.Process.Kill()
			p.cmd.Wait()
		}
		p.word.Close()
	}
	for _, d := range dirs {
		removeRetrying(h.t, d)
	}
}

// killAll kills the processes of cgroup dir: by cgroup.kill where the
// kernel has it (5.14 on, from memory), else one by one.
func killAll(dir string) {
	if os.WriteFile(filepath.Join(dir, "cgroup.kill"), []byte("1"), 0o644) == nil {
		return
	}
	b, _ := os.ReadFile(filepath.Join(dir, "cgroup.procs"))
	for _, f := range bytes.Fields(b) {
		if pid, err := strconv.Atoi(string(f)); err == nil {
			syscall.Kill(pid, syscall.SIGKILL)
		}
	}
}

// removeRetrying removes cgroup dir, waiting while killed or exited
// processes still leave it.
func removeRetrying(t *testing.T, dir string) {
	for deadline := time.Now().Add(10 * time.Second); ; {
		err := os.Remove(dir)
		if err == nil || errors.Is(err, fs.ErrNotExist) {
			return
		}
		if !errors.Is(err, syscall.EBUSY) || time.Now().After(deadline) {
			t.Errorf("cgroup %s left behind: %v", dir, err)
			return
		}
		time.Sleep(time.Millisecond)
	}
}

// realProc is a top-level worker process.
type realProc struct {
	t      *testing.T
	cmd    *exec.Cmd
	stderr bytes.Buffer
	word   *os.File      // the write end of its descriptor 4
	said   chan struct{} // closed when it said it is done, or failed
	result chan reportResult
	waited bool
}

type reportResult struct {
	v   [7]uint64
	err error
}

// listen reads what the worker says on descriptor 3: a byte when done,
// then its report.
func (p *realProc) listen(r *os.File) {
	defer r.Close()
	b := make([]byte, reportSize)
	if _, err := io.ReadFull(r, b[:1]); err != nil {
		close(p.said)
		p.result <- reportResult{err: fmt.Errorf("worker said nothing: %w", err)}
		return
	}
	close(p.said)
	var res reportResult
	if _, res.err = io.ReadFull(r, b); res.err == nil {
		for i := range res.v {
			res.v[i] = binary.LittleEndian.Uint64(b[8*i:])
		}
	}
	p.result <- res
}

func (p *realProc) release() {
	_, err := p.word.Write([]byte{1})
	require.NoError(p.t, err)
}

func (p *realProc) done() bool {
	select {
	case <-p.said:
		return true
	default:
		return false
	}
}

func (p *realProc) report() [7]uint64 {
	select {
	case res := <-p.result:
		require.NoError(p.t, res.err, "worker %d", p.cmd.Process.Pid)
		return res.v
	case <-time.After(time.Minute):
		p.t.Fatalf("worker %d sent no report", p.cmd.Process.Pid)
		return [7]uint64{}
	}
}

func (p *realProc) reap() {
	err := p.cmd.Wait()
	p.waited = true
	require.NoError(p.t, err, "worker %d: %s", p.cmd.Process.Pid, p.stderr.String())
}
