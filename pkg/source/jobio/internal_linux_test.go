//go:build linux

package jobio

import (
	"sluice/pkg/source/internal/fields"

	"context"
	"os"
	"path/filepath"
	"syscall"
	"testing"

	"github.com/stretchr/testify/require"
)

// A kept cgroup.procs whose pread fails (here a directory put under its
// descriptor: EISDIR) is read by path instead, with nothing lost, and
// opened and kept again at the next read.
func TestKeptCgroupProcsFallsBackToPath(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	cg, proc := filepath.Join(dir, "cgroup"), filepath.Join(dir, "proc")
	step := filepath.Join(cg, "job_7", "step_0")
	require.NoError(t, os.MkdirAll(step, 0o755))
	require.NoError(t, os.MkdirAll(filepath.Join(proc, "71"), 0o755))
	write := func(path, s string) { require.NoError(t, os.WriteFile(path, []byte(s), 0o644)) }
	write(filepath.Join(proc, "uptime"), "1000.00 1.00\n")
	write(filepath.Join(proc, "71", "stat"), "71 (x) S 1 71 71 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 500 0 0\n")
	io := func(rchar string) {
		write(filepath.Join(proc, "71", "io"), "rchar: "+rchar+"\nwchar: 0\nsyscr: 0\nsyscw: 0\nread_bytes: 0\nwrite_bytes: 0\ncancelled_write_bytes: 0\n")
	}
	io("1000")
	write(filepath.Join(cg, "job_7", "cgroup.procs"), "")
	write(filepath.Join(step, "cgroup.procs"), "71\n")
	src, err := NewSource(Options{CgroupRoot: cg, ProcRoot: proc, RescanEvery: 1000}, nil)
	require.NoError(t, err)
	defer src.Close()
	rchar := func() uint64 {
		t.Helper()
		rs, err := src.Read(context.Background())
		require.NoError(t, err)
		require.Len(t, rs, 1)
		return rs[0].Counters["proc.rchar"]
	}
	rchar()

	j := src.jobs["7"]
	n := j.root.children[0]
	require.Equal(t, step, n.path)
	require.True(t, n.procs.valid())
	d, err := syscall.Open(dir, syscall.O_RDONLY|syscall.O_DIRECTORY|syscall.O_CLOEXEC, 0)
	require.NoError(t, err)
	require.NoError(t, syscall.Dup3(d, n.procs.v-1, syscall.O_CLOEXEC))
	require.NoError(t, syscall.Close(d))

	io("1010")
	require.Equal(t, uint64(10), rchar(), "71 still listed")
	require.False(t, n.procs.valid(), "the failed descriptor is closed")
	require.True(t, j.relist)

	io("1030")
	require.Equal(t, uint64(30), rchar())
	require.True(t, j.root.children[0].procs.valid(), "opened and kept again")
	require.False(t, j.relist)
}

func FuzzParseProcIOExact(f *testing.F) {
	f.Add([]byte("rchar: 1\nwchar: 2\nsyscr: 3\nsyscw: 4\nread_bytes: 5\nwrite_bytes: 6\ncancelled_write_bytes: 7\n"))
	f.Add([]byte("rchar: 18446744073709551615\nwchar: 2\nsyscr: 3\nsyscw: 4\nread_bytes: 5\nwrite_bytes: 6\ncancelled_write_bytes: 7\n"))
	f.Add([]byte("rchar: 1844674407370955161\nwchar: 02\nsyscr: 3\nsyscw: 4\nread_bytes: 5\nwrite_bytes: 6\ncancelled_write_bytes: 7\n"))
	f.Add([]byte("rchar: 1\nwchar: 2\nsyscr: 3\nsyscw: 4\nread_bytes: 5\nwrite_bytes: 6\ncancelled_write_bytes: 7"))
	f.Add([]byte("rchar:  1\nwchar: 2\n"))
	f.Fuzz(func(t *testing.T, b []byte) {
		v, ok := parseProcIOExact(b)
		if !ok {
			return
		}
		// What the exact layout gives, the general parser gives too.
		var p procIOParser
		eachLineBytes(b, p.line, func() { p.malformed++ })
		require.Equal(t, p.v, v)
		require.Equal(t, uint8(allProcIO), p.seen)
		require.Zero(t, p.malformed)
	})
}

func FuzzAddPids(f *testing.F) {
	f.Add([]byte("1\n22\n4194304\n4194305\n0\n"))
	f.Add([]byte(" 7 \n\n00000012\n000000012\nx\n12"))
	f.Fuzz(func(t *testing.T, b []byte) {
		s, j := &Source{}, &job{}
		s.addPids(j, b)
		// The line-by-line rule the quick path must agree with.
		var want []int
		malformed := 0
		eachLineBytes(b, func(line []byte) {
			line = trimSpace(line)
			if len(line) == 0 {
				return
			}
			if pid, ok := fields.ParseUint(line); ok && pid > 0 && pid <= 1<<22 {
				want = append(want, int(pid))
				return
			}
			malformed++
		}, func() { malformed++ })
		require.Equal(t, want, s.pids)
		require.Equal(t, malformed, j.errs.malformed)
	})
}
