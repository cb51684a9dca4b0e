package block_test

import (
	"context"
	"errors"
	"fmt"
	"maps"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/delta"
	"sluice/pkg/internal/fixture"
	"sluice/pkg/mapping"
	"sluice/pkg/source"
	"sluice/pkg/source/block"
)

var _ source.Source = (*block.Source)(nil)

// all includes every device.
var all = block.Options{Include: ".*", Exclude: "^$"}

// newSource returns a Source on root, closed when the test ends.
func newSource(t testing.TB, root string, opts block.Options) *block.Source {
	t.Helper()
	src, err := block.NewSource(root, opts, nowFunc)
	require.NoError(t, err)
	t.Cleanup(func() { require.NoError(t, src.Close()) })
	return src
}

// read reads src once and fails the test on error.
func read(t testing.TB, src *block.Source) []source.Reading {
	t.Helper()
	rs, err := src.Read(context.Background())
	require.NoError(t, err)
	return rs
}

// keys returns the reading keys in order.
func keys(rs []source.Reading) []string {
	var ks []string
	for _, r := range rs {
		ks = append(ks, r.Key)
	}
	return ks
}

// byKey returns the counters of the reading with key k.
func byKey(t testing.TB, rs []source.Reading, k string) map[string]uint64 {
	t.Helper()
	for _, r := range rs {
		if r.Key == k {
			return r.Counters
		}
	}
	t.Fatalf("no reading %q in %v", k, keys(rs))
	return nil
}

func TestSourceMixedDefaults(t *testing.T) {
	t.Parallel()
	src := newSource(t, fixture.Path(t, "block", "mixed"), block.Options{})
	require.Equal(t, "block", src.Name())
	got := read(t, src)
	require.Equal(t, []string{"block:sda", "block:sdb", "block:nvme0n1", "block:vda", "block:xvdb", "block:mmcblk0"}, keys(got))
	// vda: 254 0 vda 103129 23301 4470418 80791 64028 67760 4953480 56510 0
	// 27184 146940 72 0 7175408 9481 966 158; in_flight (0) is not reported.
	require.Equal(t, source.Reading{
		Key:  "block:vda",
		Time: fixedNow,
		Counters: map[string]uint64{
			"reads": 103129, "reads_merged": 23301, "sectors_read": 4470418, "read_ms": 80791,
			"writes": 64028, "writes_merged": 67760, "sectors_written": 4953480, "write_ms": 56510,
			"io_ticks_ms": 27184, "weighted_ms": 146940,
			"discards": 72, "discards_merged": 0, "sectors_discarded": 7175408, "discard_ms": 9481,
			"flushes": 966, "flush_ms": 158,
			"read_bytes": 4470418 * 512, "write_bytes": 4953480 * 512,
		},
	}, got[3])
	for _, r := range got {
		require.Empty(t, r.Epoch)
		require.Zero(t, r.Malformed)
		require.Equal(t, fixedNow, r.Time)
	}
}

