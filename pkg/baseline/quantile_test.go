package baseline_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/DataDog/sketches-go/ddsketch"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// testQuantiles are the quantiles the accuracy tests check: the median, the
// bulk's top grade cut and the two default level quantiles.
var testQuantiles = []float64{0.5, 0.9, 0.99, 0.999}

// sample is one heavy-tailed data set for the accuracy tests.
type sample struct {
	name string
	id   metric.ID
	draw func(r *rand.Rand, src rand.Source) func() float64
}

var samples = []sample{
	{"lognormal", metric.ReadOps, func(_ *rand.Rand, src rand.Source) func() float64 {
		return distuv.LogNormal{Mu: 4, Sigma: 2, Src: src}.Rand
	}},
	{"pareto", metric.WriteBytes, func(_ *rand.Rand, src rand.Source) func() float64 {
		return distuv.Pareto{Xm: 1e4, Alpha: 1.1, Src: src}.Rand
	}},
	{"mostly idle", metric.Creates, func(r *rand.Rand, src rand.Source) func() float64 {
		body := distuv.LogNormal{Mu: 1, Sigma: 2.5, Src: src}
		return func() float64 {
			if r.Float64() < 0.95 {
				return 0
			}
			return body.Rand()
		}
	}},
}

// drawSample adds n values of s to a new Day and returns the day and the
// sorted non-idle values, the population the sketch's quantiles are over.
func drawSample(t *testing.T, s sample, seed uint64, n int) (*baseline.Day, []float64) {
	t.Helper()
	src := rand.NewPCG(seed, 7)
	next := s.draw(rand.New(src), src)
	d := baseline.NewDay()
	var nonIdle []float64
	for range n {
		v := next()
		require.NoError(t, d.Add(s.id, v))
		if !coding.IsIdle(s.id, v) {
			nonIdle = append(nonIdle, v)
		}
	}
	slices.Sort(nonIdle)
	return d, nonIdle
}

// quantileError compares a sketch's answer for quantile p with the exact
// order statistics of sorted and returns its relative error.
//
// What is compared, and why. DDSketch guarantees, for a sketch with
// relative accuracy α whose bins have not collapsed, that the value x̃ it
// returns for a quantile satisfies |x̃ − x| ≤ α·x where x is the exact
// value at the quantile's rank (Masson, Rim, Lee, PVLDB 12(12) 2019,
// Section 2: the definition of an α-accurate quantile and the sketch's
// guarantee; section and wording from memory). The library's rank for
// quantile p over n values is ⌊p·(n−1)⌋ (0-based; GetValueAtQuantile),
// while gonum's stat.Empirical quantile returns the smallest x[i] with
// (i+1)/n ≥ p, i.e. index ⌈p·n⌉−1, which is the same order statistic or the
// next one up. So the function checks that gonum's answer is sorted[k] or
// sorted[k+1] for k = ⌊p·(n−1)⌋ (the two definitions really are one rank
// apart at most), and measures x̃ against sorted[k], the order statistic
// the guarantee is about. Gonum being a rank higher at most means the
// estimate is also bracketed by the neighbouring order statistics:
// (1−α)·sorted[k] ≤ x̃ ≤ (1+α)·gonum.
func quantileError(t *testing.T, sorted []float64, p, got float64) float64 {
	t.Helper()
	n := len(sorted)
	k := int(math.Floor(p * float64(n-1)))
	gonum := stat.Quantile(p, stat.Empirical, sorted, nil)
	require.Truef(t, gonum == sorted[k] || (k+1 < n && gonum == sorted[k+1]),
		"p%g: gonum's empirical quantile %g is neither order statistic %d (%g) nor the next", 100*p, gonum, k, sorted[k])
	return math.Abs(got-sorted[k]) / sorted[k]
}

// slack absorbs floating-point rounding in the bin arithmetic (exp and log
// of the bin boundaries); it is ten orders below α.
const slack = 1e-12

func TestQuantilesWithinGuarantee(t *testing.T) {
	for _, s := range samples {
		t.Run(s.name, func(t *testing.T) {
			d, sorted := drawSample(t, s, 1, 200_000)
			require.EqualValues(t, len(sorted), d.Windows(s.id))
			require.Greater(t, len(sorted), 5000, "enough non-idle values for p99.9")
			// The guarantee holds only while nothing collapsed.
			require.Less(t, len(binsOf(d, s.id)), baseline.MaxBins)
			for _, p := range testQuantiles {
				got, ok := d.Quantile(s.id, p)
				require.True(t, ok)
				e := quantileError(t, sorted, p, got)
				t.Logf("p%g: sketch %g, relative error %.3f%%", 100*p, got, 100*e)
				assert.LessOrEqualf(t, e, baseline.RelativeAccuracy+slack, "p%g: sketch %g, relative error %.4f", 100*p, got, e)
			}
		})
	}
}

