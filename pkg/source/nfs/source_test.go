package nfs_test

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source"
	"sluice/pkg/source/nfs"
)

var _ source.Source = (*nfs.Source)(nil)

// t0 is the time of the first read in the Source tests.
var t0 = time.Unix(1718000000, 0)

// clock is an adjustable clock for NewSource.
type clock struct{ t time.Time }

func (c *clock) now() time.Time          { return c.t }
func (c *clock) advance(d time.Duration) { c.t = c.t.Add(d) }

// procRoot makes a fake proc root whose self/mountstats holds data and
// returns the root and the file's path.
func procRoot(t testing.TB, data []byte) (string, string) {
	t.Helper()
	root := t.TempDir()
	require.NoError(t, os.Mkdir(filepath.Join(root, "self"), 0o755))
	path := filepath.Join(root, "self", "mountstats")
	require.NoError(t, os.WriteFile(path, data, 0o644))
	return root, path
}

// newSource returns a Source over a fake proc root holding data.
func newSource(t testing.TB, data []byte, c *clock) (*nfs.Source, string) {
	t.Helper()
	root, path := procRoot(t, data)
	src := nfs.NewSource(root, c.now)
	t.Cleanup(func() { _ = src.Close() })
	return src, path
}

// keys returns the reading keys in order.
func keys(rs []source.Reading) []string {
	ks := []string{}
	for _, r := range rs {
		ks = append(ks, r.Key)
	}
	return ks
}

// epochOf is the Epoch of a mount of the given age first read at now.
func epochOf(now time.Time, age int64) string {
	return strconv.FormatInt(now.Unix()-age, 10)
}

func TestSourceReading(t *testing.T) {
	t.Parallel()
	c := &clock{t: t0}
	src, _ := newSource(t, fixture.Read(t, "nfs", "v4_2_single", "mountstats"), c)
	require.Equal(t, "nfs", src.Name())
	got, err := src.Read(context.Background())
	require.NoError(t, err)
	want := []source.Reading{{
		Key:   "nfs:fs01:/export/proj",
		Epoch: epochOf(t0, 86400),
		Time:  t0,
		Counters: map[string]uint64{
			"bytes.normal_read": 1048576, "bytes.normal_write": 2097152,
			"bytes.direct_read": 0, "bytes.direct_write": 0,
			"bytes.server_read": 1048576, "bytes.server_write": 2097152,
			"bytes.read_pages": 256, "bytes.write_pages": 512,
			"events.inode_revalidate": 100, "events.dentry_revalidate": 200,
			"events.data_invalidate": 3, "events.attr_invalidate": 4,
			"events.open": 50, "events.lookup": 60, "events.access": 70,
			"events.updatepage": 80, "events.readpage": 0, "events.readpages": 9,
			"events.writepage": 0, "events.writepages": 8, "events.getdents": 5,
			"events.setattr": 2, "events.flush": 7, "events.fsync": 1, "events.lock": 0,
			"events.release": 50, "events.congestion_wait": 0, "events.setattr_truncate": 0,
			"events.extend_write": 3, "events.silly_rename": 0, "events.short_read": 0,
			"events.short_write": 0, "events.jukebox_delay": 0, "events.pnfs_read": 0,
			"events.pnfs_write": 0,
			"op.NULL":           1, "op.READ": 256,
		},
	}}
	require.Equal(t, want, got)
}

func TestSourceFixtures(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name          string
		input         string
		want          []string // keys
		wantMalformed []int
		wantErr       error
	}{
		{name: "v3", input: "v3", want: []string{"nfs:fs02:/export/home"}, wantMalformed: []int{0}},
		{name: "shared superblock reported once", input: "shared_superblock", want: []string{"nfs:fs01:/export/proj"}, wantMalformed: []int{0}},
		{name: "mixed", input: "mixed", want: []string{"nfs:fs01:/export/proj", "nfs:fs02:/export/home"}, wantMalformed: []int{0, 0}},
		{name: "statvers 1.0", input: "statvers_1_0", want: []string{"nfs:oldsrv:/vol/data"}, wantMalformed: []int{0}},
		{name: "escaped device", input: "escaped", want: []string{"nfs:fs01:/export/team a"}, wantMalformed: []int{0}},
		{name: "nconnect", input: "nconnect", want: []string{"nfs:fs03:/export/scratch"}, wantMalformed: []int{0}},
		{
			// Partial mounts are left out; all 13 bad lines land on the one
			// reading.
			name: "malformed", input: "malformed", want: []string{"nfs:fs01:/export/proj"}, wantMalformed: []int{13},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			src, _ := newSource(t, fixture.Read(t, "nfs", tt.input, "mountstats"), &clock{t: t0})
			got, err := src.Read(context.Background())
			if tt.wantErr != nil {
				require.ErrorIs(t, err, tt.wantErr)
				return
			}
			require.NoError(t, err)
			require.Equal(t, tt.want, keys(got))
			for i, r := range got {
				require.Equal(t, tt.wantMalformed[i], r.Malformed, r.Key)
				require.Equal(t, t0, r.Time)
			}
		})
	}
}

