package lustre_test

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source"
	"sluice/pkg/source/lustre"
)

var _ source.Source = (*lustre.Source)(nil)

// fixedNow is the clock the Source tests inject.
var fixedNow = time.Unix(1718000200, 0)

func nowFunc() time.Time { return fixedNow }

func TestSourceTree(t *testing.T) {
	t.Parallel()
	// testdata/lustre/tree follows the llite directory of Lustre 2.12+
	// (instance names from lustre/llite/llite_lib.c, files in 2.16 layout
	// from lustre/obdclass/lprocfs_status.c); its README file is skipped.
	src := lustre.NewSource(fixture.Path(t, "lustre", "tree"), nowFunc)
	require.Equal(t, "lustre", src.Name())
	got, err := src.Read(context.Background())
	require.NoError(t, err)
	want := []source.Reading{
		{
			Key:   "lustre:home-ffff9a0c6789a000",
			Epoch: "1717000000.000000000",
			Time:  fixedNow,
			Counters: map[string]uint64{
				"write_bytes": 10, "write_bytes.sum": 40960,
				"write": 10, "open": 3, "getattr": 12,
			},
		},
		{
			Key:   "lustre:scratch-ffff9a0c12345000",
			Epoch: "1717990000.000000001",
			Time:  fixedNow,
			Counters: map[string]uint64{
				"read_bytes": 1200, "read_bytes.sum": 2472242752,
				"write_bytes": 300, "write_bytes.sum": 161303766,
				"read": 1200, "write": 300, "ioctl": 7, "open": 42, "close": 42,
			},
		},
	}
	require.Equal(t, want, got)
}

// writeMount creates <root>/<inst>/stats holding the given fixture case.
func writeMount(t testing.TB, root, inst, fixtureCase string) {
	t.Helper()
	dir := filepath.Join(root, inst)
	require.NoError(t, os.MkdirAll(dir, 0o755))
	require.NoError(t, os.WriteFile(filepath.Join(dir, "stats"), fixture.Read(t, "lustre", fixtureCase, "stats"), 0o644))
}

// keys returns the reading keys in order.
func keys(rs []source.Reading) []string {
	var ks []string
	for _, r := range rs {
		ks = append(ks, r.Key)
	}
	return ks
}

func TestSourceMountsComeAndGo(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	src := lustre.NewSource(root, nowFunc).WithRescanEvery(1)
	ctx := context.Background()

	// The llite directory exists but nothing is mounted.
	_, err := src.Read(ctx)
	require.ErrorIs(t, err, source.ErrNoData)

	writeMount(t, root, "scratch-ffff9a0c12345000", "v2_16_header")
	got, err := src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{"lustre:scratch-ffff9a0c12345000"}, keys(got))
	first := got[0]
	require.Len(t, first.Counters, 36)

	// A second mount appears, on a 2.12 client layout without start_time.
	writeMount(t, root, "proj-ffff9a0c00001000", "v2_12_regs")
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{"lustre:proj-ffff9a0c00001000", "lustre:scratch-ffff9a0c12345000"}, keys(got))
	require.Empty(t, got[0].Epoch, "2.12 has no start_time")
	require.Equal(t, "1717990000.000000001", got[1].Epoch)
	// Buffers are reused between reads, but earlier readings stay intact.
	require.Equal(t, first, got[1])

	// The first mount is unmounted; its directory goes away.
	require.NoError(t, os.RemoveAll(filepath.Join(root, "scratch-ffff9a0c12345000")))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{"lustre:proj-ffff9a0c00001000"}, keys(got))

	// A mount that vanishes between listing and opening looks like a
	// dangling entry; a directory without stats and a stray file are not
	// mounts. All are skipped silently.
	require.NoError(t, os.Symlink(filepath.Join(root, "gone"), filepath.Join(root, "gone-ffff9a0c00002000")))
	require.NoError(t, os.Mkdir(filepath.Join(root, "empty-ffff9a0c00003000"), 0o755))
	require.NoError(t, os.WriteFile(filepath.Join(root, "stray"), nil, 0o644))
	require.NoError(t, os.Symlink(filepath.Join(root, "stray"), filepath.Join(root, "file-link")))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{"lustre:proj-ffff9a0c00001000"}, keys(got))

	require.NoError(t, os.RemoveAll(filepath.Join(root, "proj-ffff9a0c00001000")))
	_, err = src.Read(ctx)
	require.ErrorIs(t, err, source.ErrNoData)
}

// tick is a clock that moves one interval per call, as the agent's does
// between reads.
func tick() func() time.Time {
	t := fixedNow
	return func() time.Time { t = t.Add(5 * time.Second); return t }
}

func TestSourceListsTheRootEveryFewReads(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	src := lustre.NewSource(root, tick())
	ctx := context.Background()
	writeMount(t, root, "scratch-ffff9a0c12345000", "v2_16_header")
	got, err := src.Read(ctx)
	require.NoError(t, err)
	require.Len(t, got, 1)

	// A new mount is picked up at the next listing, within
	// DefaultRescanEvery reads, not necessarily at once.
	writeMount(t, root, "proj-ffff9a0c00001000", "v2_12_regs")
	seenAt := 0
	for i := 1; i <= lustre.DefaultRescanEvery; i++ {
		got, err = src.Read(ctx)
		require.NoError(t, err)
		if len(got) == 2 {
			seenAt = i
			break
		}
	}
	require.NotZero(t, seenAt, "new mount not seen within %d reads", lustre.DefaultRescanEvery)
	require.Greater(t, seenAt, 1, "the listing is reused between rescans")

	// An unmount is noticed at once, and the next read lists again. (A
	// removed debugfs or procfs file fails reads; a removed regular file
	// still reads through the open descriptor, but its snapshot_time stands
	// still while the clock moves, so it is opened again and found gone.)
	require.NoError(t, os.RemoveAll(filepath.Join(root, "proj-ffff9a0c00001000")))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{"lustre:scratch-ffff9a0c12345000"}, keys(got))
}

