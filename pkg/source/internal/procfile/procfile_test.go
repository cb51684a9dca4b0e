package procfile_test

import (
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/internal/procfile"
)

// tempFile writes content to a new file in a test directory and returns
// its path.
func tempFile(t *testing.T, content string) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "stats")
	require.NoError(t, os.WriteFile(path, []byte(content), 0o644))
	return path
}

// replace writes content beside path and renames it over path: a new
// inode under the old name, as pkg/sim writes its files.
func replace(t *testing.T, path, content string) {
	t.Helper()
	tmp := path + ".new"
	require.NoError(t, os.WriteFile(tmp, []byte(content), 0o644))
	require.NoError(t, os.Rename(tmp, path))
}

// newFile returns a File for path, closed when the test ends.
func newFile(t *testing.T, path string, opts procfile.Options) *procfile.File {
	t.Helper()
	f := procfile.New(path, opts)
	t.Cleanup(func() { require.NoError(t, f.Close()) })
	return f
}

// load calls Load and requires it to succeed.
func load(t *testing.T, f *procfile.File) string {
	t.Helper()
	data, err := f.Load()
	require.NoError(t, err)
	return string(data)
}

func TestLoadInPlaceRewrite(t *testing.T) {
	t.Parallel()
	path := tempFile(t, "first contents, rather long\n")
	f := newFile(t, path, procfile.Options{CheckEvery: 12})
	require.Equal(t, "first contents, rather long\n", load(t, f))

	// os.WriteFile truncates and writes the same inode: the kept descriptor
	// reads it from offset 0 and nothing of the longer old file is left.
	for _, content := range []string{"short\n", "", "longer again, longer than the first\n"} {
		require.NoError(t, os.WriteFile(path, []byte(content), 0o644))
		require.Equal(t, content, load(t, f))
	}
	require.Equal(t, 1, f.Opens(), "one open for all loads")
}

func TestLoadReplacedByRename(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name       string
		checkEvery int
		seenAt     int // the first Load after the first that reads the new file
	}{
		{name: "zero means every load", checkEvery: 0, seenAt: 1},
		{name: "every load", checkEvery: 1, seenAt: 1},
		{name: "every 2", checkEvery: 2, seenAt: 2},
		{name: "every 12, as nfs", checkEvery: 12, seenAt: 12},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			path := tempFile(t, "old\n")
			f := newFile(t, path, procfile.Options{CheckEvery: tt.checkEvery})
			require.Equal(t, "old\n", load(t, f))
			replace(t, path, "new\n")
			for i := 1; i < tt.seenAt; i++ {
				require.Equal(t, "old\n", load(t, f), "load %d is before the check", i)
			}
			require.Equal(t, "new\n", load(t, f), "load %d checks", tt.seenAt)
			require.Equal(t, 2, f.Opens())

			// The next check finds the same file and keeps it.
			for range tt.seenAt + 1 {
				require.Equal(t, "new\n", load(t, f))
			}
			require.Equal(t, 2, f.Opens())
		})
	}
}

func TestLoadRemoved(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name       string
		checkEvery int
		opened     bool // loaded once before the removal
		oldLoads   int  // loads that still read the removed file
	}{
		{name: "never opened", checkEvery: 1},
		{name: "checked at once", checkEvery: 1, opened: true},
		{name: "checked at the third load", checkEvery: 3, opened: true, oldLoads: 2},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			path := tempFile(t, "data\n")
			f := newFile(t, path, procfile.Options{CheckEvery: tt.checkEvery})
			if tt.opened {
				require.Equal(t, "data\n", load(t, f))
			}
			require.NoError(t, os.Remove(path))
			for range tt.oldLoads {
				require.Equal(t, "data\n", load(t, f), "the open descriptor still reads the unlinked file")
			}
			_, err := f.Load()
			require.ErrorIs(t, err, fs.ErrNotExist)
			require.ErrorContains(t, err, path)

			// Stays missing without a descriptor, then comes back.
			_, err = f.Load()
			require.ErrorIs(t, err, fs.ErrNotExist)
			require.NoError(t, os.WriteFile(path, []byte("back\n"), 0o644))
			require.Equal(t, "back\n", load(t, f))
		})
	}
}

