package lustre_test

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/source/internal/sourcetest"
	"sluice/pkg/source/lustre"
)

// TestSumsEqualMappedCounters checks the summing read path against the
// counter map through the default mapping, and through one that also maps
// a latency sum and an unknown counter, on every fixture and on a file
// whose names repeat.
func TestSumsEqualMappedCounters(t *testing.T) {
	t.Parallel()
	extra := mapping.Default()
	extra["lustre"]["getattr.sum"] = metric.OtherOps // usecs: never summed
	extra["lustre"]["no_such_counter"] = metric.OtherOps
	root := t.TempDir()
	fixtures := fixture.Path(t, "lustre")
	cases, err := os.ReadDir(fixtures)
	require.NoError(t, err)
	for _, c := range cases {
		if data, err := os.ReadFile(filepath.Join(fixtures, c.Name(), "stats")); err == nil {
			write(t, filepath.Join(root, c.Name(), "stats"), data)
		}
	}
	write(t, filepath.Join(root, "repeats", "stats"), []byte(
		"snapshot_time 1718000000.000000000 secs.nsecs\n"+
			"read_bytes 5 samples [bytes] 1 10 20 200\n"+
			"open 3 samples [usecs]\n"+
			"read_bytes 7 samples [bytes]\n"+ // later count wins, the earlier sum stays
			"open 4 samples [usecs]\n"+
			"write_bytes 2 samples [bytes] 1 1 2\n"+
			"write_bytes 9 samples [bytes] 1 1 9\n"))
	for name, table := range map[string]mapping.Table{"default": mapping.Default(), "extra": extra} {
		t.Run(name, func(t *testing.T) {
			sourcetest.SumsMatch(t, table, lustre.NewSource(root, nowFunc), lustre.NewSource(root, nowFunc))
		})
	}
}

// TestSumsEqualMappedCountersOverReads rewrites one mount's file with every
// fixture in turn, forwards and back, and checks each read of one summing
// source: what it keeps by line position from read to read (names and
// targets) must never change a sum.
func TestSumsEqualMappedCountersOverReads(t *testing.T) {
	t.Parallel()
	files := sourcetest.ForthAndBack(sourcetest.Fixtures(t, filepath.Join(fixture.Path(t, "lustre"), "*", "stats")))
	root := t.TempDir()
	path := filepath.Join(root, "scratch-ffff9a0c12345000", "stats")
	write(t, path, files[0])
	table := mapping.Default()
	plain, summing := lustre.NewSource(root, nowFunc), lustre.NewSource(root, nowFunc)
	summing.SumWith(table["lustre"])
	for i, data := range files {
		write(t, path, data)
		t.Logf("read %d", i)
		sourcetest.ReadsMatch(t, table, plain, summing)
	}
}

func write(t *testing.T, path string, data []byte) {
	t.Helper()
	require.NoError(t, os.MkdirAll(filepath.Dir(path), 0o755))
	require.NoError(t, os.WriteFile(path, data, 0o644))
}