func TestSourceSeesRewrittenAndReplacedFiles(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	src := lustre.NewSource(root, tick())
	ctx := context.Background()
	write := func(open uint64, snap time.Time, replace bool) {
		var buf bytes.Buffer
		st := lustre.Stats{SnapshotTime: snap, Counters: []lustre.Counter{{Name: "open", Samples: open, Unit: "usecs", Fields: 4, Min: 1, Max: 1, Sum: open}}}
		require.NoError(t, lustre.Write(&buf, st, lustre.FormatV2_16))
		dir := filepath.Join(root, "scratch-ffff9a0c12345000")
		require.NoError(t, os.MkdirAll(dir, 0o755))
		path := filepath.Join(dir, "stats")
		if replace { // a new file under the same name, as a simulator writes
			require.NoError(t, os.WriteFile(path+".new", buf.Bytes(), 0o644))
			require.NoError(t, os.Rename(path+".new", path))
			return
		}
		require.NoError(t, os.WriteFile(path, buf.Bytes(), 0o644)) // same inode
	}
	read := func() uint64 {
		got, err := src.Read(ctx)
		require.NoError(t, err)
		require.Len(t, got, 1)
		return got[0].Counters["open"]
	}
	write(10, fixedNow, false)
	assert.Equal(t, uint64(10), read())
	write(20, fixedNow.Add(time.Second), false)
	assert.Equal(t, uint64(20), read(), "rewritten in place: seen through the open descriptor")
	write(30, fixedNow.Add(2*time.Second), true)
	assert.Equal(t, uint64(30), read(), "replaced: the stale descriptor is noticed and the path opened again")
	require.NoError(t, src.Close())
}

func TestSourceMissingRoot(t *testing.T) {
	t.Parallel()
	root := filepath.Join(t.TempDir(), "llite")
	_, err := lustre.NewSource(root, nowFunc).Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData)
	require.ErrorContains(t, err, root)
}

func TestSourceBadFileDoesNotHideOthers(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	writeMount(t, root, "scratch-ffff9a0c12345000", "v2_16_header")
	// A "stats" that cannot be read: a directory (read fails with EISDIR).
	bad := filepath.Join(root, "broken-ffff9a0c00004000", "stats")
	require.NoError(t, os.MkdirAll(bad, 0o755))
	got, err := lustre.NewSource(root, nowFunc).Read(context.Background())
	require.Error(t, err)
	require.ErrorContains(t, err, bad)
	require.False(t, errors.Is(err, source.ErrNoData))
	require.Equal(t, []string{"lustre:scratch-ffff9a0c12345000"}, keys(got))
}

func TestSourceMalformedCounted(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	writeMount(t, root, "scratch-ffff9a0c12345000", "malformed_lines")
	got, err := lustre.NewSource(root, nil).Read(context.Background())
	require.NoError(t, err)
	require.Len(t, got, 1)
	require.Equal(t, 10, got[0].Malformed)
	require.False(t, got[0].Time.IsZero(), "nil now means time.Now")
}

func TestSourceCanceled(t *testing.T) {
	t.Parallel()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	_, err := lustre.NewSource(fixture.Path(t, "lustre", "tree"), nowFunc).Read(ctx)
	require.ErrorIs(t, err, context.Canceled)
}

// TestSourceReadsFilesOfAnySize reads files around the sizes where the
// Source's reading changes: the short first read taken as the whole file
// (up to 3 KiB), one page, the 16 KiB read buffer and beyond it, and
// checks that every counter is read once.
func TestSourceReadsFilesOfAnySize(t *testing.T) {
	t.Parallel()
	for _, n := range []int{1, 40, 50, 64, 70, 90, 250, 300, 600} {
		t.Run(fmt.Sprint(n), func(t *testing.T) {
			t.Parallel()
			st := lustre.Stats{SnapshotTime: fixedNow}
			for i := range n {
				st.Counters = append(st.Counters, lustre.Counter{
					Name: fmt.Sprintf("c%04d", i), Samples: uint64(i + 1), Unit: "reqs"})
			}
			var buf bytes.Buffer
			require.NoError(t, lustre.Write(&buf, st, lustre.FormatV2_16))
			root := t.TempDir()
			write(t, filepath.Join(root, "big-ffff9a0c12345000", "stats"), buf.Bytes())
			t.Logf("%d counters, %d bytes", n, buf.Len())
			src := lustre.NewSource(root, nil)
			for range 2 { // the second read goes through the kept descriptor
				got, err := src.Read(context.Background())
				require.NoError(t, err)
				require.Len(t, got, 1)
				require.Len(t, got[0].Counters, n)
				require.Zero(t, got[0].Malformed)
				require.Equal(t, uint64(n), got[0].Counters[fmt.Sprintf("c%04d", n-1)])
			}
		})
	}
}
