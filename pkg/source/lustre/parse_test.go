package lustre_test

import (
	"errors"
	"io"
	"os"
	"strings"
	"testing"
	"testing/iotest"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/lustre"
)

func TestParseFixtures(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string // fixture case under testdata/lustre
		want    lustre.Stats
		wantErr bool
	}{
		{
			// lprocfs_status.c at v2_9_0: "%lu.%lu secs.usecs", so ".5" is 5 µs;
			// count-only "[regs]" ops from lproc_llite.c at v2_9_0.
			name:  "v2_9 unpadded usecs",
			input: "v2_9_usecs",
			want: lustre.Stats{
				SnapshotTime: time.Unix(1483228800, 5000),
				Counters: []lustre.Counter{
					{Name: "read_bytes", Samples: 128, Unit: "bytes", Fields: 3, Min: 4096, Max: 1048576, Sum: 33554432},
					{Name: "write_bytes", Samples: 64, Unit: "bytes", Fields: 3, Min: 4096, Max: 1048576, Sum: 16777216},
					{Name: "ioctl", Samples: 3, Unit: "regs"},
					{Name: "open", Samples: 40, Unit: "regs"},
					{Name: "close", Samples: 40, Unit: "regs"},
					{Name: "seek", Samples: 12, Unit: "regs"},
					{Name: "fsync", Samples: 2, Unit: "regs"},
					{Name: "getattr", Samples: 95, Unit: "regs"},
					{Name: "setattr", Samples: 4, Unit: "regs"},
					{Name: "truncate", Samples: 1, Unit: "regs"},
					{Name: "statfs", Samples: 6, Unit: "regs"},
					{Name: "alloc_inode", Samples: 20, Unit: "regs"},
					{Name: "inode_permission", Samples: 210, Unit: "regs"},
				},
			},
		},
		{
			// lprocfs_status.c at v2_12_0 (secs.nsecs, no start_time);
			// "[pages]" brw_* and dirty_pages_* from lproc_llite.c at v2_12_0.
			name:  "v2_12 regs and pages",
			input: "v2_12_regs",
			want: lustre.Stats{
				SnapshotTime: time.Unix(1546300800, 123456789),
				Counters: []lustre.Counter{
					{Name: "read_bytes", Samples: 10, Unit: "bytes", Fields: 3, Min: 4096, Max: 1048576, Sum: 5242880},
					{Name: "write_bytes", Samples: 6, Unit: "bytes", Fields: 3, Min: 8192, Max: 1048576, Sum: 3153920},
					{Name: "brw_read", Samples: 40, Unit: "pages", Fields: 3, Min: 1, Max: 256, Sum: 1280},
					{Name: "brw_write", Samples: 24, Unit: "pages", Fields: 3, Min: 2, Max: 256, Sum: 770},
					{Name: "dirty_pages_hits", Samples: 300, Unit: "regs"},
					{Name: "dirty_pages_misses", Samples: 45, Unit: "regs"},
					{Name: "ioctl", Samples: 2, Unit: "regs"},
					{Name: "open", Samples: 5, Unit: "regs"},
					{Name: "close", Samples: 5, Unit: "regs"},
					{Name: "getattr", Samples: 17, Unit: "regs"},
					{Name: "alloc_inode", Samples: 4, Unit: "regs"},
					{Name: "inode_permission", Samples: 33, Unit: "regs"},
				},
			},
		},
		{
			// lproc_llite.c at v2_14_0: "[usec]" latency with sumsq (LU-12631),
			// "[bytes]" with sumsq (LU-13733), ioctl count-only "[reqs]".
			name:  "v2_14 usec",
			input: "v2_14_usec",
			want: lustre.Stats{
				SnapshotTime: time.Unix(1609459200, 12345),
				Counters: []lustre.Counter{
					{Name: "read_bytes", Samples: 50, Unit: "bytes", Fields: 4, Min: 512, Max: 4194304, Sum: 52428800, SumSq: 150000000000000},
					{Name: "write_bytes", Samples: 20, Unit: "bytes", Fields: 4, Min: 4096, Max: 1048576, Sum: 10485760, SumSq: 8000000000000},
					{Name: "read", Samples: 50, Unit: "usec", Fields: 4, Min: 3, Max: 4100, Sum: 61000, SumSq: 120000000},
					{Name: "write", Samples: 20, Unit: "usec", Fields: 4, Min: 8, Max: 2300, Sum: 19000, SumSq: 30000000},
					{Name: "ioctl", Samples: 4, Unit: "reqs"},
					{Name: "open", Samples: 9, Unit: "usec", Fields: 4, Min: 12, Max: 640, Sum: 1900, SumSq: 700000},
					{Name: "close", Samples: 9, Unit: "usec", Fields: 4, Min: 5, Max: 90, Sum: 310, SumSq: 20000},
					{Name: "getattr", Samples: 31, Unit: "usec", Fields: 4, Min: 1, Max: 45, Sum: 280, SumSq: 4500},
				},
			},
		},
		{
			// lprocfs_stats_header at v2_15_0: start_time never set (prints 0),
			// snapshot_time from ktime_get() (since boot); fixed by LU-16231.
			name:  "v2_15_0 zero start_time is absent",
			input: "v2_15_0_zero_start",
			want: lustre.Stats{
				SnapshotTime: time.Unix(86412, 345678901),
				Counters: []lustre.Counter{
					{Name: "read_bytes", Samples: 8, Unit: "bytes", Fields: 4, Min: 4096, Max: 65536, Sum: 262144, SumSq: 8858370048},
					{Name: "write_bytes", Samples: 2, Unit: "bytes", Fields: 4, Min: 4096, Max: 4096, Sum: 8192, SumSq: 33554432},
					{Name: "read", Samples: 8, Unit: "usec", Fields: 4, Min: 2, Max: 140, Sum: 400, SumSq: 36000},
					{Name: "open", Samples: 3, Unit: "usec", Fields: 4, Min: 20, Max: 61, Sum: 120, SumSq: 5642},
					{Name: "ioctl", Samples: 1, Unit: "reqs"},
				},
			},
		},
		{
			// lprocfs_stats_header at v2_16_0 and llite_opcode_table in
			// lproc_llite.c at v2_16_0 ("[usecs]", LU-15642).
			name:  "v2_16 header, 34 counters",
			input: "v2_16_header",
			want: lustre.Stats{
				SnapshotTime: time.Unix(1718000123, 456789012),
				StartTime:    time.Unix(1717990000, 1),
				HasStartTime: true,
				Counters:     v216Counters(),
			},
		},
		{
			// lprocfs_status.c at master: name column %-35s from v2_17_54
			// (314dcc614b); cached_read_bytes from lproc_llite.c at master.
			name:  "v2_17 wide column",
			input: "v2_17_wide",
			want: lustre.Stats{
				SnapshotTime: time.Unix(1767225600, 999999999),
				StartTime:    time.Unix(1767139200, 500000000),
				HasStartTime: true,
				Counters: []lustre.Counter{
					{Name: "read_bytes", Samples: 4000, Unit: "bytes", Fields: 4, Min: 4096, Max: 16777216, Sum: 8589934592, SumSq: 36028797018963968},
					{Name: "write_bytes", Samples: 900, Unit: "bytes", Fields: 4, Min: 4096, Max: 4194304, Sum: 1887436800, SumSq: 3377699720527872},
					{Name: "cached_read_bytes", Samples: 2500, Unit: "bytes", Fields: 4, Min: 4096, Max: 1048576, Sum: 734003200, SumSq: 322122547200000},
					{Name: "read", Samples: 4000, Unit: "usecs", Fields: 4, Min: 1, Max: 120000, Sum: 9800000, SumSq: 980000000000},
					{Name: "write", Samples: 900, Unit: "usecs", Fields: 4, Min: 10, Max: 52000, Sum: 2700000, SumSq: 40000000000},
					{Name: "ioctl", Samples: 31, Unit: "reqs"},
					{Name: "open", Samples: 220, Unit: "usecs", Fields: 4, Min: 9, Max: 1900, Sum: 31000, SumSq: 12000000},
					{Name: "close", Samples: 220, Unit: "usecs", Fields: 4, Min: 3, Max: 400, Sum: 9100, SumSq: 900000},
					{Name: "getattr", Samples: 1300, Unit: "usecs", Fields: 4, Min: 1, Max: 600, Sum: 52000, SumSq: 6000000},
					{Name: "inode_permission", Samples: 5200, Unit: "usecs", Fields: 4, Min: 0, Max: 30, Sum: 41000, SumSq: 500000},
				},
			},
		},
		{
			// lprocfs_stats_seq_show layout with corrupt lines; see its README.
			name:  "malformed lines skipped and counted",
			input: "malformed_lines",
			want: lustre.Stats{
				SnapshotTime: time.Unix(1718000123, 456789012),
				StartTime:    time.Unix(1717990000, 1),
				HasStartTime: true,
				Counters: []lustre.Counter{
					{Name: "read_bytes", Samples: 1200, Unit: "bytes", Fields: 4, Min: 1, Max: 4194304, Sum: 2147483648, SumSq: 5764607523034234},
					{Name: "ioctl", Samples: 7, Unit: "reqs"},
					{Name: "fsync", Samples: 2, Unit: "usecs", Fields: 4, Min: 100, Max: 300, Sum: 400, SumSq: 100000},
					{Name: "getxattr_hits", Samples: 4, Unit: "reqs"},
				},
				Malformed: 10,
			},
		},
		{
			// llite_opcode_table at v2_16_0: ioctl and getxattr_hits are
			// count-only "[reqs]"; zero counters are not printed.
			name:  "count only",
			input: "count_only",
			want: lustre.Stats{
				SnapshotTime: time.Unix(1718000500, 500),
				StartTime:    time.Unix(1718000000, 250000000),
				HasStartTime: true,
				Counters: []lustre.Counter{
					{Name: "ioctl", Samples: 12, Unit: "reqs"},
					{Name: "getxattr_hits", Samples: 7, Unit: "reqs"},
				},
			},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			f, err := os.Open(fixture.Path(t, "lustre", tt.input, "stats"))
			require.NoError(t, err)
			defer f.Close()
			got, err := lustre.Parse(f)
			if tt.wantErr {
				require.Error(t, err)
				return
			}
			require.NoError(t, err)
			requireStatsEqual(t, tt.want, got)
		})
	}
}

