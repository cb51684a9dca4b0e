package jobio_test

import (
	"context"
	"fmt"
	"maps"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source"
	"sluice/pkg/source/jobio"
)

// fixedNow is the clock the Source tests inject.
var fixedNow = time.Unix(1718000200, 0)

func nowFunc() time.Time { return fixedNow }

// tree is a fake cgroup v2 root and procfs root in a temporary directory,
// laid out as Documentation/admin-guide/cgroup-v2.rst and
// Documentation/filesystems/proc.rst describe them. Files are rewritten in
// place (same inode), so a descriptor the Source keeps sees new contents,
// as it does on procfs. A reaped process's io file is truncated before it
// is removed: a kept descriptor then reads nothing, which the Source treats
// like the ESRCH procfs returns.
type tree struct {
	t      testing.TB
	cgroup string
	proc   string
	ticks  uint64 // /proc/uptime in clock ticks
}

// newTree returns an empty tree whose uptime is 1000.00 s.
func newTree(t testing.TB) *tree {
	t.Helper()
	dir := t.TempDir()
	tr := &tree{t: t, cgroup: filepath.Join(dir, "cgroup"), proc: filepath.Join(dir, "proc")}
	require.NoError(t, os.MkdirAll(tr.cgroup, 0o755))
	require.NoError(t, os.MkdirAll(tr.proc, 0o755))
	tr.write(filepath.Join(tr.cgroup, "cgroup.procs"), "1\n")
	tr.setUptime(100000)
	return tr
}

// write writes path in place, creating it if needed.
func (tr *tree) write(path, content string) {
	tr.t.Helper()
	require.NoError(tr.t, os.WriteFile(path, []byte(content), 0o644))
}

// setUptime sets /proc/uptime to ticks hundredths of a second.
func (tr *tree) setUptime(ticks uint64) {
	tr.ticks = ticks
	tr.write(filepath.Join(tr.proc, "uptime"), fmt.Sprintf("%d.%02d 4000.00\n", ticks/100, ticks%100))
}

// advance moves uptime on by n ticks and returns the new value.
func (tr *tree) advance(n uint64) uint64 {
	tr.setUptime(tr.ticks + n)
	return tr.ticks
}

// mkdir creates cgroup directory rel (and its parents) with an empty
// cgroup.procs in each.
func (tr *tree) mkdir(rel string) {
	tr.t.Helper()
	path := tr.cgroup
	for _, part := range strings.Split(rel, "/") {
		path = filepath.Join(path, part)
		require.NoError(tr.t, os.MkdirAll(path, 0o755))
		if _, err := os.Stat(filepath.Join(path, "cgroup.procs")); err != nil {
			tr.write(filepath.Join(path, "cgroup.procs"), "")
		}
	}
}

// rmdir removes cgroup directory rel and everything below it.
func (tr *tree) rmdir(rel string) {
	tr.t.Helper()
	require.NoError(tr.t, os.RemoveAll(filepath.Join(tr.cgroup, rel)))
}

// setProcs sets the pids in rel's cgroup.procs.
func (tr *tree) setProcs(rel string, pids ...int) {
	tr.t.Helper()
	var b strings.Builder
	for _, p := range pids {
		b.WriteString(strconv.Itoa(p))
		b.WriteByte('\n')
	}
	tr.write(filepath.Join(tr.cgroup, rel, "cgroup.procs"), b.String())
}

// setIOStat writes rel's io.stat.
func (tr *tree) setIOStat(rel, content string) {
	tr.write(filepath.Join(tr.cgroup, rel, "io.stat"), content)
}

// spawn creates /proc/<pid> with a stat file (parent ppid, start time
// start in ticks) and an io file holding v.
func (tr *tree) spawn(pid, ppid int, start uint64, v jobio.ProcIO) {
	tr.t.Helper()
	dir := filepath.Join(tr.proc, strconv.Itoa(pid))
	require.NoError(tr.t, os.MkdirAll(dir, 0o755))
	tr.write(filepath.Join(dir, "stat"), statLine(pid, "worker", 'S', ppid, start))
	tr.setIO(pid, v)
}

