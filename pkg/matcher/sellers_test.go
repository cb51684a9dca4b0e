package matcher_test

import (
	"errors"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
)

func TestNewPatternErrors(t *testing.T) {
	ok := [][]coding.Grade{{1, 2}}
	tests := []struct {
		name    string
		metrics []int
		windows [][]coding.Grade
		wantErr bool
	}{
		{"valid", []int{0, 11}, ok, false},
		{"no metrics", nil, [][]coding.Grade{{}}, true},
		{"no windows", []int{0, 1}, nil, true},
		{"metric too large", []int{0, int(metric.Count)}, ok, true},
		{"negative metric", []int{-1, 2}, ok, true},
		{"duplicate metric", []int{3, 3}, ok, true},
		{"window too narrow", []int{0, 1}, [][]coding.Grade{{1}}, true},
		{"window too wide", []int{0, 1}, [][]coding.Grade{{1, 2, 3}}, true},
		{"not a grade", []int{0, 1}, [][]coding.Grade{{1, coding.GradeCount}}, true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p, err := matcher.NewTemplate(tt.metrics, tt.windows)
			if tt.wantErr {
				assert.True(t, errors.Is(err, matcher.ErrTemplate), "err = %v", err)
				assert.Nil(t, p)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, 1, p.Len())
			assert.Equal(t, tt.metrics, p.Metrics())
		})
	}
}

// Hand-computed: pattern 0,6 on metric 3 against job grades 0,0,6,6.
func TestSellersHandExample(t *testing.T) {
	metrics := []int{3}
	s := matcher.NewSellers(mustPattern(t, metrics, "0", "6"))
	assert.Equal(t, matcher.Match{Cost: 2, Score: 0, Start: 0, End: 0}, s.Last())
	want := []matcher.Match{
		{Cost: 1, Score: 0.5, Start: 0, End: 1}, // "0" then the 6 deleted
		{Cost: 1, Score: 0.5, Start: 1, End: 2}, // ties go to the latest start
		{Cost: 0, Score: 1, Start: 1, End: 3},   // exact: windows 1 and 2
		{Cost: 1, Score: 0.5, Start: 3, End: 4}, // the 0 deleted, "6" matched
	}
	for j, g := range []coding.Grade{0, 0, 6, 6} {
		cost := s.Push(jobWindow(metrics, g))
		assert.Equal(t, want[j].Cost, cost, "cost after window %d", j)
		assert.Equal(t, want[j], s.Last(), "after window %d", j)
	}
	assert.Equal(t, want[2], s.Best())
	s.Reset()
	assert.Equal(t, matcher.Match{Cost: 2, Start: 0, End: 0}, s.Best())
}

// Hand-computed: substitution is the mean over metrics of |a−b|/6.
func TestSellersSubstitutionCost(t *testing.T) {
	metrics := []int{0, 1}
	s := matcher.NewSellers(mustPattern(t, metrics, "33"))
	assert.Equal(t, 0.25, s.Push(jobWindow(metrics, 3, 0))) // (0 + 3)/(6·2)
	assert.Equal(t, 0.75, s.Last().Score)
	assert.Equal(t, 0.5, s.Push(jobWindow(metrics, 0, 6))) // (3 + 3)/12; the previous window plus an insertion is 1.25
	assert.Equal(t, 0.5, s.Last().Score)
	assert.Equal(t, matcher.Match{Cost: 0.25, Score: 0.75, Start: 0, End: 1}, s.Best())
	s = matcher.NewSellers(mustPattern(t, metrics, "66"))
	assert.Equal(t, 1.0, s.Push(jobWindow(metrics, 0, 0))) // opposite window: substitution 1 ties deleting the pattern
	assert.Equal(t, matcher.Match{Cost: 1, Score: 0, Start: 1, End: 1}, s.Last())
}

// bruteSellers is an independent reference: for each end e, the cheapest
// weighted edit distance (in units of 1/(6k) window) of the pattern to
// text[s:e] over every s, ties to the latest s.
func bruteSellers(pat [][]coding.Grade, metrics []int, text [][]coding.Grade, e int) (cost, start int) {
	cost, start = -1, -1
	for s := 0; s <= e; s++ {
		if c := weightedEdit(pat, metrics, text[s:e]); cost < 0 || c <= cost {
			cost, start = c, s
		}
	}
	return cost, start
}

// weightedEdit is the full-matrix edit distance of pat to text with
// deletion and insertion 6k and substitution Σ|a−b|.
func weightedEdit(pat [][]coding.Grade, metrics []int, text [][]coding.Grade) int {
	unit := 6 * len(metrics)
	d := make([][]int, len(pat)+1)
	for i := range d {
		d[i] = make([]int, len(text)+1)
		d[i][0] = i * unit
	}
	for j := range d[0] {
		d[0][j] = j * unit
	}
	for i := 1; i <= len(pat); i++ {
		for j := 1; j <= len(text); j++ {
			sub := 0
			for t, mi := range metrics {
				sub += max(int(pat[i-1][t])-int(text[j-1][mi]), int(text[j-1][mi])-int(pat[i-1][t]))
			}
			d[i][j] = min(d[i-1][j-1]+sub, d[i-1][j]+unit, d[i][j-1]+unit)
		}
	}
	return d[len(pat)][len(text)]
}