func TestSourceMalformedHasNoEvents(t *testing.T) {
	t.Parallel()
	src, _ := newSource(t, fixture.Read(t, "nfs", "malformed", "mountstats"), &clock{t: t0})
	got, err := src.Read(context.Background())
	require.NoError(t, err)
	require.Len(t, got, 1)
	require.Len(t, got[0].Counters, nfs.NumBytes+3, "bytes and NULL, READ, LOOKUP; no events")
	require.Equal(t, uint64(30), got[0].Counters["op.LOOKUP"])
}

// twoMounts returns the shared_superblock fixture with the second mount's
// body changed by edit.
func twoMounts(t testing.TB, edit func(second string) string) []byte {
	t.Helper()
	data := string(fixture.Read(t, "nfs", "shared_superblock", "mountstats"))
	i := strings.Index(data, "device fs01:/export/proj mounted on /home/alice/proj")
	require.Positive(t, i)
	return []byte(data[:i] + edit(data[i:]))
}

func TestSourceSuperblockHeuristic(t *testing.T) {
	t.Parallel()
	const first, second = "nfs:fs01:/export/proj", "nfs:fs01:/export/proj@/home/alice/proj"
	tests := []struct {
		name  string
		input func(t testing.TB) []byte
		want  []string
	}{
		{
			name:  "identical counters and options: one superblock",
			input: func(t testing.TB) []byte { return fixture.Read(t, "nfs", "shared_superblock", "mountstats") },
			want:  []string{first},
		},
		{
			// The second mount was printed a moment later, after some I/O.
			name: "counters moved between the two prints, same options: one superblock",
			input: func(t testing.TB) []byte {
				return twoMounts(t, func(s string) string {
					return strings.Replace(s, "READ: 346 346", "READ: 347 347", 1)
				})
			},
			want: []string{first},
		},
		{
			name: "age one second later: still one superblock",
			input: func(t testing.TB) []byte {
				return twoMounts(t, func(s string) string { return strings.Replace(s, "age:\t86400", "age:\t86401", 1) })
			},
			want: []string{first},
		},
		{
			name: "nosharecache: two superblocks even with identical counters",
			input: func(t testing.TB) []byte {
				return twoMounts(t, func(s string) string { return strings.Replace(s, "hard,", "hard,nosharecache,", 1) })
			},
			want: []string{first, second},
		},
		{
			name: "different options and counters: two superblocks",
			input: func(t testing.TB) []byte {
				return twoMounts(t, func(s string) string {
					s = strings.Replace(s, "rsize=1048576", "rsize=65536", 1)
					return strings.Replace(s, "READ: 346 346", "READ: 9 9", 1)
				})
			},
			want: []string{first, second},
		},
		{
			// The counter rule: same device, same age, identical counters.
			name: "different options, identical counters: one superblock",
			input: func(t testing.TB) []byte {
				return twoMounts(t, func(s string) string { return strings.Replace(s, "rsize=1048576", "rsize=65536", 1) })
			},
			want: []string{first},
		},
		{
			name: "identical counters but created an hour apart: two superblocks",
			input: func(t testing.TB) []byte {
				return twoMounts(t, func(s string) string { return strings.Replace(s, "age:\t86400", "age:\t82800", 1) })
			},
			want: []string{first, second},
		},
		{
			name: "different devices are never merged",
			input: func(t testing.TB) []byte {
				return twoMounts(t, func(s string) string {
					return strings.Replace(s, "device fs01:/export/proj ", "device fs09:/export/proj ", 1)
				})
			},
			want: []string{first, "nfs:fs09:/export/proj"},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			src, _ := newSource(t, tt.input(t), &clock{t: t0})
			got, err := src.Read(context.Background())
			require.NoError(t, err)
			require.Equal(t, tt.want, keys(got))
		})
	}
}

