package lustre_test

import (
	"bytes"
	"encoding/binary"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/lustre"
)

// fuzzSeeds returns every stats file and Write golden file in testdata/lustre.
func fuzzSeeds(f *testing.F) [][]byte {
	f.Helper()
	var seeds [][]byte
	err := filepath.WalkDir(fixture.Path(f, "lustre"), func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || (d.Name() != "stats" && !strings.HasSuffix(d.Name(), ".golden")) {
			return err
		}
		b, err := os.ReadFile(path)
		seeds = append(seeds, b)
		return err
	})
	require.NoError(f, err)
	require.NotEmpty(f, seeds)
	return seeds
}

func FuzzParse(f *testing.F) {
	for _, s := range fuzzSeeds(f) {
		f.Add(s)
	}
	f.Add([]byte("read_bytes 1 samples [bytes] 1 1 1\nread_bytes 2 samples [bytes] 2 2 2\n"))
	f.Add([]byte("snapshot_time 1.5 secs.usecs\r\nx 1 samples [[]\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		st, err := lustre.Parse(bytes.NewReader(data))
		require.NoError(t, err, "a bytes.Reader never fails")

		lines := bytes.Count(data, []byte("\n"))
		if len(data) > 0 && data[len(data)-1] != '\n' {
			lines++
		}
		require.LessOrEqual(t, st.Malformed+len(st.Counters), lines)
		for _, c := range st.Counters {
			require.NotEmpty(t, c.Name)
			require.NotEmpty(t, c.Unit)
			require.Contains(t, []int{0, 3, 4}, c.Fields)
		}
		require.LessOrEqual(t, len(st.Raw()), 2*len(st.Counters))
		require.Equal(t, st.HasStartTime, !st.StartTime.IsZero())

		// Whatever Write accepts must parse back to the same counters.
		var buf bytes.Buffer
		if err := lustre.Write(&buf, st, lustre.FormatV2_17); err != nil {
			require.ErrorIs(t, err, lustre.ErrBadCounter)
			return
		}
		back, err := lustre.Parse(&buf)
		require.NoError(t, err)
		require.Zero(t, back.Malformed, "%q", buf.String())
		require.Equal(t, nonZeroRaw(st), back.Raw())
		require.True(t, st.SnapshotTime.Equal(back.SnapshotTime))
		require.True(t, st.StartTime.Equal(back.StartTime))
	})
}

// fuzzNames and fuzzUnits are what FuzzWriteParse builds counters from.
var (
	fuzzNames = []string{
		"read_bytes", "write_bytes", "cached_read_bytes", "brw_read", "read",
		"write", "open", "close", "getattr", "ioctl", "getxattr_hits",
		"opencount", "openclosetime", "inode_permission",
	}
	fuzzUnits = []string{"bytes", "pages", "usecs", "usec", "reqs", "regs", "locks"}
)

// fuzzStats decodes a Stats from fuzz input. The first counter takes its
// name and unit verbatim from the fuzzer, to exercise Write's validation;
// the rest are decoded from seed, 19 bytes each, with unique names.
func fuzzStats(seed []byte, name, unit string, snap, start int64) lustre.Stats {
	st := lustre.Stats{}
	if snap > 0 {
		st.SnapshotTime = time.Unix(snap%(1<<40)+1, snap%1e9) // +1: a stamp of 0 reads back as absent
	}
	if start > 0 {
		st.StartTime = time.Unix(start%(1<<40)+1, start%1e9)
		st.HasStartTime = true
	}
	seen := map[string]bool{}
	add := func(c lustre.Counter) {
		if !seen[c.Name] {
			seen[c.Name] = true
			st.Counters = append(st.Counters, c)
		}
	}
	add(lustre.Counter{Name: name, Unit: unit, Samples: uint64(len(seed)), Fields: 3, Max: 9, Sum: 9})
	for i := 0; len(seed) >= 19; i++ {
		c := lustre.Counter{
			Unit:    fuzzUnits[int(seed[1])%len(fuzzUnits)],
			Fields:  []int{0, 3, 4}[int(seed[2])%3],
			Samples: binary.LittleEndian.Uint64(seed[3:]),
		}
		if n := int(seed[0]); n < len(fuzzNames) {
			c.Name = fuzzNames[n]
		} else {
			c.Name = "c" + strconv.Itoa(n)
		}
		if c.Fields > 0 {
			c.Sum = binary.LittleEndian.Uint64(seed[11:])
			c.Min, c.Max, c.SumSq = c.Sum/3, c.Sum/2, c.Sum
		}
		add(c)
		seed = seed[19:]
	}
	return st
}

func FuzzWriteParse(f *testing.F) {
	f.Add([]byte{}, "read_bytes", "bytes", uint8(0), int64(1718000123456789012), int64(0))
	f.Add(bytes.Repeat([]byte{1, 0, 1, 200, 1, 0, 0, 0, 0, 0, 0, 7, 7, 7, 7, 0, 0, 0, 0}, 4), "open", "usecs", uint8(5), int64(1), int64(1717990000))
	f.Add([]byte{2, 1, 2, 1, 0, 0, 0, 0, 0, 0, 0, 255, 255, 255, 255, 255, 255, 255, 255}, "bad name", "reqs", uint8(3), int64(-5), int64(7))
	f.Add([]byte{30, 6, 0, 9, 0, 0, 0, 0, 0, 0, 0, 1, 0, 0, 0, 0, 0, 0, 0}, "x", "[", uint8(1), int64(999999), int64(-1))
	f.Fuzz(func(t *testing.T, seed []byte, name, unit string, format uint8, snap, start int64) {
		formats := lustre.Formats()
		fm := formats[int(format)%len(formats)]
		st := fuzzStats(seed, name, unit, snap, start)

		var buf bytes.Buffer
		if err := lustre.Write(&buf, st, fm); err != nil {
			require.ErrorIs(t, err, lustre.ErrBadCounter)
			return
		}
		got, err := lustre.Parse(&buf)
		require.NoError(t, err)
		require.Zero(t, got.Malformed, "%q", buf.String())
		require.Equal(t, nonZeroRaw(st), got.Raw(), "Samples and byte sums survive %v", fm)

		wantSnap := st.SnapshotTime
		if fm == lustre.FormatV2_9 && !wantSnap.IsZero() {
			wantSnap = time.Unix(wantSnap.Unix(), int64(wantSnap.Nanosecond()/1000*1000))
		}
		require.True(t, wantSnap.Equal(got.SnapshotTime), "snapshot: want %v, got %v", wantSnap, got.SnapshotTime)
		if fm >= lustre.FormatV2_15 {
			require.Equal(t, st.HasStartTime, got.HasStartTime)
			require.True(t, st.StartTime.Equal(got.StartTime))
		} else {
			require.False(t, got.HasStartTime)
		}
	})
}
