package block_test

import (
	"bytes"
	"errors"
	"io"
	"strings"
	"testing"
	"testing/iotest"

	"github.com/prometheus/procfs/blockdevice"
	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/block"
)

func TestParseFixtures(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string // fixture case under testdata/block
		want    block.Stats
		wantErr bool
	}{
		{
			// diskstats_show in block/genhd.c at v4.17: 11 statistics.
			name:  "14 fields before 4.18",
			input: "v4_17_14fields",
			want: block.Stats{Devices: []block.Device{
				dev(8, 0, "sda", 184523, 3021, 9620418, 98231, 420311, 110250, 30211746, 1520443, 0, 401220, 1618690),
				dev(8, 1, "sda1", 410, 0, 12630, 201, 2, 0, 2, 0, 0, 160, 201),
				dev(8, 2, "sda2", 184020, 3021, 9604700, 97990, 420309, 110250, 30211744, 1520443, 0, 401010, 1618430),
				dev(8, 16, "sdb", 5023, 12, 1283904, 40122, 1022, 301, 523200, 13201, 2, 30110, 53323),
				dev(253, 0, "dm-0", 183900, 0, 9600100, 101233, 530510, 0, 30211744, 2120311, 0, 402002, 2221544),
				dev(7, 0, "loop0", 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0),
			}},
		},
		{
			// 4.18 adds discards (iostats.rst "4.18+ diskstats").
			name:  "18 fields from 4.18",
			input: "v4_18_18fields",
			want: block.Stats{Devices: []block.Device{
				dev(8, 0, "sda", 220301, 4010, 11230554, 120334, 500220, 140330, 41022310, 1822001, 0, 480110, 1942335, 0, 0, 0, 0),
				dev(8, 1, "sda1", 220110, 4010, 11220034, 120300, 500210, 140330, 41022300, 1822001, 0, 480010, 1942301, 0, 0, 0, 0),
				dev(259, 0, "nvme0n1", 902211, 1022, 80231110, 210334, 1200334, 402211, 150334022, 980221, 1, 620330, 1190555, 3022, 0, 402220304, 2201),
				dev(259, 1, "nvme0n1p1", 902001, 1022, 80220110, 210301, 1200301, 402211, 150333900, 980201, 1, 620301, 1190502, 3020, 0, 402220000, 2200),
			}},
		},
		{
			// 5.5 adds flushes; spelled out field by field once, to pin
			// the order of iostats.rst "Field 1" to "Field 17".
			name:  "20 fields from 5.5",
			input: "v5_5_20fields",
			want: block.Stats{Devices: []block.Device{
				{
					Major: 259, Minor: 0, Name: "nvme0n1", Fields: 20,
					ReadsCompleted: 1203344, ReadsMerged: 20112, SectorsRead: 98231004, ReadMs: 402233,
					WritesCompleted: 2203455, WritesMerged: 602311, SectorsWritten: 320445022, WriteMs: 1402211,
					InFlight: 0, IOTicksMs: 930221, WeightedMs: 1897687,
					DiscardsCompleted: 8022, DiscardsMerged: 0, SectorsDiscarded: 802330440, DiscardMs: 3022,
					FlushesCompleted: 120334, FlushMs: 90221,
				},
				dev(259, 1, "nvme0n1p1", 2211, 0, 90330, 301, 12, 0, 30, 5, 0, 330, 306, 0, 0, 0, 0, 0, 0),
				dev(259, 2, "nvme0n1p2", 1201100, 20112, 98140560, 401920, 2203440, 602311, 320444990, 1402201, 0, 930001, 1807143, 8022, 0, 802330440, 3022, 0, 0),
				dev(259, 3, "nvme1n1", 33022, 201, 4022110, 22011, 4402, 110, 802240, 3022, 1, 20334, 25367, 0, 0, 0, 0, 2201, 334),
				dev(8, 0, "sda", 40221, 2201, 3022410, 30221, 9022, 4401, 1022030, 22110, 0, 40221, 54532, 0, 0, 0, 0, 1022, 2201),
			}},
		},
		{
			// See testdata/block/malformed/README for each bad line.
			name:  "malformed lines skipped and counted",
			input: "malformed",
			want: block.Stats{
				Devices: []block.Device{
					dev(8, 0, "sda", 4022, 110, 320110, 2201, 1022, 40, 80220, 1203, 0, 3300, 3404, 0, 0, 0, 0, 120, 0),
					dev(8, 160, "sdk", 18446744073709551615, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0),
					dev(8, 176, "sdl", 7, 0, 56, 3, 2, 0, 16, 1, 0, 4, 4, 0, 0, 0, 0),
					dev(259, 0, "nvme0n1", 903322, 4022, 120334010, 330221, 1402233, 502211, 402233010, 902211, 2, 802233, 1455443, 20113, 0, 1022330220, 4022, 223011, 80221),
				},
				Malformed: 12,
			},
		},
		{
			// Step 1 of the wrap sequence: ms fields just under 2^32.
			name:  "wrap step 1",
			input: "wrap_1",
			want: block.Stats{Devices: []block.Device{
				dev(8, 0, "sda", 1000000, 5000, 80000000, 4294967000, 2000000, 90000, 160000000, 4294960000, 3, 4294967295, 4294961704, 0, 0, 0, 0, 500, 2000),
				dev(8, 16, "sdb", 30000, 100, 2400000, 4294967000, 1000, 10, 80000, 0, 0, 1000000, 4294967000, 0, 0, 0, 0, 0, 0),
				dev(259, 0, "nvme0n1", 5000000, 30000, 400000000, 123456, 7000000, 80000, 900000000, 2000000000, 0, 3000000, 2000123154, 800, 0, 4000000, 4294967290, 90000, 4294967000),
			}},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := block.Parse(bytes.NewReader(fixture.Read(t, "block", tt.input, "diskstats")))
			if tt.wantErr {
				require.Error(t, err)
				return
			}
			require.NoError(t, err)
			require.Equal(t, tt.want, got)
		})
	}
}