// epochs maps reading keys to epochs.
func epochs(rs []source.Reading) map[string]string {
	m := map[string]string{}
	for _, r := range rs {
		m[r.Key] = r.Epoch
	}
	return m
}

func TestSourceRemount(t *testing.T) {
	t.Parallel()
	c := &clock{t: t0}
	src, path := newSource(t, fixture.Read(t, "nfs", "remount_1_before", "mountstats"), c)
	ctx := context.Background()
	const home, scratch = "nfs:fs02:/export/home", "nfs:fs01:/export/scratch"

	got, err := src.Read(ctx)
	require.NoError(t, err)
	first := epochs(got)
	require.Equal(t, map[string]string{home: epochOf(t0, 500000), scratch: epochOf(t0, 1000)}, first)

	// The same file read again, and then 5 s later with both ages 5 s on:
	// nothing restarted, so the epochs stay.
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, first, epochs(got))
	c.advance(5 * time.Second)
	require.NoError(t, os.WriteFile(path, fixture.Read(t, "nfs", "remount_2_later", "mountstats"), 0o644))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, first, epochs(got))

	// 10 s later /scratch was remounted (age 3): its epoch moves to the new
	// start time, /home's does not.
	c.advance(10 * time.Second)
	require.NoError(t, os.WriteFile(path, fixture.Read(t, "nfs", "remount_3_after", "mountstats"), 0o644))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{home, scratch}, keys(got))
	after := epochs(got)
	require.Equal(t, first[home], after[home])
	require.Equal(t, epochOf(c.t, 3), after[scratch])
	require.NotEqual(t, first[scratch], after[scratch])
	require.Less(t, got[1].Counters["op.READ"], uint64(1294), "new superblock, new counters")
}

// withAge returns the v4_2_single fixture with the given age.
func withAge(t testing.TB, age int) []byte {
	t.Helper()
	return []byte(strings.Replace(string(fixture.Read(t, "nfs", "v4_2_single", "mountstats")), "age:\t86400", "age:\t"+strconv.Itoa(age), 1))
}

func TestSourceEpochIgnoresJitter(t *testing.T) {
	t.Parallel()
	c := &clock{t: t0}
	src, path := newSource(t, withAge(t, 86400), c)
	ctx := context.Background()
	got, err := src.Read(ctx)
	require.NoError(t, err)
	epoch := got[0].Epoch

	// The kernel's whole-second age and the clock drift apart by a second
	// either way; the epoch must not follow. Also a reading in the same
	// second as the previous one, with an unchanged age.
	steps := []struct {
		advance time.Duration
		age     int
	}{
		{5 * time.Second, 86404},
		{5 * time.Second, 86410},
		{4500 * time.Millisecond, 86415},
		{5500 * time.Millisecond, 86419},
		{200 * time.Millisecond, 86419},
		{time.Hour, 86400 + 3600 + 19 + 1},
	}
	for i, s := range steps {
		c.advance(s.advance)
		require.NoError(t, os.WriteFile(path, withAge(t, s.age), 0o644))
		got, err := src.Read(ctx)
		require.NoError(t, err)
		require.Len(t, got, 1, "step %d", i)
		require.Equal(t, epoch, got[0].Epoch, "step %d", i)
	}
}

func TestSourceRemountAtTheSameStartSecondStillChangesEpoch(t *testing.T) {
	t.Parallel()
	c := &clock{t: t0}
	src, path := newSource(t, withAge(t, 2), c)
	got, err := src.Read(context.Background())
	require.NoError(t, err)
	epoch := got[0].Epoch
	require.Equal(t, epochOf(t0, 2), epoch)
	// Remounted at once, and the clock stepped back a second: now - age
	// gives the old start time again, yet the age went down.
	c.advance(-time.Second)
	require.NoError(t, os.WriteFile(path, withAge(t, 1), 0o644))
	got, err = src.Read(context.Background())
	require.NoError(t, err)
	require.Len(t, got, 1)
	require.Equal(t, epochOf(t0, 1), got[0].Epoch)
	require.NotEqual(t, epoch, got[0].Epoch)
}