// TestQuantileCheckHasTeeth runs the same comparison on sketches built with
// five times the error (α = 5%, straight from the ddsketch library) and
// expects it to find quantiles past 1%: a comparison that cannot fail
// would pass that too.
func TestQuantileCheckHasTeeth(t *testing.T) {
	failures := 0
	for _, s := range samples {
		_, sorted := drawSample(t, s, 1, 200_000)
		coarse, err := ddsketch.LogUnboundedDenseDDSketch(0.05)
		require.NoError(t, err)
		for _, v := range sorted {
			require.NoError(t, coarse.Add(v))
		}
		for _, p := range testQuantiles {
			got, err := coarse.GetValueAtQuantile(p)
			require.NoError(t, err)
			e := quantileError(t, sorted, p, got)
			require.LessOrEqual(t, e, 0.05+slack, "the coarse sketch keeps its own guarantee")
			if e > baseline.RelativeAccuracy+slack {
				failures++
			}
		}
	}
	t.Logf("%d of %d quantiles of the 5%% sketch are off by more than 1%%", failures, len(samples)*len(testQuantiles))
	assert.Positive(t, failures, "a 5%% sketch never exceeded 1%%: the comparison cannot tell")
}

// TestMergeEqualsUnion checks full mergeability (the "fully mergeable" of
// the DDSketch paper's title): two sketches of halves merged are the sketch
// of the whole, bin for bin, so every quantile agrees exactly.
func TestMergeEqualsUnion(t *testing.T) {
	for _, s := range samples {
		t.Run(s.name, func(t *testing.T) {
			src := rand.NewPCG(3, 9)
			r := rand.New(src)
			next := s.draw(r, src)
			a, b, all := baseline.NewDay(), baseline.NewDay(), baseline.NewDay()
			for range 50_000 {
				v := next()
				half := a
				if r.IntN(2) == 0 {
					half = b
				}
				require.NoError(t, half.Add(s.id, v))
				require.NoError(t, all.Add(s.id, v))
			}
			a.Merge(b)
			requireSameDay(t, all, a)
			for q := 0.0; q <= 1; q += 0.001 {
				want, ok1 := all.Quantile(s.id, q)
				got, ok2 := a.Quantile(s.id, q)
				require.Equal(t, ok1, ok2)
				require.Equalf(t, want, got, "q %g", q)
			}
		})
	}
}

// TestCollapseKeepsTheTop checks the caveat of the collapsing store: data
// spanning 20 decades (more than MaxBins bins of 2%) loses the lowest
// quantiles first and keeps the guarantee at the top.
func TestCollapseKeepsTheTop(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 5))
	d := baseline.NewDay()
	var vs []float64
	for range 100_000 {
		v := math.Pow(10, 20*r.Float64()) // log-uniform over 1..1e20 ops/s
		vs = append(vs, v)
		require.NoError(t, d.Add(metric.OtherOps, v))
	}
	slices.Sort(vs)
	require.Len(t, binsOf(d, metric.OtherOps), baseline.MaxBins)
	for _, p := range []float64{0.9, 0.99, 0.999} {
		got, _ := d.Quantile(metric.OtherOps, p)
		assert.LessOrEqual(t, quantileError(t, vs, p, got), baseline.RelativeAccuracy+slack, "p%g", 100*p)
	}
	got, _ := d.Quantile(metric.OtherOps, 0.01)
	assert.Greater(t, quantileError(t, vs, 0.01, got), 1.0, "p1 sits in the collapsed bin")
}

func ExampleDay_Quantile() {
	d := baseline.NewDay()
	for i := 1; i <= 1000; i++ {
		_ = d.Add(metric.ReadOps, float64(i))
	}
	_ = d.Add(metric.ReadOps, 0.5) // idle: below 1 op/s
	p99, _ := d.Quantile(metric.ReadOps, 0.99)
	fmt.Printf("windows %d, idle %d, p99 %.0f\n", d.Windows(metric.ReadOps), d.Idle(metric.ReadOps), p99)
	// Output: windows 1000, idle 1, p99 983
}
