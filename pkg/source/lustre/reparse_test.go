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
// the next (its memo of lines and names): parsing b after a, and b again,
// with one memo must give what a fresh Parse of b gives.
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
		want, err := Parse(bytes.NewReader(b))
		require.NoError(t, err)
		if len(want.Counters) == 0 {
			want.Counters = nil
		}
		var m memo
		var counters []Counter
		for i, data := range [][]byte{a, b, b} {
			got, err := parse(bufio.NewReaderSize(bytes.NewReader(data), readSize), counters, &m)
			require.NoError(t, err)
			counters = got.Counters
			if i == 0 {
				continue
			}
			if len(got.Counters) == 0 {
				got.Counters = nil
			}
			require.Equal(t, want, got, "parse %d", i)
		}
	})
}