func TestSourceIncludeExclude(t *testing.T) {
	t.Parallel()
	root := fixture.Path(t, "block", "mixed")
	tests := []struct {
		name    string
		input   block.Options
		want    []string // device names
		wantErr error    // from Read
	}{
		{
			name:  "defaults: whole disks",
			input: block.Options{},
			want:  []string{"sda", "sdb", "nvme0n1", "vda", "xvdb", "mmcblk0"},
		},
		{
			name:  "everything but the default exclusions",
			input: block.Options{Include: ".*"},
			want: []string{"sda", "sda1", "sda2", "sdb", "nvme0n1", "nvme0n1p1", "nvme0n1p2",
				"vda", "vda1", "xvdb", "mmcblk0", "mmcblk0p1", "mmcblk0boot0"},
		},
		{
			name:  "everything",
			input: all,
			want: []string{"loop0", "loop1", "loop2", "sda", "sda1", "sda2", "sdb", "sr0",
				"nvme0n1", "nvme0n1p1", "nvme0n1p2", "dm-0", "dm-1", "md0", "zram0", "ram0",
				"vda", "vda1", "xvdb", "mmcblk0", "mmcblk0p1", "mmcblk0boot0"},
		},
		{
			name:  "device-mapper volumes only",
			input: block.Options{Include: `^dm-\d+$`, Exclude: "^$"},
			want:  []string{"dm-0", "dm-1"},
		},
		{
			name:  "default include, own exclude",
			input: block.Options{Exclude: "^(sd|mmc)"},
			want:  []string{"nvme0n1", "vda", "xvdb"},
		},
		{
			name:  "partitions of sda",
			input: block.Options{Include: `^sda\d+$`},
			want:  []string{"sda1", "sda2"},
		},
		{
			name:    "nothing matches",
			input:   block.Options{Include: "^hdz$"},
			wantErr: source.ErrNoData,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			src := newSource(t, root, tt.input)
			got, err := src.Read(context.Background())
			if tt.wantErr != nil {
				require.ErrorIs(t, err, tt.wantErr)
				require.Empty(t, got)
				return
			}
			require.NoError(t, err)
			var names []string
			for _, k := range keys(got) {
				names = append(names, strings.TrimPrefix(k, "block:"))
			}
			require.Equal(t, tt.want, names)
		})
	}
}

func TestNewSourceBadPattern(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   block.Options
		wantErr string
	}{
		{name: "include", input: block.Options{Include: "sd("}, wantErr: "include pattern"},
		{name: "exclude", input: block.Options{Exclude: "[loop"}, wantErr: "exclude pattern"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			src, err := block.NewSource(t.TempDir(), tt.input, nowFunc)
			require.ErrorContains(t, err, tt.wantErr)
			require.Nil(t, src)
		})
	}
}

func TestSourceCountersByLayout(t *testing.T) {
	t.Parallel()
	base := []string{
		"reads", "reads_merged", "sectors_read", "read_ms",
		"writes", "writes_merged", "sectors_written", "write_ms",
		"io_ticks_ms", "weighted_ms", "read_bytes", "write_bytes",
	}
	discards := []string{"discards", "discards_merged", "sectors_discarded", "discard_ms"}
	flushes := []string{"flushes", "flush_ms"}
	tests := []struct {
		name  string
		input string // fixture case
		want  []string
	}{
		{name: "14 fields", input: "v4_17_14fields", want: base},
		{name: "18 fields", input: "v4_18_18fields", want: slices.Concat(base, discards)},
		{name: "20 fields", input: "v5_5_20fields", want: slices.Concat(base, discards, flushes)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got := read(t, newSource(t, fixture.Path(t, "block", tt.input), all))
			require.NotEmpty(t, got)
			for _, r := range got {
				require.ElementsMatch(t, tt.want, slices.Collect(maps.Keys(r.Counters)), r.Key)
				require.Equal(t, r.Counters["sectors_read"]*512, r.Counters["read_bytes"])
				require.Equal(t, r.Counters["sectors_written"]*512, r.Counters["write_bytes"])
			}
		})
	}
}

