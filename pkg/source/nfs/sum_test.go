package nfs_test

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/source/internal/sourcetest"
	"sluice/pkg/source/nfs"
)

// TestSumsEqualMappedCounters checks the summing read path against
// Mount.Raw through the default mapping, and through one that also maps
// events, an unknown operation and a latency-free byte field, on every
// fixture.
func TestSumsEqualMappedCounters(t *testing.T) {
	t.Parallel()
	extra := mapping.Default()
	extra["nfs"]["events.inode_revalidate"] = metric.StatOps
	extra["nfs"]["events.fsync"] = metric.Syncs
	extra["nfs"]["op.NO_SUCH_OP"] = metric.OtherOps
	extra["nfs"]["bytes.server_read"] = metric.OtherOps
	fixtures := fixture.Path(t, "nfs")
	cases, err := os.ReadDir(fixtures)
	require.NoError(t, err)
	for _, c := range cases {
		data, err := os.ReadFile(filepath.Join(fixtures, c.Name(), "mountstats"))
		if err != nil {
			continue
		}
		for name, table := range map[string]mapping.Table{"default": mapping.Default(), "extra": extra} {
			t.Run(c.Name()+"/"+name, func(t *testing.T) {
				root, _ := procRoot(t, data)
				sourcetest.SumsMatch(t, table, nfs.NewSource(root, nil), nfs.NewSource(root, nil))
			})
		}
	}
}

// TestSumsEqualMappedCountersOverReads rewrites the file with every fixture
// in turn, forwards and back, and checks each read of one summing source:
// what the parser and the plan keep by line position from read to read
// must never change a sum.
func TestSumsEqualMappedCountersOverReads(t *testing.T) {
	t.Parallel()
	files := sourcetest.ForthAndBack(sourcetest.Fixtures(t, filepath.Join(fixture.Path(t, "nfs"), "*", "mountstats")))
	root, path := procRoot(t, files[0])
	table := mapping.Default()
	plain, summing := nfs.NewSource(root, nil).WithCheckEvery(1), nfs.NewSource(root, nil).WithCheckEvery(1)
	summing.SumWith(table["nfs"])
	for i, data := range files {
		require.NoError(t, os.WriteFile(path, data, 0o644))
		t.Logf("read %d", i)
		sourcetest.ReadsMatch(t, table, plain, summing)
	}
}
