package block_test

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/source/block"
	"sluice/pkg/source/internal/sourcetest"
)

// TestSumsEqualMappedCounters checks the summing read path against the
// counter map through the default mapping, and through one that maps
// every field, on every fixture.
func TestSumsEqualMappedCounters(t *testing.T) {
	t.Parallel()
	every := mapping.Default()
	for i, name := range []string{"reads_merged", "read_ms", "writes_merged", "write_ms", "io_ticks_ms",
		"weighted_ms", "discards", "discards_merged", "sectors_discarded", "discard_ms", "flush_ms",
		"sectors_read", "sectors_written"} {
		every["block"][name] = metric.ID(i % int(metric.Count))
	}
	fixtures := fixture.Path(t, "block")
	cases, err := os.ReadDir(fixtures)
	require.NoError(t, err)
	for _, c := range cases {
		dir := filepath.Join(fixtures, c.Name())
		if _, err := os.Stat(filepath.Join(dir, "diskstats")); err != nil {
			continue
		}
		for name, table := range map[string]mapping.Table{"default": mapping.Default(), "every": every} {
			t.Run(c.Name()+"/"+name, func(t *testing.T) {
				opts := block.Options{Include: ".*"}
				plain, err := block.NewSource(dir, opts, nil)
				require.NoError(t, err)
				summing, err := block.NewSource(dir, opts, nil)
				require.NoError(t, err)
				sourcetest.SumsMatch(t, table, plain, summing)
			})
		}
	}
}