// TestSourceWrap reads wrap_1 and then wrap_2 through one Source. The
// expected deltas, worked out by hand (2^32 = 4294967296):
//
//	sda read_ms      4294967000 -> 704:        (2^32-4294967000) + 704  = 296+704   = 1000
//	sda write_ms     4294960000 -> 2704:       (2^32-4294960000) + 2704 = 7296+2704 = 10000
//	sda io_ticks_ms  4294967295 -> 499:        1 + 499                              = 500
//	sda weighted_ms  4294961704 -> 5448:       5592 + 5448 = 1000+10000+40          = 11040
//	sda flush_ms     2000 -> 2040, no wrap                                         = 40
//	sdb read_ms      4294967000 -> 4294967200, near 2^32 but no wrap               = 200
//	nvme0n1 discard_ms  4294967290 -> 6:       6 + 6                                = 12
//	nvme0n1 flush_ms    4294967000 -> 300:     296 + 300                            = 596
//	nvme0n1 weighted_ms 2000123154 -> 2000124762, no wrap: 100+900+12+596           = 1608
func TestSourceWrap(t *testing.T) {
	t.Parallel()
	root := procRoot(t, string(fixture.Read(t, "block", "wrap_1", "diskstats")))
	src := newSource(t, root, block.Options{})
	first := read(t, src)
	// Until a wrap is seen the values are the raw ones.
	require.Equal(t, uint64(4294967000), byKey(t, first, "block:sda")["read_ms"])

	writeFile(t, root, string(fixture.Read(t, "block", "wrap_2", "diskstats")))
	second := read(t, src)
	require.Equal(t, []string{"block:sda", "block:sdb", "block:nvme0n1"}, keys(second))

	sda := byKey(t, second, "block:sda")
	require.Equal(t, uint64(1<<32+704), sda["read_ms"])
	require.Equal(t, uint64(1<<32+2704), sda["write_ms"])
	require.Equal(t, uint64(1<<32+499), sda["io_ticks_ms"])
	require.Equal(t, uint64(1<<32+5448), sda["weighted_ms"])
	require.Equal(t, uint64(1000100), sda["reads"], "counts are passed as read")

	want := map[string]map[string]uint64{
		"block:sda": {
			"reads": 100, "reads_merged": 10, "sectors_read": 8000, "read_ms": 1000,
			"writes": 200, "writes_merged": 20, "sectors_written": 16000, "write_ms": 10000,
			"io_ticks_ms": 500, "weighted_ms": 11040,
			"discards": 0, "discards_merged": 0, "sectors_discarded": 0, "discard_ms": 0,
			"flushes": 10, "flush_ms": 40,
			"read_bytes": 8000 * 512, "write_bytes": 16000 * 512,
		},
		"block:sdb": {
			"reads": 10, "reads_merged": 0, "sectors_read": 800, "read_ms": 200,
			"writes": 0, "writes_merged": 0, "sectors_written": 0, "write_ms": 0,
			"io_ticks_ms": 100, "weighted_ms": 200,
			"discards": 0, "discards_merged": 0, "sectors_discarded": 0, "discard_ms": 0,
			"flushes": 0, "flush_ms": 0,
			"read_bytes": 800 * 512, "write_bytes": 0,
		},
		"block:nvme0n1": {
			"reads": 500, "reads_merged": 10, "sectors_read": 40000, "read_ms": 100,
			"writes": 900, "writes_merged": 30, "sectors_written": 72000, "write_ms": 900,
			"io_ticks_ms": 400, "weighted_ms": 1608,
			"discards": 2, "discards_merged": 0, "sectors_discarded": 100, "discard_ms": 12,
			"flushes": 10, "flush_ms": 596,
			"read_bytes": 40000 * 512, "write_bytes": 72000 * 512,
		},
	}
	for _, r := range second {
		got := map[string]uint64{}
		for k, v := range r.Counters {
			got[k] = v - byKey(t, first, r.Key)[k] // never negative across a wrap
		}
		require.Equal(t, want[r.Key], got, r.Key)
	}
	// Through the agent's own path (default mapping, then deltas), a wrap
	// is not a reset.
	differ := delta.NewDiffer()
	differ.Update(mapped(first))
	for _, d := range differ.Update(mapped(second)) {
		require.False(t, d.Reset, "a wrap is not a reset: %s", d.Key)
	}

	// The same file again: nothing moves, and the high part is kept.
	third := read(t, src)
	require.Equal(t, second, third)
}