// Property: streaming equals the batch matrix after every window, and both
// equal the brute-force minimum over every start (cost and start).
func TestSellersStreamingEqualsBatch(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for c := range 400 {
		m, k, top := 1+r.IntN(12), 1+r.IntN(5), 1+r.IntN(6)
		metrics := randMetrics(r, k)
		pat := randWindows(r, m, k, top)
		p, err := matcher.NewTemplate(metrics, pat)
		require.NoError(t, err)
		text := randText(r, r.IntN(40), top)
		batch := matcher.SellersBatch(p, text)
		require.Len(t, batch, len(text)+1)
		s := matcher.NewSellers(p)
		require.Equal(t, batch[0], s.Last(), "case %d before any push", c)
		best := batch[0]
		for j, w := range text {
			cost := s.Push(w)
			require.Equal(t, batch[j+1], s.Last(), "case %d window %d", c, j)
			require.Equal(t, batch[j+1].Cost, cost)
			if batch[j+1].Cost <= best.Cost {
				best = batch[j+1]
			}
			bc, bs := bruteSellers(pat, metrics, text, j+1)
			require.Equal(t, float64(bc)/float64(6*k), cost, "case %d window %d brute cost", c, j)
			require.Equal(t, bs, s.Last().Start, "case %d window %d brute start", c, j)
		}
		require.Equal(t, best, s.Best(), "case %d best", c)
	}
}

// Property: a single-metric pattern over grades 0 and 6 only has unit
// substitution cost, so the streaming matcher equals SellersRow with unit
// costs; and Sellers never costs more than Levenshtein to the whole text.
func TestSellersUnitCostAndLevenshteinBound(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	unit := matcher.Costs{Insert: 1, Delete: 1, Substitute: 1}
	for c := range 300 {
		mi := r.IntN(int(metric.Count))
		pat := make([]coding.Grade, 1+r.IntN(12))
		for i := range pat {
			pat[i] = 6 * coding.Grade(r.IntN(2))
		}
		text := make([][]coding.Grade, r.IntN(50))
		for j := range text {
			text[j] = jobWindow([]int{mi}, 6*coding.Grade(r.IntN(2)))
		}
		windows := make([][]coding.Grade, len(pat))
		for i, g := range pat {
			windows[i] = []coding.Grade{g}
		}
		p, err := matcher.NewTemplate([]int{mi}, windows)
		require.NoError(t, err)
		row := matcher.SellersRow(pat, column(text, mi), unit)
		s := matcher.NewSellers(p)
		for j, w := range text {
			require.Equal(t, float64(row[j+1]), s.Push(w), "case %d window %d", c, j)
		}
		lev := matcher.Levenshtein(pat, column(text, mi))
		assert.LessOrEqual(t, s.Last().Cost, float64(lev), "case %d", c)
	}
}

// Property: on any grades, Sellers' cost is at most the Levenshtein
// distance of a one-metric pattern to the whole text (a substitution costs
// at most 1, and the whole text is one candidate stretch).
func TestSellersBelowLevenshtein(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for c := range 300 {
		mi := r.IntN(int(metric.Count))
		pat := make([]coding.Grade, 1+r.IntN(12))
		windows := make([][]coding.Grade, len(pat))
		for i := range pat {
			pat[i] = randGrade(r, 6)
			windows[i] = []coding.Grade{pat[i]}
		}
		p, err := matcher.NewTemplate([]int{mi}, windows)
		require.NoError(t, err)
		text := randText(r, r.IntN(40), 6)
		s := matcher.NewSellers(p)
		for _, w := range text {
			s.Push(w)
		}
		lev := matcher.Levenshtein(pat, column(text, mi))
		assert.LessOrEqual(t, s.Last().Cost, float64(lev), "case %d", c)
		assert.LessOrEqual(t, s.Best().Cost, s.Last().Cost, "case %d", c)
	}
}

func TestSellersResetReplays(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	p := randPattern(t, r, 8, 4, 6)
	text := randText(r, 30, 6)
	s := matcher.NewSellers(p)
	var first []matcher.Match
	for _, w := range text {
		s.Push(w)
		first = append(first, s.Last())
	}
	best := s.Best()
	s.Reset()
	for j, w := range text {
		s.Push(w)
		require.Equal(t, first[j], s.Last())
	}
	assert.Equal(t, best, s.Best())
}

func TestSellersPushDoesNotAllocate(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 10))
	s := matcher.NewSellers(randPattern(t, r, 12, 5, 6))
	w := randText(r, 1, 6)[0]
	assert.Zero(t, testing.AllocsPerRun(100, func() { s.Push(w) }))
}
