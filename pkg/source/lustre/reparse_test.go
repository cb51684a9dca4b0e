package lustre

import (
	"bufio"
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

// FuzzParseAfter checks what the Source keeps from one read of a mount to
// the next (the counter names, by position): parsing b with a's names must
// give what a fresh Parse of b gives.
func FuzzParseAfter(f *testing.F) {
	paths, err := filepath.Glob(filepath.Join("..", "..", "..", "testdata", "lustre", "*", "stats"))
	require.NoError(f, err)
	var files [][]byte
	for _, p := range paths {
		data, err := os.ReadFile(p)
		require.NoError(f, err)
		files = append(files, data)
	}
	for i := range files {
		f.Add(files[i], files[(i+1)%len(files)])
	}
	f.Add([]byte("open 1 samples [usecs]\nclose 1 samples [usecs]\n"), []byte("close 2 samples [usecs]\nopen 2 samples [usecs]\nopen 3 samples [usecs]\n"))
	f.Fuzz(func(t *testing.T, a, b []byte) {
		first, err := parse(bufio.NewReaderSize(bytes.NewReader(a), readSize), nil, nil)
		require.NoError(t, err)
		names := make([]string, len(first.Counters))
		for i, c := range first.Counters {
			names[i] = c.Name
		}
		got, err := parse(bufio.NewReaderSize(bytes.NewReader(b), readSize), first.Counters, names)
		require.NoError(t, err)
		want, err := Parse(bytes.NewReader(b))
		require.NoError(t, err)
		if len(want.Counters) == 0 {
			want.Counters, got.Counters = nil, nil
		}
		require.Equal(t, want, got)
	})
}
