package signature_test

import (
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/signature"
)

func grades(first coding.Grade, rest ...coding.Grade) coding.Grades {
	var g coding.Grades
	for i := range g {
		g[i] = first
	}
	for i, r := range rest {
		g[i] = r
	}
	return g
}

// A hand-worked example: creates goes 0 0 5 6 6 while every other metric
// stays idle.
func TestAppendCollapsesRuns(t *testing.T) {
	var s signature.Signature
	for _, c := range []coding.Grade{0, 0, 5, 6, 6} {
		var g coding.Grades
		g[metric.Creates] = c
		s.Append(g)
	}
	assert.Equal(t, 5, s.Windows)
	assert.Equal(t, []signature.Run{{0, 2}, {5, 1}, {6, 2}}, s.Runs[metric.Creates])
	assert.Equal(t, []signature.Run{{0, 5}}, s.Runs[metric.ReadBytes])
	assert.Equal(t, []coding.Grade{0, 0, 5, 6, 6}, s.Sequence(metric.Creates))
	assert.Equal(t, "0x2 5 6x2", s.Text(metric.Creates))

	s.SetLive(grades(1))
	assert.Equal(t, "0x2 5 6x2 |1", s.Text(metric.Creates))
	s.Append(grades(6))
	assert.False(t, s.HasLive, "a closed window replaces the provisional one")
	assert.Equal(t, []signature.Run{{0, 2}, {5, 1}, {6, 3}}, s.Runs[metric.Creates])
}

// randomWindows returns n windows whose grades change with probability
// 1/3 per metric, so that runs of several lengths occur.
func randomWindows(r *rand.Rand, n int) []coding.Grades {
	out := make([]coding.Grades, n)
	var cur coding.Grades
	for i := range out {
		for id := range cur {
			if r.IntN(3) == 0 {
				cur[id] = coding.Grade(r.IntN(coding.GradeCount))
			}
		}
		out[i] = cur
	}
	return out
}

// TestIncrementalEqualsBatch is the property the store relies on: appending
// windows one at a time (with live entries in between) gives exactly the
// signature built from the stored windows, and the binary form round-trips.
func TestIncrementalEqualsBatch(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 11))
	for trial := range 300 {
		windows := randomWindows(r, r.IntN(200))
		var inc signature.Signature
		for _, w := range windows {
			if r.IntN(2) == 0 {
				inc.SetLive(randomWindows(r, 1)[0])
			}
			inc.Append(w)
		}
		batch := signature.Build(windows)
		require.Equal(t, batch, inc, "trial %d", trial)
		if r.IntN(2) == 0 {
			inc.SetLive(randomWindows(r, 1)[0])
		}
		for id := range metric.Count {
			seq := inc.Sequence(id)
			require.Len(t, seq, len(windows))
			for i, w := range windows {
				require.Equal(t, w[id], seq[i])
			}
		}
		b, err := inc.MarshalBinary()
		require.NoError(t, err)
		var back signature.Signature
		require.NoError(t, back.UnmarshalBinary(b))
		require.Equal(t, inc, back)
	}
}

func TestCompact(t *testing.T) {
	var s signature.Signature
	for range 1000 {
		s.Append(grades(3))
	}
	b, err := s.MarshalBinary()
	require.NoError(t, err)
	// version, 2-byte window count, per metric 1 + 1 + 2 bytes, no live.
	assert.Equal(t, 1+2+int(metric.Count)*4+1, len(b))
}

func TestUnmarshalRejects(t *testing.T) {
	var s signature.Signature
	s.Append(grades(2))
	s.Append(grades(4))
	good, err := s.MarshalBinary()
	require.NoError(t, err)
	tests := []struct {
		name  string
		input []byte
		want  string
	}{
		{"empty", nil, "version"},
		{"wrong version", append([]byte{9}, good[1:]...), "version"},
		{"no live flag", good[:len(good)-1], "live flag"},
		{"truncated count", good[:len(good)-2], "bad varint"},
		{"truncated run", good[:len(good)-3], "truncated run"},
		{"trailing", append(append([]byte{}, good...), 0), "trailing"},
		{"bad live flag", append(append([]byte{}, good[:len(good)-1]...), 2), "live flag"},
		{"truncated live", append(append([]byte{}, good[:len(good)-1]...), 1, 0), "truncated live"},
		{"bad grade", func() []byte { b := append([]byte{}, good...); b[3] = 7; return b }(), "grade 7"},
		{"zero run", func() []byte { b := append([]byte{}, good...); b[4] = 0; return b }(), "run of 0"},
		{"runs do not add up", func() []byte { b := append([]byte{}, good...); b[1] = 3; return b }(), "cover 2 windows, want 3"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var got signature.Signature
			err := got.UnmarshalBinary(tt.input)
			require.ErrorIs(t, err, signature.ErrCorrupt)
			assert.ErrorContains(t, err, tt.want)
		})
	}
}

func FuzzUnmarshal(f *testing.F) {
	var s signature.Signature
	for _, w := range randomWindows(rand.New(rand.NewPCG(1, 2)), 20) {
		s.Append(w)
	}
	b, _ := s.MarshalBinary()
	f.Add(b)
	f.Add([]byte{1, 0})
	s.SetLive(s.Live)
	b, _ = s.MarshalBinary()
	f.Add(b)
	f.Fuzz(func(t *testing.T, data []byte) {
		var got signature.Signature
		if err := got.UnmarshalBinary(data); err != nil {
			return
		}
		// Anything accepted re-encodes to the same bytes and is consistent.
		again, err := got.MarshalBinary()
		require.NoError(t, err)
		require.Equal(t, data, again)
		for id := range metric.Count {
			require.Len(t, got.Sequence(id), got.Windows)
		}
	})
}
