// Package sourcetest checks that a source's summed readings (source.Summer)
// equal its counter readings run through the mapping, for the tests of
// every source package.
package sourcetest

import (
	"context"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/source"
)

// SumsMatch gives summing its mapping row (SumWith) and checks one read of
// each source with ReadsMatch.
func SumsMatch(t *testing.T, table mapping.Table, plain source.Source, summing source.Summer) {
	t.Helper()
	row := table[plain.Name()]
	require.NotNil(t, row, "no mapping row for %s", plain.Name())
	summing.SumWith(row)
	ReadsMatch(t, table, plain, summing)
}

// ReadsMatch reads plain (built without a mapping row) and summing (the
// same files, given the table's row before) once each and checks, reading
// by reading, that Sums equals mapping.Table.Apply over Counters and that
// Present is the set of metrics of the counters present. Calling it after
// each change of the files checks what a summing source keeps between
// reads.
func ReadsMatch(t *testing.T, table mapping.Table, plain source.Source, summing source.Summer) {
	t.Helper()
	row := table[plain.Name()]
	ctx := context.Background()
	want, errPlain := plain.Read(ctx)
	got, errSum := summing.Read(ctx)
	require.Equal(t, errPlain == nil, errSum == nil, "errors differ: %v / %v", errPlain, errSum)
	require.Len(t, got, len(want))
	for i, w := range want {
		g := got[i]
		require.Nil(t, g.Counters, "a summing reading carries no counter map")
		var sums metric.Values
		table.Apply(plain.Name(), w.Counters, &sums)
		var present metric.Set
		for name := range w.Counters {
			if id, ok := row[name]; ok {
				present.Add(id)
			}
		}
		require.Equal(t, w.Key, g.Key)
		require.Equal(t, w.Epoch, g.Epoch)
		require.Equal(t, w.Job, g.Job)
		require.Equal(t, w.Malformed, g.Malformed)
		require.Equal(t, sums, g.Sums, "sums of %s", w.Key)
		require.Equal(t, present.IDs(), g.Present.IDs(), "present metrics of %s", w.Key)
	}
}

// Fixtures returns the contents of the files matching a glob pattern, in
// name order, and fails the test when there are none.
func Fixtures(t testing.TB, pattern string) [][]byte {
	t.Helper()
	paths, err := filepath.Glob(pattern)
	require.NoError(t, err)
	require.NotEmpty(t, paths, "no fixture matches %s", pattern)
	files := make([][]byte, 0, len(paths))
	for _, p := range paths {
		data, err := os.ReadFile(p)
		require.NoError(t, err)
		files = append(files, data)
	}
	return files
}

// ForthAndBack returns files followed by the same files in reverse, a run
// of reads in which every file follows two different ones.
func ForthAndBack(files [][]byte) [][]byte {
	out := slices.Clone(files)
	for i := len(files) - 1; i >= 0; i-- {
		out = append(out, files[i])
	}
	return out
}
