package jobio_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/source/internal/sourcetest"
	"sluice/pkg/source/jobio"
)

// TestSumsEqualMappedCounters checks the summing read path against the
// counter map through the default mapping, and through one that maps
// every counter, on the shared-node fixture after its processes did I/O.
func TestSumsEqualMappedCounters(t *testing.T) {
	t.Parallel()
	every := mapping.Default()
	for i, name := range jobio.CounterNames() {
		every["jobio"][name] = metric.ID(i % int(metric.Count))
	}
	for name, table := range map[string]mapping.Table{"default": mapping.Default(), "every": every} {
		t.Run(name, func(t *testing.T) {
			t.Parallel()
			dir := t.TempDir()
			node := fixture.Path(t, "jobio", "shared_node")
			copyTree(t, filepath.Join(node, "cgroup"), filepath.Join(dir, "cgroup"))
			copyTree(t, filepath.Join(node, "proc"), filepath.Join(dir, "proc"))
			opts := jobio.Options{CgroupRoot: filepath.Join(dir, "cgroup"), ProcRoot: filepath.Join(dir, "proc")}
			plain, err := jobio.NewSource(opts, nowFunc)
			require.NoError(t, err)
			summing, err := jobio.NewSource(opts, nowFunc)
			require.NoError(t, err)
			t.Cleanup(func() { plain.Close(); summing.Close() })
			_, err = plain.Read(context.Background()) // the base
			require.NoError(t, err)
			_, err = summing.Read(context.Background())
			require.NoError(t, err)
			growIO(t, filepath.Join(dir, "proc"))
			sourcetest.SumsMatch(t, table, plain, summing)
		})
	}
}

// growIO rewrites every <proc>/<pid>/io with each value doubled plus 100,
// as if every process had done some I/O.
func growIO(t *testing.T, proc string) {
	paths, err := filepath.Glob(filepath.Join(proc, "*", "io"))
	require.NoError(t, err)
	require.NotEmpty(t, paths)
	for _, p := range paths {
		data, err := os.ReadFile(p)
		require.NoError(t, err)
		var out strings.Builder
		for _, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
			name, v, _ := strings.Cut(line, ": ")
			n, err := strconv.ParseUint(v, 10, 64)
			require.NoError(t, err, "%s: %q", p, line)
			fmt.Fprintf(&out, "%s: %d\n", name, 2*n+100)
		}
		require.NoError(t, os.WriteFile(p, []byte(out.String()), 0o644))
	}
}