// mapped sums readings onto metrics with the default mapping, as the agent
// does before taking deltas.
func mapped(rs []source.Reading) []delta.Instance {
	table := mapping.Default()
	out := make([]delta.Instance, len(rs))
	for i, r := range rs {
		out[i] = delta.Instance{Key: r.Key, Epoch: r.Epoch}
		table.Apply("block", r.Counters, &out[i].Values)
	}
	return out
}

// TestSourceUnwrapLongRun drives one device's read_ms through many wraps:
// the true value grows by about 0.7 * 2^31 per read, the file shows it
// modulo 2^32, and the Source must report the true value less the whole
// multiples of 2^32 it had before the first read.
func TestSourceUnwrapLongRun(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	src := newSource(t, root, block.Options{})
	const step = 1500000000 // < 2^31
	trueMs := uint64(3<<32 + 4000000000)
	base := trueMs &^ (1<<32 - 1)
	reads := uint64(1000)
	for i := range 40 {
		writeFile(t, root, formatAll(dev(8, 0, "sda", reads, 0, 8*reads, trueMs%(1<<32), reads, 0, 8*reads, 7, 0, 1, 9)))
		got := byKey(t, read(t, src), "block:sda")
		require.Equal(t, trueMs-base, got["read_ms"], "read %d", i)
		trueMs += step
		reads += 10
	}
	require.Greater(t, trueMs-base, uint64(10<<32), "wrapped many times")
}

// TestSourceReset reads reset_1 and then reset_2, where both disks were
// re-added: every counter drops. sda's read_ms, 3000000000 -> 12, would pass
// for a wrap on its own; the falling counts show it is not, so the value
// restarts at 12 rather than becoming 2^32+12.
func TestSourceReset(t *testing.T) {
	t.Parallel()
	root := procRoot(t, string(fixture.Read(t, "block", "reset_1", "diskstats")))
	src := newSource(t, root, block.Options{})
	differ := delta.NewDiffer()
	differ.Update(mapped(read(t, src)))

	writeFile(t, root, string(fixture.Read(t, "block", "reset_2", "diskstats")))
	got := read(t, src)
	raw, err := block.Parse(strings.NewReader(string(fixture.Read(t, "block", "reset_2", "diskstats"))))
	require.NoError(t, err)
	for i, d := range raw.Devices {
		c := got[i].Counters
		require.Equal(t, "block:"+d.Name, got[i].Key)
		require.Equal(t, d.ReadMs, c["read_ms"], "%s restarts from the raw value", d.Name)
		require.Equal(t, d.WriteMs, c["write_ms"])
		require.Equal(t, d.IOTicksMs, c["io_ticks_ms"])
		require.Equal(t, d.WeightedMs, c["weighted_ms"])
		require.Equal(t, d.DiscardMs, c["discard_ms"])
		require.Equal(t, d.FlushMs, c["flush_ms"])
		require.Equal(t, d.ReadsCompleted, c["reads"])
	}
	require.Equal(t, uint64(12), byKey(t, got, "block:sda")["read_ms"])
	deltas := differ.Update(mapped(got))
	require.Len(t, deltas, 2)
	for _, d := range deltas {
		require.True(t, d.Reset, d.Key)
	}
}

// TestSourceResetAfterWrap checks that a reset also drops the high part
// gathered by earlier wraps.
func TestSourceResetAfterWrap(t *testing.T) {
	t.Parallel()
	root := procRoot(t, string(fixture.Read(t, "block", "wrap_1", "diskstats")))
	src := newSource(t, root, block.Options{})
	read(t, src)
	writeFile(t, root, string(fixture.Read(t, "block", "wrap_2", "diskstats")))
	require.Equal(t, uint64(1<<32+704), byKey(t, read(t, src), "block:sda")["read_ms"])
	writeFile(t, root, string(fixture.Read(t, "block", "reset_2", "diskstats")))
	got := read(t, src)
	require.Equal(t, uint64(12), byKey(t, got, "block:sda")["read_ms"])
	require.Equal(t, uint64(8), byKey(t, got, "block:sda")["write_ms"])
}