// requireStatsEqual compares Stats, comparing times as instants.
func requireStatsEqual(t *testing.T, want, got lustre.Stats) {
	t.Helper()
	require.True(t, want.SnapshotTime.Equal(got.SnapshotTime), "SnapshotTime: want %v, got %v", want.SnapshotTime, got.SnapshotTime)
	require.True(t, want.StartTime.Equal(got.StartTime), "StartTime: want %v, got %v", want.StartTime, got.StartTime)
	require.Equal(t, want.HasStartTime, got.HasStartTime, "HasStartTime")
	require.Equal(t, want.Counters, got.Counters, "Counters (-want +got)")
	require.Equal(t, want.Malformed, got.Malformed, "Malformed")
}

func TestParseLines(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name          string
		input         string
		want          []lustre.Counter
		wantMalformed int
		wantSnapshot  time.Time
	}{
		{
			name:  "empty input",
			input: "",
		},
		{
			name:         "usecs header, six digits",
			input:        "snapshot_time 1483228800.123456 secs.usecs\n",
			wantSnapshot: time.Unix(1483228800, 123456000),
		},
		{
			name:          "usecs fraction of a million is invalid",
			input:         "snapshot_time 1483228800.1000000 secs.usecs\n",
			wantMalformed: 1,
		},
		{
			name:          "nsecs fraction of a billion is invalid",
			input:         "snapshot_time 1.1000000000 secs.nsecs\n",
			wantMalformed: 1,
		},
		{
			name:          "unknown stamp unit",
			input:         "snapshot_time 1.5 secs.msecs\n",
			wantMalformed: 1,
		},
		{
			name:          "stamp without dot",
			input:         "snapshot_time 15 secs.nsecs\n",
			wantMalformed: 1,
		},
		{
			name:  "tabs, CRLF and no trailing newline",
			input: "open\t5\tsamples\t[regs]\r\nclose 5 samples [regs]",
			want:  []lustre.Counter{{Name: "open", Samples: 5, Unit: "regs"}, {Name: "close", Samples: 5, Unit: "regs"}},
		},
		{
			name:  "unknown name and unit kept as printed",
			input: "hybrid_noswitch 3 samples [locks] 1 2 5\n",
			want:  []lustre.Counter{{Name: "hybrid_noswitch", Samples: 3, Unit: "locks", Fields: 3, Min: 1, Max: 2, Sum: 5}},
		},
		{
			name:  "largest values",
			input: "read_bytes 9223372036854775807 samples [bytes] 0 9223372036854775807 9223372036854775807 18446744073709551615\n",
			want:  []lustre.Counter{{Name: "read_bytes", Samples: 1<<63 - 1, Unit: "bytes", Fields: 4, Max: 1<<63 - 1, Sum: 1<<63 - 1, SumSq: 1<<64 - 1}},
		},
		{
			name:          "sumsq overflow",
			input:         "read_bytes 1 samples [bytes] 0 1 1 18446744073709551616\n",
			wantMalformed: 1,
		},
		{
			name:          "negative min",
			input:         "read 1 samples [usecs] -1 1 1 1\n",
			wantMalformed: 1,
		},
		{
			name:          "plus sign",
			input:         "read +1 samples [usecs]\n",
			wantMalformed: 1,
		},
		{
			name:          "header keyword as a counter",
			input:         "snapshot_time 1 samples [reqs]\n",
			wantMalformed: 1,
		},
		{
			name:          "name only",
			input:         "open\n",
			wantMalformed: 1,
		},
		{
			name:  "whitespace-only lines ignored",
			input: "   \n\t\n\n",
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := lustre.Parse(strings.NewReader(tt.input))
			require.NoError(t, err)
			if tt.want == nil {
				tt.want = []lustre.Counter{}
			}
			require.Equal(t, tt.want, got.Counters)
			require.Equal(t, tt.wantMalformed, got.Malformed)
			require.True(t, tt.wantSnapshot.Equal(got.SnapshotTime), "SnapshotTime: want %v, got %v", tt.wantSnapshot, got.SnapshotTime)
		})
	}
}