func TestSourceKeyTakenOverByOlderSuperblock(t *testing.T) {
	t.Parallel()
	const dev, b = "nfs:fs01:/export/proj", "nfs:fs01:/export/proj@/home/alice/proj"
	// /proj (age 86400) and a nosharecache superblock at /home/alice/proj
	// (age 600).
	both := twoMounts(t, func(s string) string {
		s = strings.Replace(s, "hard,", "hard,nosharecache,", 1)
		return strings.Replace(s, "age:\t86400", "age:\t600", 1)
	})
	onlySecond := func(age int) []byte {
		s := string(both)
		s = s[strings.Index(s, "device fs01:/export/proj mounted on /home/alice/proj"):]
		return []byte("device proc mounted on /proc with fstype proc\n" +
			strings.Replace(s, "age:\t600", "age:\t"+strconv.Itoa(age), 1))
	}
	c := &clock{t: t0}
	src, path := newSource(t, both, c)
	ctx := context.Background()
	got, err := src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{dev, b}, keys(got))
	oldEpoch := got[0].Epoch

	// /proj is unmounted: the older /home/alice/proj superblock now comes
	// first and takes the plain key. Its counters are not a continuation of
	// /proj's, so that reading is left out once...
	c.advance(5 * time.Second)
	require.NoError(t, os.WriteFile(path, onlySecond(605), 0o644))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Empty(t, got)

	// ...and comes back with a new epoch on the next read.
	c.advance(5 * time.Second)
	require.NoError(t, os.WriteFile(path, onlySecond(610), 0o644))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{dev}, keys(got))
	require.NotEqual(t, oldEpoch, got[0].Epoch)
	require.Equal(t, epochOf(c.t, 610), got[0].Epoch)

	// The reverse: an older superblock appears before the key's current
	// one, so the key's age jumps ahead of the clock. Left out once too.
	c.advance(5 * time.Second)
	require.NoError(t, os.WriteFile(path, both, 0o644))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{b}, keys(got), "the plain key changed superblock; @ is new")
}

func TestSourceMissingFile(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	_, err := nfs.NewSource(root, nil).Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData)
	require.ErrorContains(t, err, filepath.Join(root, "self", "mountstats"))
}

func TestSourceNoNFSMounts(t *testing.T) {
	t.Parallel()
	src, _ := newSource(t, []byte("device sysfs mounted on /sys with fstype sysfs\ndevice /dev/sda2 mounted on / with fstype ext4\n"), &clock{t: t0})
	_, err := src.Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData)
}

func TestSourceAllMountsPartial(t *testing.T) {
	t.Parallel()
	data := fixture.Read(t, "nfs", "malformed", "mountstats")
	data = data[strings.Index(string(data), "device fs02:"):] // drop the good mount
	src, _ := newSource(t, data, &clock{t: t0})
	_, err := src.Read(context.Background())
	require.Error(t, err)
	require.False(t, errors.Is(err, source.ErrNoData), "NFS is mounted; the file is damaged")
}

func TestSourceFileRewrittenInPlace(t *testing.T) {
	t.Parallel()
	c := &clock{t: t0}
	src, path := newSource(t, fixture.Read(t, "nfs", "remount_1_before", "mountstats"), c)
	ctx := context.Background()
	before, err := os.Stat(path)
	require.NoError(t, err)

	got, err := src.Read(ctx)
	require.NoError(t, err)
	require.Len(t, got, 2)
	first := got[0]

	// os.WriteFile truncates and rewrites the same inode, as the kernel
	// regenerates a seq_file: the open descriptor must see the new content,
	// and a shorter file must not leave a stale tail.
	require.NoError(t, os.WriteFile(path, fixture.Read(t, "nfs", "v4_2_single", "mountstats"), 0o644))
	after, err := os.Stat(path)
	require.NoError(t, err)
	require.True(t, os.SameFile(before, after))
	got, err = src.Read(ctx)
	require.NoError(t, err)
	require.Equal(t, []string{"nfs:fs01:/export/proj"}, keys(got))
	require.Equal(t, uint64(256), got[0].Counters["op.READ"])
	require.Len(t, got[0].Counters, 37)

	// Buffers are reused, but an earlier reading stays intact.
	require.Equal(t, uint64(533), first.Counters["op.READ"])
	require.Equal(t, "nfs:fs02:/export/home", first.Key)
}