// TestSourceMsDrops: a millisecond field that falls is a wrap when the fall
// looks like one, is part of a reset when a count falls too, and is
// otherwise held at its last value, so that one odd field never makes the
// whole device look reset (which would report its whole history at once).
func TestSourceMsDrops(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name   string
		before []uint64 // 11 statistics
		after  []uint64
		want   map[string]uint64 // subset of the counters after
	}{
		{
			// read_ms falls within the lower half: not a wrap; held.
			name:   "small drop",
			before: []uint64{10, 0, 80, 1000, 10, 0, 80, 1000, 0, 1500, 2000},
			after:  []uint64{11, 0, 88, 500, 11, 0, 88, 1100, 0, 1600, 1600},
			want:   map[string]uint64{"read_ms": 1000, "write_ms": 1100, "reads": 11, "weighted_ms": 2000},
		},
		{
			// From the upper half to the upper half: not a wrap either; held.
			name:   "drop within the upper half",
			before: []uint64{10, 0, 80, 4000000000, 10, 0, 80, 1000, 0, 1500, 2000},
			after:  []uint64{11, 0, 88, 3000000000, 11, 0, 88, 1100, 0, 1600, 1600},
			want:   map[string]uint64{"read_ms": 4000000000, "write_ms": 1100},
		},
		{
			// A count falls while read_ms looks like a wrap: a reset.
			name:   "count falls",
			before: []uint64{10, 0, 80, 4000000000, 10, 0, 80, 1000, 0, 1500, 2000},
			after:  []uint64{9, 0, 88, 5, 11, 0, 88, 1100, 0, 1600, 1600},
			want:   map[string]uint64{"read_ms": 5, "reads": 9},
		},
		{
			// The same drop with rising counts is a wrap.
			name:   "wrap",
			before: []uint64{10, 0, 80, 4000000000, 10, 0, 80, 1000, 0, 1500, 2000},
			after:  []uint64{11, 0, 88, 5, 11, 0, 88, 1100, 0, 1600, 2100},
			want:   map[string]uint64{"read_ms": 1<<32 + 5, "write_ms": 1100},
		},
		{
			// in_flight is a gauge: its fall is neither.
			name:   "in flight falls",
			before: []uint64{10, 0, 80, 100, 10, 0, 80, 100, 9, 150, 200},
			after:  []uint64{11, 0, 88, 110, 11, 0, 88, 110, 0, 160, 220},
			want:   map[string]uint64{"read_ms": 110},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			root := procRoot(t, formatAll(dev(8, 0, "sda", tt.before...)))
			src := newSource(t, root, block.Options{})
			read(t, src)
			writeFile(t, root, formatAll(dev(8, 0, "sda", tt.after...)))
			got := byKey(t, read(t, src), "block:sda")
			for k, v := range tt.want {
				require.Equal(t, v, got[k], k)
			}
			require.NotContains(t, got, "in_flight")
		})
	}
}

func TestSourceDevicesComeAndGo(t *testing.T) {
	t.Parallel()
	sda := func(readMs uint64) block.Device {
		return dev(8, 0, "sda", 10, 0, 80, readMs, 10, 0, 80, 0, 0, 1, 1)
	}
	sdb := func(reads, readMs uint64) block.Device {
		return dev(8, 16, "sdb", reads, 0, 8*reads, readMs, 0, 0, 0, 0, 0, 1, 1)
	}
	root := procRoot(t, formatAll(sda(1)))
	src := newSource(t, root, block.Options{})
	require.Equal(t, []string{"block:sda"}, keys(read(t, src)))

	// sdb appears, then wraps.
	writeFile(t, root, formatAll(sda(2), sdb(100, 4294967000)))
	require.Equal(t, []string{"block:sda", "block:sdb"}, keys(read(t, src)))
	writeFile(t, root, formatAll(sda(3), sdb(200, 100)))
	got := read(t, src)
	require.Equal(t, uint64(1<<32+100), byKey(t, got, "block:sdb")["read_ms"])

	// sdb goes away, and sda with it for one read.
	writeFile(t, root, "")
	_, err := src.Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData, "an empty file has no device")
	writeFile(t, root, formatAll(sda(4)))
	require.Equal(t, []string{"block:sda"}, keys(read(t, src)))

	// sdb comes back (re-added, counters from zero): it starts afresh, with
	// no high part left from before even though its count did not fall.
	writeFile(t, root, formatAll(sdb(300, 50), sda(5)))
	got = read(t, src)
	require.Equal(t, []string{"block:sdb", "block:sda"}, keys(got))
	require.Equal(t, uint64(50), byKey(t, got, "block:sdb")["read_ms"])
}

