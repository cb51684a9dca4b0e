//go:build linux

package jobio_test

import (
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/jobio"
)

// openFiles returns this process's open descriptors whose file is below
// dir, by descriptor: /proc/self/fd links name the files (with
// " (deleted)" after a removed one).
func openFiles(t *testing.T, dir string) map[int]string {
	t.Helper()
	entries, err := os.ReadDir("/proc/self/fd")
	require.NoError(t, err)
	files := make(map[int]string)
	for _, e := range entries {
		target, err := os.Readlink(filepath.Join("/proc/self/fd", e.Name()))
		if err != nil {
			continue // the descriptor ReadDir itself used
		}
		if strings.HasPrefix(target, dir+"/") {
			fd, err := strconv.Atoi(e.Name())
			require.NoError(t, err)
			files[fd] = strings.TrimPrefix(target, dir+"/")
		}
	}
	return files
}

// names returns the sorted file names of files.
func names(files map[int]string) []string {
	var n []string
	for _, f := range files {
		n = append(n, f)
	}
	return sortedCopy(n)
}

// sortedCopy returns s sorted, leaving s alone.
func sortedCopy(s []string) []string {
	c := slices.Clone(s)
	slices.Sort(c)
	return c
}

func TestDescriptorsKeptAndClosed(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.setIOStat(jobDir, "8:0 rbytes=1 wbytes=0 rios=1 wios=0 dbytes=0 dios=0\n")
	tr.spawn(501, 1, 50000, rchar(1000))
	tr.spawn(502, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 501, 502)
	src := tr.source(jobio.Options{RescanEvery: 1000})
	read(t, src)

	// Each cgroup directory and its cgroup.procs, the job's io.stat, each
	// process's io and /proc/uptime.
	job := []string{jobDir, jobDir + "/cgroup.procs", jobDir + "/io.stat", stepDir, stepDir + "/cgroup.procs"}
	require.Equal(t, sortedCopy(job), names(openFiles(t, tr.cgroup)))
	procs := []string{"501/io", "502/io", "uptime"}
	require.Equal(t, procs, names(openFiles(t, tr.proc)))

	// Later reads use the same descriptors.
	kept := openFiles(t, tr.cgroup)
	tr.setIO(501, rchar(1001))
	require.Equal(t, uint64(1), total(t, src, "7", "proc.rchar"))
	require.Equal(t, kept, openFiles(t, tr.cgroup))

	// A new step: its directory and cgroup.procs are kept too, and the
	// earlier descriptors stay.
	tr.mkdir(jobDir + "/step_1")
	tr.spawn(503, 1, tr.ticks+1, rchar(5))
	tr.setProcs(jobDir+"/step_1", 503)
	tr.advance(100)
	require.Equal(t, uint64(6), total(t, src, "7", "proc.rchar"))
	now := openFiles(t, tr.cgroup)
	for fd, f := range kept {
		require.Equal(t, f, now[fd])
	}
	require.Equal(t, sortedCopy(append(job, jobDir+"/step_1", jobDir+"/step_1/cgroup.procs")), names(now))
	require.Equal(t, []string{"501/io", "502/io", "503/io", "uptime"}, names(openFiles(t, tr.proc)))

	// The step goes, with its process reaped: their descriptors close.
	tr.reap(503)
	tr.rmdir(jobDir + "/step_1")
	read(t, src)
	require.Equal(t, sortedCopy(job), names(openFiles(t, tr.cgroup)))
	require.Equal(t, procs, names(openFiles(t, tr.proc)))

	// A process reaped: its io closes.
	tr.reap(502)
	tr.setProcs(stepDir, 501)
	read(t, src)
	require.Equal(t, []string{"501/io", "uptime"}, names(openFiles(t, tr.proc)))

	// The job ends: reported once more, its cgroup descriptors closed at
	// once; then dropped, with its processes'.
	tr.rmdir(jobDir)
	require.Contains(t, read(t, src), "7")
	require.Empty(t, openFiles(t, tr.cgroup))
	require.Empty(t, read(t, src))
	require.Equal(t, []string{"uptime"}, names(openFiles(t, tr.proc)))

	// Close closes the rest.
	require.NoError(t, src.Close())
	require.Empty(t, openFiles(t, tr.proc))
}

func TestCloseClosesDescriptors(t *testing.T) {
	t.Parallel()
	tr := newJobTree(t)
	tr.spawn(601, 1, 50000, rchar(1000))
	tr.setProcs(stepDir, 601)
	src := tr.source(jobio.Options{})
	read(t, src)
	require.NotEmpty(t, openFiles(t, tr.cgroup))
	require.NotEmpty(t, openFiles(t, tr.proc))
	require.NoError(t, src.Close())
	require.Empty(t, openFiles(t, tr.cgroup))
	require.Empty(t, openFiles(t, tr.proc))
}