func TestParseLongLine(t *testing.T) {
	t.Parallel()
	long := "open 5 samples [regs]" + strings.Repeat(" ", 1<<20) + "\n"
	input := "ioctl 1 samples [reqs]\n" + long + "close 2 samples [regs]\n" + long[:10000]
	got, err := lustre.Parse(strings.NewReader(input))
	require.NoError(t, err)
	require.Equal(t, 2, got.Malformed)
	require.Equal(t, []lustre.Counter{
		{Name: "ioctl", Samples: 1, Unit: "reqs"},
		{Name: "close", Samples: 2, Unit: "regs"},
	}, got.Counters)
}

func TestParseReadError(t *testing.T) {
	t.Parallel()
	boom := errors.New("boom")
	r := io.MultiReader(strings.NewReader("ioctl 1 samples [reqs]\n"), iotest.ErrReader(boom))
	got, err := lustre.Parse(r)
	require.ErrorIs(t, err, boom)
	require.ErrorContains(t, err, "lustre")
	// What was read before the error is still returned.
	require.Equal(t, []lustre.Counter{{Name: "ioctl", Samples: 1, Unit: "reqs"}}, got.Counters)
}

func TestParseOneByteReads(t *testing.T) {
	t.Parallel()
	data := fixture.Read(t, "lustre", "v2_16_header", "stats")
	got, err := lustre.Parse(iotest.OneByteReader(strings.NewReader(string(data))))
	require.NoError(t, err)
	require.Equal(t, v216Counters(), got.Counters)
}