func TestSourceMissingFile(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	src := newSource(t, root, block.Options{})
	_, err := src.Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData)
	require.ErrorContains(t, err, filepath.Join(root, "diskstats"))

	// The file appears later.
	writeFile(t, root, string(fixture.Read(t, "block", "mixed", "diskstats")))
	require.Len(t, read(t, src), 6)

	// It goes away while open.
	require.NoError(t, os.Remove(filepath.Join(root, "diskstats")))
	_, err = src.Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData)

	// A missing procRoot is no data too.
	gone := newSource(t, filepath.Join(root, "nope"), block.Options{})
	_, err = gone.Read(context.Background())
	require.ErrorIs(t, err, source.ErrNoData)
}

func TestSourceInPlaceRewrite(t *testing.T) {
	t.Parallel()
	root := procRoot(t, string(fixture.Read(t, "block", "v5_5_20fields", "diskstats")))
	path := filepath.Join(root, "diskstats")
	before, err := os.Stat(path)
	require.NoError(t, err)
	src := newSource(t, root, all)
	require.Len(t, read(t, src), 5)

	// A shorter file written over the same inode: the kept descriptor reads
	// it from offset 0, and nothing of the longer old contents is left.
	writeFile(t, root, formatAll(dev(8, 0, "sda", 1, 0, 8, 1, 1, 0, 8, 1, 0, 1, 2)))
	after, err := os.Stat(path)
	require.NoError(t, err)
	require.True(t, os.SameFile(before, after), "os.WriteFile rewrites in place")
	got := read(t, src)
	require.Equal(t, []string{"block:sda"}, keys(got))
	require.Equal(t, uint64(1), got[0].Counters["reads"])
	require.Zero(t, got[0].Malformed)

	// And a longer one again.
	writeFile(t, root, string(fixture.Read(t, "block", "v5_5_20fields", "diskstats")))
	require.Len(t, read(t, src), 5)
	require.Equal(t, 1, block.Opens(src), "one open for all reads")
}

func TestSourceReplacedFile(t *testing.T) {
	t.Parallel()
	root := procRoot(t, string(fixture.Read(t, "block", "wrap_1", "diskstats")))
	src := newSource(t, root, block.Options{})
	read(t, src)
	replaceFile(t, root, string(fixture.Read(t, "block", "wrap_2", "diskstats")))
	got := read(t, src)
	require.Equal(t, 2, block.Opens(src), "a file replaced by rename is reopened at once")
	// The device state survives the reopen: the wrap is still seen.
	require.Equal(t, uint64(1<<32+704), byKey(t, got, "block:sda")["read_ms"])
	read(t, src)
	require.Equal(t, 2, block.Opens(src))
}

