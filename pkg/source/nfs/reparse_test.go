package nfs

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

// FuzzParseAfter checks what the Source's parser keeps from one file to
// the next (each mount slot's per-op names, by position): parsing b after
// a must give what a fresh Parse of b gives.
func FuzzParseAfter(f *testing.F) {
	paths, err := filepath.Glob(filepath.Join("..", "..", "..", "testdata", "nfs", "*", "mountstats"))
	require.NoError(f, err)
	var files [][]byte
	for _, p := range paths {
		data, err := os.ReadFile(p)
		require.NoError(f, err)
		files = append(files, data)
	}
	for i := range files {
		f.Add(files[i], files[(i+1)%len(files)])
		f.Add(files[i], files[i])
	}
	const head = "device a mounted on /b with fstype nfs\n\tage:\t1\n\tbytes:\t1 2 3 4 5 6 7 8\n\tper-op statistics\n"
	f.Add([]byte(head+"\tA: 1 1 0 0 0 0 0 0 0\n\tB: 0 0 0 0 0 0 0 0 0\n"),
		[]byte(head+"\tA: 2 2 0 0 0 0 0 0 0\n\tA: 3 3 0 0 0 0 0 0\n\tB: 0 0 0 0 0 0 0 0 0\n\tA: 4 4 0 0 0 0 0 0 0\n"))
	f.Fuzz(func(t *testing.T, a, b []byte) {
		var p parser
		var st Stats
		p.parse(a, &st)
		p.parse(b, &st)
		want, err := Parse(bytes.NewReader(b))
		require.NoError(t, err)
		require.Equal(t, normal(want), normal(st))
	})
}

// normal gives empty slices as nil, which is how a fresh parse leaves them.
func normal(st Stats) Stats {
	if len(st.Mounts) == 0 {
		st.Mounts = nil
		return st
	}
	mounts := make([]Mount, len(st.Mounts))
	for i, m := range st.Mounts {
		if len(m.Ops) == 0 {
			m.Ops = nil
		}
		mounts[i] = m
	}
	st.Mounts = mounts
	return st
}