// setIO rewrites /proc/<pid>/io in place.
func (tr *tree) setIO(pid int, v jobio.ProcIO) {
	tr.write(filepath.Join(tr.proc, strconv.Itoa(pid), "io"), ioFile(v))
}

// setPPID rewrites the parent in /proc/<pid>/stat, as the kernel does when
// it reparents an orphan.
func (tr *tree) setPPID(pid, ppid int, start uint64) {
	tr.write(filepath.Join(tr.proc, strconv.Itoa(pid), "stat"), statLine(pid, "worker", 'S', ppid, start))
}

// reap removes /proc/<pid>, truncating its io file first so that a kept
// descriptor reads nothing.
func (tr *tree) reap(pid int) {
	tr.t.Helper()
	dir := filepath.Join(tr.proc, strconv.Itoa(pid))
	require.NoError(tr.t, os.Truncate(filepath.Join(dir, "io"), 0))
	require.NoError(tr.t, os.RemoveAll(dir))
}

// source returns a Source over the tree that walks on every read unless
// rescan says otherwise; it is closed when the test ends.
func (tr *tree) source(opts jobio.Options) *jobio.Source {
	tr.t.Helper()
	opts.CgroupRoot, opts.ProcRoot = tr.cgroup, tr.proc
	if opts.RescanEvery == 0 {
		opts.RescanEvery = 1
	}
	src, err := jobio.NewSource(opts, nowFunc)
	require.NoError(tr.t, err)
	tr.t.Cleanup(func() { src.Close() })
	return src
}

// ioFile formats v as do_io_accounting prints it (fs/proc/base.c).
func ioFile(v jobio.ProcIO) string {
	return fmt.Sprintf("rchar: %d\nwchar: %d\nsyscr: %d\nsyscw: %d\nread_bytes: %d\nwrite_bytes: %d\ncancelled_write_bytes: %d\n",
		v.RChar, v.WChar, v.SyscR, v.SyscW, v.ReadBytes, v.WriteBytes, v.CancelledWriteBytes)
}

// statLine formats a /proc/<pid>/stat line with all 52 fields, as
// do_task_stat prints them (fs/proc/array.c); start is field 22.
func statLine(pid int, comm string, state byte, ppid int, start uint64) string {
	// Fields 5-21: pgrp session tty_nr tpgid flags minflt cminflt majflt
	// cmajflt utime stime cutime cstime priority nice num_threads itrealvalue.
	// Fields 23-52: vsize rss rsslim and the rest.
	return fmt.Sprintf("%d (%s) %s %d %d %d 0 -1 4194560 310 0 0 0 12 3 0 0 20 0 1 0 %d 12984320 812 18446744073709551615 "+
		"94505072988160 94505073801117 140731542512368 0 0 0 65536 4 65538 1 0 0 17 3 0 0 0 0 0 "+
		"94505074024400 94505074072164 94505096396800 140731542519119 140731542519129 140731542519129 140731542523886 0\n",
		pid, comm, string([]byte{state}), ppid, pid, pid, start)
}

// rchar returns v with only RChar set, the counter most rule tests follow.
func rchar(n uint64) jobio.ProcIO { return jobio.ProcIO{RChar: n} }

// read reads src and returns its readings by job id.
func read(t testing.TB, src *jobio.Source) map[string]source.Reading {
	t.Helper()
	rs, err := src.Read(context.Background())
	require.NoError(t, err)
	m := make(map[string]source.Reading, len(rs))
	for _, r := range rs {
		m[r.Job] = r
	}
	return m
}

// total reads src and returns counter name of job id; the job must be there.
func total(t testing.TB, src *jobio.Source, id, name string) uint64 {
	t.Helper()
	r, ok := read(t, src)[id]
	require.True(t, ok, "job %s not reported", id)
	return r.Counters[name]
}

// removeFile removes cgroup file rel.
func removeFile(tr *tree, rel string) error {
	return os.Remove(filepath.Join(tr.cgroup, rel))
}

// removeProcFile removes /proc/<pid>/<name>.
func removeProcFile(tr *tree, pid int, name string) error {
	return os.Remove(filepath.Join(tr.proc, strconv.Itoa(pid), name))
}

// mapKeys returns the job ids of readings, sorted.
func mapKeys(m map[string]source.Reading) []string {
	return slices.Sorted(maps.Keys(m))
}
