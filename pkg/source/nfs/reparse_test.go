package nfs

import (
	"bytes"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/internal/sourcetest"
)

// FuzzParseAfter checks what the Source's parser keeps from one file to
// the next (each mount slot's per-op names and lines, by position): parsing
// b after a, and b again, must give what a fresh Parse of b gives.
func FuzzParseAfter(f *testing.F) {
	files := sourcetest.Fixtures(f, filepath.Join(fixture.Path(f, "nfs"), "*", "mountstats"))
	for i := range files {
		f.Add(files[i], files[(i+1)%len(files)])
		f.Add(files[i], files[i])
	}
	const head = "device a mounted on /b with fstype nfs\n\tage:\t1\n\tbytes:\t1 2 3 4 5 6 7 8\n\tper-op statistics\n"
	f.Add([]byte(head+"\tA: 1 1 0 0 0 0 0 0 0\n\tB: 0 0 0 0 0 0 0 0 0\n"),
		[]byte(head+"\tA: 2 2 0 0 0 0 0 0 0\n\tA: 3 3 0 0 0 0 0 0\n\tB: 0 0 0 0 0 0 0 0 0\n\tA: 4 4 0 0 0 0 0 0 0\n"))
	// A name printed twice changes its first op after the fact: the
	// first line alone, next time, must not bring the later numbers back.
	f.Add([]byte(head+"\tA: 1 1 0 0 0 0 0 0 0\n\tA: 7 7 0 0 0 0 0 0 0\n"),
		[]byte(head+"\tA: 1 1 0 0 0 0 0 0 0\n"))
	f.Fuzz(func(t *testing.T, a, b []byte) {
		want, err := Parse(bytes.NewReader(b))
		require.NoError(t, err)
		var p parser
		var st Stats
		p.parse(a, &st)
		for i := range 2 { // b after a, then b again: every line as it was
			p.parse(b, &st)
			require.Equal(t, normal(want), normal(st), "parse %d of b", i+1)
		}
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
