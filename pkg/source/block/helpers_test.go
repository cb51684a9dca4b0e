package block_test

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/source/block"
)

// wellFormed lists the fixture cases without malformed lines, which the
// reference parser must read exactly as Parse does.
var wellFormed = []string{
	"v4_17_14fields", "v4_18_18fields", "v5_5_20fields", "mixed",
	"wrap_1", "wrap_2", "reset_1", "reset_2",
}

// fixedNow is the clock the Source tests inject.
var fixedNow = time.Unix(1718000200, 0)

func nowFunc() time.Time { return fixedNow }

// dev builds a Device from its statistics in file order (fields 1 to 11,
// 15 or 17), the way a line lists them.
func dev(major, minor uint32, name string, v ...uint64) block.Device {
	var a [17]uint64
	copy(a[:], v)
	return block.Device{
		Major: major, Minor: minor, Name: name, Fields: 3 + len(v),
		ReadsCompleted: a[0], ReadsMerged: a[1], SectorsRead: a[2], ReadMs: a[3],
		WritesCompleted: a[4], WritesMerged: a[5], SectorsWritten: a[6], WriteMs: a[7],
		InFlight: a[8], IOTicksMs: a[9], WeightedMs: a[10],
		DiscardsCompleted: a[11], DiscardsMerged: a[12], SectorsDiscarded: a[13], DiscardMs: a[14],
		FlushesCompleted: a[15], FlushMs: a[16],
	}
}

// format prints d as diskstats_show does (block/genhd.c), with as many
// statistics as d.Fields says.
func format(d block.Device) string {
	v := []uint64{
		d.ReadsCompleted, d.ReadsMerged, d.SectorsRead, d.ReadMs,
		d.WritesCompleted, d.WritesMerged, d.SectorsWritten, d.WriteMs,
		d.InFlight, d.IOTicksMs, d.WeightedMs,
		d.DiscardsCompleted, d.DiscardsMerged, d.SectorsDiscarded, d.DiscardMs,
		d.FlushesCompleted, d.FlushMs,
	}
	var b strings.Builder
	fmt.Fprintf(&b, "%4d %7d %s", d.Major, d.Minor, d.Name)
	for _, x := range v[:d.Fields-3] {
		fmt.Fprintf(&b, " %d", x)
	}
	b.WriteByte('\n')
	return b.String()
}

// formatAll prints devices as one file.
func formatAll(devs ...block.Device) string {
	var b strings.Builder
	for _, d := range devs {
		b.WriteString(format(d))
	}
	return b.String()
}

// procRoot returns a fresh directory holding a diskstats file with data.
func procRoot(t testing.TB, data string) string {
	t.Helper()
	root := t.TempDir()
	writeFile(t, root, data)
	return root
}

// writeFile rewrites <root>/diskstats in place (same inode), as the
// kernel's file changes under an open descriptor.
func writeFile(t testing.TB, root, data string) {
	t.Helper()
	require.NoError(t, os.WriteFile(filepath.Join(root, "diskstats"), []byte(data), 0o644))
}

// replaceFile puts a new file at <root>/diskstats by rename, as a
// simulator writing atomically does.
func replaceFile(t testing.TB, root, data string) {
	t.Helper()
	tmp := filepath.Join(root, "diskstats.tmp")
	require.NoError(t, os.WriteFile(tmp, []byte(data), 0o644))
	require.NoError(t, os.Rename(tmp, filepath.Join(root, "diskstats")))
}

// bench8 is a 5.5+ file of eight whole disks, all included by default.
func bench8() string {
	var devs []block.Device
	for i := range 4 {
		n := uint64(i + 1)
		devs = append(devs,
			dev(8, uint32(16*i), "sd"+string(rune('a'+i)),
				302211*n, 12033*n, 40223310*n, 220113*n, 802210*n, 300221*n, 90223310*n, 1203344*n,
				n, 650221*n, 1475678*n, 0, 0, 0, 0, 22011*n, 30221*n),
			dev(259, uint32(i), fmt.Sprintf("nvme%dn1", i),
				903322*n, 4022*n, 120334010*n, 330221*n, 1402233*n, 502211*n, 402233010*n, 902211*n,
				2, 802233*n, 1455443*n, 20113*n, 0, 1022330220*n, 4022*n, 223011*n, 80221*n))
	}
	return formatAll(devs...)
}