func TestRaw(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name  string
		input string // fixture case under testdata/lustre
		want  map[string]uint64
	}{
		{
			// Lustre ≤2.13 (lproc_llite.c at v2_12_0): "[pages]" sums count
			// as size sums; "[regs]" ops have only a count.
			name:  "v2_12 pages and bytes sums",
			input: "v2_12_regs",
			want: map[string]uint64{
				"read_bytes": 10, "read_bytes.sum": 5242880,
				"write_bytes": 6, "write_bytes.sum": 3153920,
				"brw_read": 40, "brw_read.sum": 1280,
				"brw_write": 24, "brw_write.sum": 770,
				"dirty_pages_hits": 300, "dirty_pages_misses": 45, "ioctl": 2,
				"open": 5, "close": 5, "getattr": 17, "alloc_inode": 4,
				"inode_permission": 33,
			},
		},
		{
			// Lustre 2.14 (lproc_llite.c at v2_14_0): latency sums are left out.
			name:  "v2_14 no latency sums",
			input: "v2_14_usec",
			want: map[string]uint64{
				"read_bytes": 50, "read_bytes.sum": 52428800,
				"write_bytes": 20, "write_bytes.sum": 10485760,
				"read": 50, "write": 20, "ioctl": 4, "open": 9, "close": 9,
				"getattr": 31,
			},
		},
		{
			// Lustre 2.16 (llite_opcode_table at v2_16_0): only [reqs] counters.
			name:  "count only",
			input: "count_only",
			want:  map[string]uint64{"ioctl": 12, "getxattr_hits": 7},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			st, err := lustre.Parse(strings.NewReader(string(fixture.Read(t, "lustre", tt.input, "stats"))))
			require.NoError(t, err)
			require.Equal(t, tt.want, st.Raw())
		})
	}
}

func TestRawFullSet(t *testing.T) {
	t.Parallel()
	st := lustre.Stats{Counters: v216Counters()}
	raw := st.Raw()
	require.Len(t, raw, 34+2, "34 counts plus read_bytes.sum and write_bytes.sum")
	require.Equal(t, uint64(2472242752), raw["read_bytes.sum"])
	require.Equal(t, uint64(161303766), raw["write_bytes.sum"])
	require.NotContains(t, raw, "read.sum")
	require.NotContains(t, raw, "opencount.sum")
	require.Equal(t, uint64(860), raw["inode_permission"])
}

func TestLookup(t *testing.T) {
	t.Parallel()
	st := lustre.Stats{Counters: v216Counters()}
	c, ok := st.Lookup("opencount")
	require.True(t, ok)
	require.Equal(t, uint64(139), c.Sum)
	_, ok = st.Lookup("splice")
	require.False(t, ok)
}
