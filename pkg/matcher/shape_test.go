package matcher_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/floats"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
)

// Hand-computed: pattern (1,2),(3,4) against last windows (1,2),(0,0):
// differences 0, 0, 3, 4, distance 5, maximum 6·sqrt(4) = 12.
func TestShapeHandExample(t *testing.T) {
	metrics := []int{5, 2}
	s := matcher.NewShape(mustPattern(t, metrics, "12", "34"))
	_, ok := s.Push(jobWindow(metrics, 6, 6))
	assert.False(t, ok, "one window is not enough for a two-window pattern")
	_, ok = s.Best()
	assert.False(t, ok)
	dist, ok := s.Push(jobWindow(metrics, 1, 2))
	require.True(t, ok)
	assert.Equal(t, 7.0, dist) // (6,6),(1,2) against (1,2),(3,4): sqrt(25+16+4+4)
	dist, ok = s.Push(jobWindow(metrics, 0, 0))
	require.True(t, ok)
	assert.Equal(t, 5.0, dist)
	last, ok := s.Last()
	require.True(t, ok)
	assert.InDelta(t, 7.0/12, last.Score, 1e-15)
	assert.Equal(t, matcher.Match{Cost: 5, Score: last.Score, Start: 1, End: 3}, last)
	dist, _ = s.Push(jobWindow(metrics, 3, 4)) // last two: (0,0),(3,4)
	assert.InDelta(t, math.Sqrt(1+4), dist, 1e-12)
	dist, _ = s.Push(jobWindow(metrics, 1, 2)) // (3,4),(1,2)
	assert.InDelta(t, math.Sqrt(4+4+4+4), dist, 1e-12)
	s.Push(jobWindow(metrics, 3, 4)) // exact
	best, ok := s.Best()
	require.True(t, ok)
	assert.Equal(t, matcher.Match{Cost: 0, Score: 1, Start: 4, End: 6}, best)
	s.Reset()
	_, ok = s.Last()
	assert.False(t, ok)
}

// Property: after each window the distance equals gonum's
// floats.Distance(pattern, last m windows, 2), and Best is the closest
// (latest on ties) alignment found by sliding over the whole text.
func TestShapeAgainstGonum(t *testing.T) {
	r := rand.New(rand.NewPCG(17, 18))
	for c := range 300 {
		m, k := 1+r.IntN(12), 1+r.IntN(5)
		metrics := randMetrics(r, k)
		pat := randWindows(r, m, k, 6)
		p, err := matcher.NewTemplate(metrics, pat)
		require.NoError(t, err)
		flat := flatten(pat, nil)
		s := matcher.NewShape(p)
		text := randText(r, r.IntN(40), 6)
		bestDist, bestEnd := math.Inf(1), 0
		for j, w := range text {
			dist, ok := s.Push(w)
			if j+1 < m {
				require.False(t, ok)
				continue
			}
			require.True(t, ok)
			want := floats.Distance(flat, flatten(text[j+1-m:j+1], metrics), 2)
			require.InDelta(t, want, dist, 1e-12, "case %d window %d", c, j)
			if want <= bestDist+1e-9 { // gonum's scaled norm differs from sqrt(Σ) in the last bits: equal sums tie
				bestDist, bestEnd = want, j+1
			}
		}
		best, ok := s.Best()
		require.Equal(t, len(text) >= m, ok)
		if ok {
			assert.InDelta(t, bestDist, best.Cost, 1e-12)
			assert.Equal(t, bestEnd, best.End, "case %d", c)
			assert.Equal(t, bestEnd-m, best.Start)
		}
	}
}

// flatten lays windows out as numbers, window after window; metrics picks
// from full job windows (nil: take pattern windows whole).
func flatten(ws [][]coding.Grade, metrics []int) []float64 {
	var out []float64
	for _, w := range ws {
		if metrics == nil {
			for _, g := range w {
				out = append(out, float64(g))
			}
			continue
		}
		for _, mi := range metrics {
			out = append(out, float64(w[mi]))
		}
	}
	return out
}

func TestShapePushDoesNotAllocate(t *testing.T) {
	r := rand.New(rand.NewPCG(19, 20))
	s := matcher.NewShape(randPattern(t, r, 12, 5, 6))
	w := randText(r, 1, 6)[0]
	assert.Zero(t, testing.AllocsPerRun(100, func() { s.Push(w) }))
}