func TestParseMixed(t *testing.T) {
	t.Parallel()
	got, err := block.Parse(bytes.NewReader(fixture.Read(t, "block", "mixed", "diskstats")))
	require.NoError(t, err)
	require.Zero(t, got.Malformed)
	var names []string
	for _, d := range got.Devices {
		require.Equal(t, 20, d.Fields, d.Name)
		names = append(names, d.Name)
	}
	require.Equal(t, []string{
		"loop0", "loop1", "loop2", "sda", "sda1", "sda2", "sdb", "sr0",
		"nvme0n1", "nvme0n1p1", "nvme0n1p2", "dm-0", "dm-1", "md0", "zram0", "ram0",
		"vda", "vda1", "xvdb", "mmcblk0", "mmcblk0p1", "mmcblk0boot0",
	}, names)
	require.Equal(t, dev(254, 0, "vda", 103129, 23301, 4470418, 80791, 64028, 67760, 4953480, 56510, 0, 27184, 146940, 72, 0, 7175408, 9481, 966, 158), got.Devices[16])
}

// TestParseAgreesWithProcfs reads every well-formed fixture with the
// reference parser and checks that Parse gives the same numbers.
// reference: github.com/prometheus/procfs v0.23.0 blockdevice/stats.go
func TestParseAgreesWithProcfs(t *testing.T) {
	t.Parallel()
	for _, name := range wellFormed {
		t.Run(name, func(t *testing.T) {
			t.Parallel()
			dir := fixture.Path(t, "block", name)
			fs, err := blockdevice.NewFS(dir, dir)
			require.NoError(t, err)
			ref, err := fs.ProcDiskstats()
			require.NoError(t, err)

			got, err := block.Parse(bytes.NewReader(fixture.Read(t, "block", name, "diskstats")))
			require.NoError(t, err)
			require.Zero(t, got.Malformed)
			require.Len(t, got.Devices, len(ref))
			for i, r := range ref {
				want := block.Device{
					Major: r.MajorNumber, Minor: r.MinorNumber, Name: r.DeviceName, Fields: r.IoStatsCount,
					ReadsCompleted: r.ReadIOs, ReadsMerged: r.ReadMerges, SectorsRead: r.ReadSectors, ReadMs: r.ReadTicks,
					WritesCompleted: r.WriteIOs, WritesMerged: r.WriteMerges, SectorsWritten: r.WriteSectors, WriteMs: r.WriteTicks,
					InFlight: r.IOsInProgress, IOTicksMs: r.IOsTotalTicks, WeightedMs: r.WeightedIOTicks,
					DiscardsCompleted: r.DiscardIOs, DiscardsMerged: r.DiscardMerges, SectorsDiscarded: r.DiscardSectors, DiscardMs: r.DiscardTicks,
					FlushesCompleted: r.FlushRequestsCompleted, FlushMs: r.TimeSpentFlushing,
				}
				require.Equal(t, want, got.Devices[i])
			}
		})
	}
}