func TestSourceFileReplacedByRename(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	replace := func(t *testing.T, path, fixtureCase string) {
		tmp := path + ".new"
		require.NoError(t, os.WriteFile(tmp, fixture.Read(t, "nfs", fixtureCase, "mountstats"), 0o644))
		require.NoError(t, os.Rename(tmp, path))
	}

	t.Run("picked up within DefaultCheckEvery reads", func(t *testing.T) {
		t.Parallel()
		src, path := newSource(t, fixture.Read(t, "nfs", "v3", "mountstats"), &clock{t: t0})
		got, err := src.Read(ctx)
		require.NoError(t, err)
		require.Equal(t, []string{"nfs:fs02:/export/home"}, keys(got))

		replace(t, path, "v4_2_single")
		seenAt := 0
		for i := 1; i <= nfs.DefaultCheckEvery; i++ {
			got, err = src.Read(ctx)
			require.NoError(t, err)
			if keys(got)[0] == "nfs:fs01:/export/proj" {
				seenAt = i
				break
			}
		}
		require.NotZero(t, seenAt, "replacement not seen within %d reads", nfs.DefaultCheckEvery)
		require.Greater(t, seenAt, 1, "the check is not made on every read")
	})

	t.Run("at once with WithCheckEvery(1)", func(t *testing.T) {
		t.Parallel()
		root, path := procRoot(t, fixture.Read(t, "nfs", "v3", "mountstats"))
		src := nfs.NewSource(root, (&clock{t: t0}).now).WithCheckEvery(1)
		defer src.Close()
		_, err := src.Read(ctx)
		require.NoError(t, err)
		replace(t, path, "v4_2_single")
		got, err := src.Read(ctx)
		require.NoError(t, err)
		require.Equal(t, []string{"nfs:fs01:/export/proj"}, keys(got))

		// Removed: no data.
		require.NoError(t, os.Remove(path))
		_, err = src.Read(ctx)
		require.ErrorIs(t, err, source.ErrNoData)

		// And back.
		require.NoError(t, os.WriteFile(path, fixture.Read(t, "nfs", "v3", "mountstats"), 0o644))
		got, err = src.Read(ctx)
		require.NoError(t, err)
		require.Equal(t, []string{"nfs:fs02:/export/home"}, keys(got))
	})
}

func TestSourceLargeFile(t *testing.T) {
	t.Parallel()
	// More than the initial buffer: 60 NFSv4 mounts of different exports.
	one := string(fixture.Read(t, "nfs", "mixed", "mountstats"))
	var b strings.Builder
	for i := range 60 {
		b.WriteString(strings.ReplaceAll(one, "fs01:/export/proj", "fs01:/export/p"+strconv.Itoa(i)))
	}
	require.Greater(t, b.Len(), 256<<10)
	src, _ := newSource(t, []byte(b.String()), &clock{t: t0})
	got, err := src.Read(context.Background())
	require.NoError(t, err)
	// Each copy adds its own /proj export and the same /home mount, which
	// is one superblock however often it repeats.
	require.Len(t, got, 61)
	require.Equal(t, "nfs:fs01:/export/p59", got[60].Key)
}

func TestSourceUnreadablePath(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	// A directory opens but fails every read (EISDIR).
	require.NoError(t, os.MkdirAll(filepath.Join(root, "self", "mountstats"), 0o755))
	_, err := nfs.NewSource(root, nil).Read(context.Background())
	require.Error(t, err)
	require.False(t, errors.Is(err, source.ErrNoData))
}

func TestSourceCanceled(t *testing.T) {
	t.Parallel()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	src, _ := newSource(t, fixture.Read(t, "nfs", "v3", "mountstats"), &clock{t: t0})
	_, err := src.Read(ctx)
	require.ErrorIs(t, err, context.Canceled)
}

func TestSourceNilClock(t *testing.T) {
	t.Parallel()
	root, _ := procRoot(t, fixture.Read(t, "nfs", "v3", "mountstats"))
	src := nfs.NewSource(root, nil)
	defer src.Close()
	got, err := src.Read(context.Background())
	require.NoError(t, err)
	require.False(t, got[0].Time.IsZero(), "nil now means time.Now")
	require.NoError(t, src.Close())
	require.NoError(t, src.Close(), "Close twice is harmless")
	_, err = src.Read(context.Background())
	require.NoError(t, err, "Read after Close opens the file again")
}
