package matcher_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/stat"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
)

// gonumKS is the reference: gonum's stat.KolmogorovSmirnov on the grades as
// sorted float64 samples.
func gonumKS(a, b []coding.Grade) float64 {
	return stat.KolmogorovSmirnov(sortedFloats(a), nil, sortedFloats(b), nil)
}

func sortedFloats(gs []coding.Grade) []float64 {
	out := make([]float64, len(gs))
	for i, g := range gs {
		out[i] = float64(g)
	}
	slices.Sort(out)
	return out
}

func randGrades(r *rand.Rand, n int) []coding.Grade {
	lo := r.IntN(coding.GradeCount)
	hi := lo + r.IntN(coding.GradeCount-lo)
	out := make([]coding.Grade, n)
	for i := range out {
		out[i] = coding.Grade(lo + r.IntN(hi-lo+1))
	}
	return out
}

// The histogram statistic equals gonum's on random grade samples,
// including empty ones (gonum's special cases 0 and 1).
func TestKSAgainstGonum(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	for c := range 1000 {
		a, b := randGrades(r, r.IntN(200)), randGrades(r, r.IntN(200))
		ha, hb := matcher.HistogramOf(a), matcher.HistogramOf(b)
		require.Equal(t, len(a), ha.N())
		require.InDelta(t, gonumKS(a, b), matcher.KS(&ha, &hb), 1e-12, "case %d: %v %v", c, a, b)
	}
}

// Hand-computed: a = {0, 0, 6, 6}, b = {6}: F_a(0..5) = 1/2, F_b = 0.
func TestKSHandExample(t *testing.T) {
	a := matcher.HistogramOf([]coding.Grade{0, 0, 6, 6})
	b := matcher.HistogramOf([]coding.Grade{6})
	assert.Equal(t, 0.5, matcher.KS(&a, &b))
	c := matcher.HistogramOf([]coding.Grade{1, 1, 2})
	d := matcher.HistogramOf([]coding.Grade{3, 4})
	assert.Equal(t, 1.0, matcher.KS(&c, &d), "disjoint ranges")
	assert.Equal(t, 0.0, matcher.KS(&c, &c))
}

// Histograms over the last n windows equal histograms recomputed from
// those windows, and Template.KS equals the largest per-metric gonum
// statistic against them.
func TestHistogramsLastN(t *testing.T) {
	r := rand.New(rand.NewPCG(13, 14))
	for c := range 200 {
		last := r.IntN(20)
		h, err := matcher.NewHistograms(last)
		require.NoError(t, err)
		m, k := 1+r.IntN(12), 1+r.IntN(5)
		metrics := randMetrics(r, k)
		pat := randWindows(r, m, k, 6)
		p, err := matcher.NewTemplate(metrics, pat)
		require.NoError(t, err)
		text := randText(r, r.IntN(60), 6)
		for j, w := range text {
			h.Push(w)
			from := 0
			if last > 0 {
				from = max(0, j+1-last)
			}
			seen := text[from : j+1]
			require.Equal(t, len(seen), h.N(), "case %d window %d", c, j)
			for mi := range metric.Count {
				require.Equal(t, matcher.HistogramOf(column(seen, int(mi))), h.Metric(int(mi)), "case %d window %d metric %d", c, j, mi)
			}
			var want float64
			for ti, mi := range metrics {
				want = max(want, gonumKS(column(pat, ti), column(seen, mi)))
			}
			require.InDelta(t, want, p.KS(h), 1e-12, "case %d window %d", c, j)
			require.InDelta(t, 1-want, p.KSScore(h), 1e-12)
		}
		h.Reset()
		assert.Zero(t, h.N())
		assert.Equal(t, 1.0, p.KS(h), "an empty job has nothing in common with the pattern")
	}
}

func TestNewHistogramsNegative(t *testing.T) {
	_, err := matcher.NewHistograms(-1)
	assert.True(t, errors.Is(err, matcher.ErrLast))
}

// c(α) = sqrt(−ln(α/2)/2) against the classic two-decimal table of the
// asymptotic two-sample coefficient (1.22, 1.36, 1.63, 1.95 for α = 0.10,
// 0.05, 0.01, 0.001), recalled from memory as tabulated in the standard
// references (Smirnov, "Table for estimating the goodness of fit of
// empirical distributions", Ann. Math. Statist. 19(2) (1948) 279–281, and
// the usual textbook tables); not re-checked against the printed page.
func TestKSCoefficientTable(t *testing.T) {
	table := []struct{ alpha, c float64 }{
		{0.10, 1.22}, {0.05, 1.36}, {0.01, 1.63}, {0.001, 1.95},
	}
	for _, row := range table {
		assert.InDelta(t, row.c, matcher.KSCoefficient(row.alpha), 0.005, "alpha %v", row.alpha)
	}
	// Four decimals of the formula itself, hand-computed.
	assert.InDelta(t, 1.2239, matcher.KSCoefficient(0.10), 5e-5)
	assert.InDelta(t, 1.3581, matcher.KSCoefficient(0.05), 5e-5)
	assert.InDelta(t, 1.6276, matcher.KSCoefficient(0.01), 5e-5)
	assert.InDelta(t, 1.9495, matcher.KSCoefficient(0.001), 5e-5)
}

// Kolmogorov's limiting law: P(K > c) = 2 Σ_{j≥1} (−1)^{j−1} exp(−2j²c²).
// c(α) keeps only its first term, so the series at c(α) is α to within
// the second term, 2(α/2)⁴ = α⁴/8.
func TestKSCoefficientAgainstKolmogorovSeries(t *testing.T) {
	for _, alpha := range []float64{0.2, 0.1, 0.05, 0.025, 0.01, 0.001} {
		c := matcher.KSCoefficient(alpha)
		var p float64
		for j := 1; j <= 100; j++ {
			p += 2 * math.Pow(-1, float64(j-1)) * math.Exp(-2*float64(j*j)*c*c)
		}
		assert.InDelta(t, alpha, p, math.Pow(alpha, 4)/8+1e-15, "alpha %v", alpha)
	}
}

func TestKSCritical(t *testing.T) {
	// Hand-computed: 1.35810 · sqrt(200/10000) = 0.19206.
	assert.InDelta(t, 0.19206, matcher.KSCritical(0.05, 100, 100), 5e-5)
	// Symmetric in n and m.
	assert.Equal(t, matcher.KSCritical(0.01, 12, 144), matcher.KSCritical(0.01, 144, 12))
	for _, bad := range []struct {
		alpha float64
		n, m  int
	}{{0, 10, 10}, {1, 10, 10}, {-0.1, 10, 10}, {math.NaN(), 10, 10}, {0.05, 0, 10}, {0.05, 10, -1}} {
		assert.True(t, math.IsNaN(matcher.KSCritical(bad.alpha, bad.n, bad.m)), "%+v", bad)
	}
}

func TestHistogramsPushDoesNotAllocate(t *testing.T) {
	r := rand.New(rand.NewPCG(15, 16))
	h, err := matcher.NewHistograms(144)
	require.NoError(t, err)
	p := randPattern(t, r, 12, 5, 6)
	w := randText(r, 1, 6)[0]
	assert.Zero(t, testing.AllocsPerRun(200, func() { h.Push(w); p.KS(h) }))
}
