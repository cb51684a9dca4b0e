package lustre

import (
	"bufio"
	"bytes"
	"fmt"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/internal/sourcetest"
)

// FuzzParseAfter checks what the Source keeps from one read of a mount to
// the next (its memo of lines and names): parsing b after a, and b again,
// with one memo must give what a fresh Parse of b gives.
func FuzzParseAfter(f *testing.F) {
	files := sourcetest.Fixtures(f, filepath.Join(fixture.Path(f, "lustre"), "*", "stats"))
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

// FuzzCounterAsPrinted checks the fast path for counter lines as Lustre
// prints them against splitting: any line must add the same to Stats both
// ways.
func FuzzCounterAsPrinted(f *testing.F) {
	for _, line := range []string{
		"read_bytes                1200 samples [bytes] 1 4194304 2472242752 6886455976423650\n",
		"ioctl                     7 samples [reqs]\n",
		"open 42 samples [usecs] 11 870 19915",
		"x 1 samples [by tes] 1 2 3\n",
		"x 1 samples [[]] 1 2 3\n",
		"x\t1 samples [reqs]\n",
		"x 1 samples [reqs] 1 2 3 4 5\n",
		"x 1 samples [reqs] 1 2 18446744073709551615\n",
		"x 1 samples [reqs] \n",
		"snapshot_time 1.5 secs.usecs\n",
	} {
		f.Add([]byte(line))
	}
	f.Fuzz(func(t *testing.T, line []byte) {
		var fast, split Stats
		fast.parseLine(line, nil, 0)
		split.parseLineSplit(line, nil, 0)
		require.Equal(t, split, fast)
	})
}

// TestMemoIsBounded reads a file far larger than any stats file twice with
// one memo: the memo keeps at most maxMemo of text, and the second read
// still gives every counter.
func TestMemoIsBounded(t *testing.T) {
	var data []byte
	for i := range 20000 { // about 0.9 MB
		data = fmt.Appendf(data, "counter_%05d             %d samples [reqs]\n", i, i+1)
	}
	var m memo
	for range 2 {
		st, err := parse(bufio.NewReaderSize(bytes.NewReader(data), readSize), nil, &m)
		require.NoError(t, err)
		require.Len(t, st.Counters, 20000)
		require.Equal(t, uint64(20000), st.Counters[19999].Samples)
		require.LessOrEqual(t, len(m.last.text), maxMemo)
	}
}