func TestSourceReadErrorReopens(t *testing.T) {
	t.Parallel()
	root := procRoot(t, string(fixture.Read(t, "block", "wrap_1", "diskstats")))
	path := filepath.Join(root, "diskstats")
	src := newSource(t, root, block.Options{})
	read(t, src)

	// A directory where the file was: it opens, but reading fails (EISDIR).
	require.NoError(t, os.Remove(path))
	require.NoError(t, os.Mkdir(path, 0o755))
	_, err := src.Read(context.Background())
	require.Error(t, err)
	require.False(t, errors.Is(err, source.ErrNoData), "%v", err)
	require.ErrorContains(t, err, path)
	require.Equal(t, 2, block.Opens(src))

	// The file is back: it is opened again, and the state from before the
	// failed read is intact, so the wrap is still seen.
	require.NoError(t, os.Remove(path))
	writeFile(t, root, string(fixture.Read(t, "block", "wrap_2", "diskstats")))
	got := read(t, src)
	require.Equal(t, 3, block.Opens(src))
	require.Equal(t, uint64(1<<32+704), byKey(t, got, "block:sda")["read_ms"])
}

func TestSourceMalformed(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string
		want    []int // Malformed per reading
		wantErr bool
	}{
		{
			name:  "fixture: counted once, on the first reading",
			input: string(fixture.Read(t, "block", "malformed", "diskstats")),
			want:  []int{12, 0, 0, 0},
		},
		{
			name:  "a repeated name counts as malformed",
			input: "8 0 sda 1 2 3 4 5 6 7 8 9 10 11\n8 0 sda 2 2 3 4 5 6 7 8 9 10 11\n",
			want:  []int{1},
		},
		{
			name:    "nothing but malformed lines is an error",
			input:   "8 0 sda 1 2 3\n8 16 sdb x\n",
			wantErr: true,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := newSource(t, procRoot(t, tt.input), all).Read(context.Background())
			if tt.wantErr {
				require.Error(t, err)
				require.False(t, errors.Is(err, source.ErrNoData))
				require.ErrorContains(t, err, "malformed")
				return
			}
			require.NoError(t, err)
			var malformed []int
			for _, r := range got {
				malformed = append(malformed, r.Malformed)
			}
			require.Equal(t, tt.want, malformed)
		})
	}
}

func TestSourceReadingsAreNotReused(t *testing.T) {
	t.Parallel()
	root := procRoot(t, string(fixture.Read(t, "block", "wrap_1", "diskstats")))
	src := newSource(t, root, block.Options{})
	first := read(t, src)
	keep := make(map[string]uint64)
	maps.Copy(keep, first[0].Counters)
	writeFile(t, root, string(fixture.Read(t, "block", "wrap_2", "diskstats")))
	read(t, src)
	require.Equal(t, keep, first[0].Counters)
}

func TestSourceLargeFile(t *testing.T) {
	t.Parallel()
	// 650 devices, about 40 KiB: more than the first buffer holds.
	const n = 650
	var b strings.Builder
	for i := range n {
		b.WriteString(format(dev(65, uint32(i), fmt.Sprintf("sd%c%c", 'a'+i/26%26, 'a'+i%26), uint64(i), 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16)))
	}
	require.Greater(t, b.Len(), 32<<10)
	src := newSource(t, procRoot(t, b.String()), block.Options{})
	got := read(t, src)
	require.Equal(t, n, len(got))
	require.Zero(t, got[0].Malformed)
	require.Equal(t, uint64(n-1), got[n-1].Counters["reads"])
	require.Equal(t, n, len(read(t, src)))
}

func TestSourceCanceled(t *testing.T) {
	t.Parallel()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	src := newSource(t, fixture.Path(t, "block", "mixed"), block.Options{})
	_, err := src.Read(ctx)
	require.ErrorIs(t, err, context.Canceled)
}

func TestSourceDefaults(t *testing.T) {
	t.Parallel()
	// Nil now means time.Now; the empty root (meaning /proc) is not read.
	src, err := block.NewSource(fixture.Path(t, "block", "mixed"), block.Options{}, nil)
	require.NoError(t, err)
	defer src.Close()
	got := read(t, src)
	require.False(t, got[0].Time.IsZero())
	_, err = block.NewSource("", block.Options{}, nil)
	require.NoError(t, err)
}