func TestLoadGrowsBuffer(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name string
		size int
	}{
		{name: "empty", size: 0},
		{name: "one byte", size: 1},
		{name: "exactly the first buffer", size: 16 << 10},
		{name: "one past the first buffer", size: 16<<10 + 1},
		{name: "several doublings", size: 300_000},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			content := strings.Repeat("0123456789abcde\n", tt.size/16+1)[:tt.size]
			path := tempFile(t, "small\n")
			f := newFile(t, path, procfile.Options{})
			require.Equal(t, "small\n", load(t, f))
			require.NoError(t, os.WriteFile(path, []byte(content), 0o644))
			require.Equal(t, content, load(t, f), "grown in place")
			require.NoError(t, os.WriteFile(path, []byte("small again\n"), 0o644))
			require.Equal(t, "small again\n", load(t, f), "and shrunk")
			require.Equal(t, 1, f.Opens())
		})
	}
}

func TestLoadMaxSize(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name     string
		maxSize  int
		size     int
		tooLarge bool
	}{
		{name: "under a small max", maxSize: 100, size: 99},
		{name: "exactly a small max", maxSize: 100, size: 100},
		{name: "one over a small max", maxSize: 100, size: 101, tooLarge: true},
		{name: "far over a small max", maxSize: 100, size: 50_000, tooLarge: true},
		{name: "exactly a max past the first buffer", maxSize: 40_000, size: 40_000},
		{name: "one over a max past the first buffer", maxSize: 40_000, size: 40_001, tooLarge: true},
		{name: "zero max means the default", maxSize: 0, size: 200_000},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			content := strings.Repeat("x", tt.size)
			path := tempFile(t, content)
			for _, noRetry := range []bool{false, true} {
				f := newFile(t, path, procfile.Options{MaxSize: tt.maxSize, NoRetry: noRetry})
				data, err := f.Load()
				if !tt.tooLarge {
					require.NoError(t, err)
					require.Equal(t, content, string(data))
					continue
				}
				require.ErrorIs(t, err, procfile.ErrTooLarge)
				require.False(t, errors.Is(err, fs.ErrNotExist))
				require.ErrorContains(t, err, "reading "+path)
				require.Nil(t, data)
			}
		})
	}
}

func TestLoadReadError(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name      string
		noRetry   bool
		wantOpens int
	}{
		{name: "retried with a fresh open", wantOpens: 2},
		{name: "NoRetry: returned at once", noRetry: true, wantOpens: 1},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			// A directory opens but fails every read (EISDIR).
			path := filepath.Join(t.TempDir(), "stats")
			require.NoError(t, os.Mkdir(path, 0o755))
			f := newFile(t, path, procfile.Options{NoRetry: tt.noRetry})
			_, err := f.Load()
			require.Error(t, err)
			require.False(t, errors.Is(err, fs.ErrNotExist), "%v", err)
			require.ErrorContains(t, err, "reading "+path)
			require.Equal(t, tt.wantOpens, f.Opens())

			// The file is back: the failed read left nothing open, so the
			// path is opened again.
			require.NoError(t, os.Remove(path))
			require.NoError(t, os.WriteFile(path, []byte("ok\n"), 0o644))
			require.Equal(t, "ok\n", load(t, f))
			require.Equal(t, tt.wantOpens+1, f.Opens())
		})
	}
}

func TestCloseThenLoad(t *testing.T) {
	t.Parallel()
	path := tempFile(t, "data\n")
	f := newFile(t, path, procfile.Options{CheckEvery: 12})
	require.NoError(t, f.Close(), "Close before any Load is harmless")
	data, err := f.Load()
	require.NoError(t, err)
	require.NoError(t, f.Close())
	require.NoError(t, f.Close(), "Close twice is harmless")
	require.Equal(t, "data\n", string(data), "Close leaves the last data alone")
	require.Equal(t, "data\n", load(t, f), "Load after Close opens the file again")
	require.Equal(t, 2, f.Opens())
	require.Equal(t, path, f.Path())
}

func TestLoadAllocatesNothingBetweenChecks(t *testing.T) {
	path := tempFile(t, strings.Repeat("8 0 sda 1 2 3 4 5 6 7 8 9 10 11\n", 8))
	f := newFile(t, path, procfile.Options{CheckEvery: 1 << 30})
	load(t, f)
	allocs := testing.AllocsPerRun(100, func() {
		if _, err := f.Load(); err != nil {
			t.Fatal(err)
		}
	})
	require.Zero(t, allocs, "the buffer is reused")
}