func TestParseLines(t *testing.T) {
	t.Parallel()
	good := "   8       0 sda 1 2 3 4 5 6 7 8 9 10 11\n"
	sda := dev(8, 0, "sda", 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11)
	// pad returns good with blanks inserted before the newline so that the
	// line, newline included, is n bytes long.
	pad := func(n int) string {
		return good[:len(good)-1] + strings.Repeat(" ", n-len(good)) + "\n"
	}
	tests := []struct {
		name    string
		input   string
		want    block.Stats
		wantErr bool
	}{
		{name: "empty", input: "", want: block.Stats{Devices: []block.Device{}}},
		{name: "blank lines only", input: "\n  \n\t\r\n", want: block.Stats{Devices: []block.Device{}}},
		{name: "one line", input: good, want: block.Stats{Devices: []block.Device{sda}}},
		{name: "no trailing newline", input: strings.TrimSuffix(good, "\n"), want: block.Stats{Devices: []block.Device{sda}}},
		{name: "line of 1024 bytes fits", input: pad(1024), want: block.Stats{Devices: []block.Device{sda}}},
		{name: "line of 1025 bytes is malformed", input: pad(1025) + good, want: block.Stats{Devices: []block.Device{sda}, Malformed: 1}},
		{name: "last line of 1024 bytes without newline", input: good + strings.TrimSuffix(pad(1025), "\n"), want: block.Stats{Devices: []block.Device{sda}, Malformed: 1}},
		{name: "very long line counted once", input: strings.Repeat("x", 5000) + "\n" + good, want: block.Stats{Devices: []block.Device{sda}, Malformed: 1}},
		{name: "minor over 2^32-1", input: "8 4294967296 sda 1 2 3 4 5 6 7 8 9 10 11\n", want: block.Stats{Devices: []block.Device{}, Malformed: 1}},
		{name: "max major and minor", input: "4294967295 4294967295 x 0 0 0 0 0 0 0 0 0 0 0\n", want: block.Stats{Devices: []block.Device{dev(4294967295, 4294967295, "x", 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0)}}},
		{name: "leading zeros", input: "008 000 sda 01 2 3 4 5 6 7 8 9 10 00000000000000000000011\n", want: block.Stats{Devices: []block.Device{sda}}},
		{name: "twenty digits over 2^64-1", input: "8 0 sda 99999999999999999999 2 3 4 5 6 7 8 9 10 11\n", want: block.Stats{Devices: []block.Device{}, Malformed: 1}},
		{name: "duplicates kept", input: good + good, want: block.Stats{Devices: []block.Device{sda, sda}}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := block.Parse(strings.NewReader(tt.input))
			if tt.wantErr {
				require.Error(t, err)
				return
			}
			require.NoError(t, err)
			require.Equal(t, tt.want, got)
			// The Source's in-memory parser gives the same result.
			buf := block.ParseBuf([]byte(tt.input))
			require.Equal(t, tt.want.Malformed, buf.Malformed)
			require.Equal(t, tt.want.Devices, append([]block.Device{}, buf.Devices...))
		})
	}
}

func TestParseReadError(t *testing.T) {
	t.Parallel()
	boom := errors.New("boom")
	// The second line is cut short by the error: "...10 1" could be read
	// as 11 statistics, so it must be dropped rather than parsed.
	r := io.MultiReader(
		strings.NewReader("8 0 sda 1 2 3 4 5 6 7 8 9 10 11\n8 16 sdb 1 2 3 4 5 6 7 8 9 10 1"),
		iotest.ErrReader(boom),
	)
	got, err := block.Parse(iotest.OneByteReader(r))
	require.ErrorIs(t, err, boom)
	require.ErrorContains(t, err, "diskstats")
	require.Equal(t, block.Stats{Devices: []block.Device{dev(8, 0, "sda", 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11)}}, got)
}

func TestParseFormatRoundTrip(t *testing.T) {
	t.Parallel()
	for _, name := range wellFormed {
		st, err := block.Parse(bytes.NewReader(fixture.Read(t, "block", name, "diskstats")))
		require.NoError(t, err)
		back, err := block.Parse(strings.NewReader(formatAll(st.Devices...)))
		require.NoError(t, err)
		require.Equal(t, st, back, name)
	}
}
