package baseline_test

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// noon is a fixed "now" for the tests: 2026-12-10 12:00 UTC.
var noon = time.Date(2026, 12, 10, 12, 0, 0, 0, time.UTC)

func day(t *testing.T, s string) baseline.DayKey {
	t.Helper()
	k, err := baseline.ParseDayKey(s)
	require.NoError(t, err)
	return k
}

func newBaseline(t *testing.T, o *baseline.Options) *baseline.Baseline {
	t.Helper()
	b, err := baseline.New(o)
	require.NoError(t, err)
	return b
}

// dayOf returns a day holding n windows of value v for metric id.
func dayOf(t *testing.T, id metric.ID, v float64, n uint64) *baseline.Day {
	t.Helper()
	d := baseline.NewDay()
	require.NoError(t, d.AddWithCount(id, v, n))
	return d
}

func TestOptions(t *testing.T) {
	tests := []struct {
		name    string
		in      *baseline.Options
		want    baseline.Options
		wantErr bool
	}{
		{"nil is the defaults", nil, baseline.Options{Days: 30, ElevatedQuantile: 0.99, CriticalQuantile: 0.999, MinWindows: 1000}, false},
		{"zero fields are defaults", &baseline.Options{Days: 7}, baseline.Options{Days: 7, ElevatedQuantile: 0.99, CriticalQuantile: 0.999, MinWindows: 1000}, false},
		{"equal quantiles", &baseline.Options{ElevatedQuantile: 0.995, CriticalQuantile: 0.995, MinWindows: 1}, baseline.Options{Days: 30, ElevatedQuantile: 0.995, CriticalQuantile: 0.995, MinWindows: 1}, false},
		{"negative horizon", &baseline.Options{Days: -1}, baseline.Options{}, true},
		{"elevated above critical", &baseline.Options{ElevatedQuantile: 0.999, CriticalQuantile: 0.99}, baseline.Options{}, true},
		{"elevated below p90", &baseline.Options{ElevatedQuantile: 0.8}, baseline.Options{}, true},
		{"critical above 1", &baseline.Options{CriticalQuantile: 1.5}, baseline.Options{}, true},
		{"NaN", &baseline.Options{ElevatedQuantile: 0.99, CriticalQuantile: nan()}, baseline.Options{}, true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b, err := baseline.New(tt.in)
			if tt.wantErr {
				require.Error(t, err)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, b.Options())
		})
	}
}

func nan() float64 { var z float64; return z / z }

func TestHorizonAndPrune(t *testing.T) {
	b := newBaseline(t, &baseline.Options{Days: 3, MinWindows: 1})
	for i, s := range []string{"2026-12-07", "2026-12-08", "2026-12-09", "2026-12-10", "2026-12-11"} {
		// One window per day, ten times the day's position, so the counts
		// show which days were merged.
		for range (i + 1) * 10 {
			require.NoError(t, b.Add(day(t, s), metric.ReadOps, 100))
		}
	}
	b.ReplaceImported(day(t, "2026-12-07"), dayOf(t, metric.ReadOps, 100, 1000))

	th := b.Cuts(noon)
	assert.Equal(t, []baseline.DayKey{day(t, "2026-12-08"), day(t, "2026-12-09"), day(t, "2026-12-10"), day(t, "2026-12-11")}, th.Days,
		"the three days ending today, and a day ahead of the clock")
	assert.Equal(t, uint64(20+30+40+50), th.Metrics[metric.ReadOps].Windows)

	newest, ok := b.Newest()
	require.True(t, ok)
	assert.Equal(t, day(t, "2026-12-11"), newest)

	dropped := b.Prune(noon)
	assert.Equal(t, []baseline.Key{{Origin: baseline.Import, Day: day(t, "2026-12-07")}, {Origin: baseline.Live, Day: day(t, "2026-12-07")}}, dropped)
	assert.Nil(t, b.Get(baseline.Key{Origin: baseline.Live, Day: day(t, "2026-12-07")}))
	assert.Len(t, b.Keys(), 4)
	assert.Equal(t, th, b.Cuts(noon), "pruning changes nothing inside the horizon")
	assert.Empty(t, b.Prune(noon))

	// A day later, 12-08 leaves the horizon.
	tomorrow := noon.Add(24 * time.Hour)
	assert.Equal(t, uint64(30+40+50), b.Cuts(tomorrow).Metrics[metric.ReadOps].Windows)
	assert.Equal(t, []baseline.Key{{Origin: baseline.Live, Day: day(t, "2026-12-08")}}, b.Prune(tomorrow))

	// Adding to a pruned day starts it again (and the next Prune drops it).
	require.NoError(t, b.Add(day(t, "2026-12-01"), metric.ReadOps, 100))
	assert.Equal(t, uint64(30+40+50), b.Cuts(tomorrow).Metrics[metric.ReadOps].Windows)
	assert.Len(t, b.Prune(tomorrow), 1)

	_, ok = newBaseline(t, nil).Newest()
	assert.False(t, ok)
}

func TestImportIsIdempotentAndLiveIsKept(t *testing.T) {
	today := baseline.DayOf(noon)
	b := newBaseline(t, &baseline.Options{MinWindows: 1})
	for range 10 {
		require.NoError(t, b.Add(today, metric.WriteOps, 50))
	}
	imported := dayOf(t, metric.WriteOps, 50, 100)
	require.NoError(t, imported.AddWithCount(metric.WriteOps, 0, 7))

	b.ReplaceImported(today, imported.Clone())
	once := b.Cuts(noon)
	b.ReplaceImported(today, imported.Clone())
	twice := b.Cuts(noon)
	assert.Equal(t, once, twice, "importing twice is importing once")
	assert.Equal(t, uint64(110), twice.Metrics[metric.WriteOps].Windows, "live and import both count")
	assert.Equal(t, uint64(7), twice.Metrics[metric.WriteOps].Idle)
	assert.Equal(t, []baseline.DayKey{today}, twice.Days, "a day in two origins is listed once")

	// A different import of the day replaces the first; live stays.
	b.ReplaceImported(today, dayOf(t, metric.WriteOps, 50, 5))
	assert.Equal(t, uint64(15), b.Cuts(noon).Metrics[metric.WriteOps].Windows)
	assert.Equal(t, uint64(10), b.Get(baseline.Key{Origin: baseline.Live, Day: today}).Windows(metric.WriteOps))

	// Removing the import leaves the live windows.
	b.ReplaceImported(today, nil)
	assert.Equal(t, uint64(10), b.Cuts(noon).Metrics[metric.WriteOps].Windows)
}

func TestPutReplacesTheLiveDayAddWritesTo(t *testing.T) {
	today := baseline.DayOf(noon)
	b := newBaseline(t, nil)
	require.NoError(t, b.Add(today, metric.Opens, 10))
	loaded := dayOf(t, metric.Opens, 10, 100)
	require.NoError(t, b.Put(baseline.Key{Origin: baseline.Live, Day: today}, loaded))
	require.NoError(t, b.Add(today, metric.Opens, 10))
	assert.Equal(t, uint64(101), loaded.Windows(metric.Opens), "Add goes to the day Put stored")

	require.NoError(t, b.Put(baseline.Key{Origin: baseline.Live, Day: today}, nil))
	require.NoError(t, b.Add(today, metric.Opens, 10))
	assert.Equal(t, uint64(1), b.Cuts(noon).Metrics[metric.Opens].Windows)

	require.Error(t, b.Put(baseline.Key{Day: today}, loaded), "an origin is required")
}

func TestAddRejects(t *testing.T) {
	b := newBaseline(t, nil)
	today := baseline.DayOf(noon)
	require.ErrorIs(t, b.Add(today, metric.Opens, -1), baseline.ErrInvalidValue)
	require.ErrorIs(t, b.Add(today, metric.Opens, nan()), baseline.ErrInvalidValue)
	require.ErrorIs(t, b.Add(today, metric.Count, 1), baseline.ErrUnknownMetric)
	require.NoError(t, b.Add(today, metric.Opens, 1))
	assert.Equal(t, uint64(3), b.Rejected())
	m := b.Cuts(noon).Metrics[metric.Opens]
	assert.Equal(t, uint64(1), m.Windows)
}

func TestMinWindowsSwitchesFromSeedToLearned(t *testing.T) {
	today := baseline.DayOf(noon)
	b := newBaseline(t, &baseline.Options{MinWindows: 100})
	seed := coding.DefaultCuts()
	for i := range 99 {
		require.NoError(t, b.Add(today, metric.Creates, float64(1+i)))
	}
	th := b.Cuts(noon)
	assert.False(t, th.Metrics[metric.Creates].Enough)
	assert.Equal(t, uint64(99), th.Metrics[metric.Creates].Windows)
	cuts, src := apply(th, seed)
	assert.Equal(t, seed, cuts, "below MinWindows every metric keeps its seed")
	assert.Equal(t, coding.Bases{}, src)
	assert.Equal(t, "seed", src[metric.Creates].String())

	require.NoError(t, b.Add(today, metric.Creates, 100))
	th = b.Cuts(noon)
	m := th.Metrics[metric.Creates]
	require.True(t, m.Enough)
	cuts, src = apply(th, seed)
	require.NoError(t, cuts.Validate())
	assert.Equal(t, coding.BasisLearned, src[metric.Creates])
	assert.Equal(t, "learned", src[metric.Creates].String())
	assert.Equal(t, m.Level, cuts[metric.Creates])
	// Values 1..100: ranks ⌊0.99·99⌋ and ⌊0.999·99⌋ are both 98 (0-based),
	// the value 99; both cuts are the upper edge of 99's bin.
	assertEdge(t, 99, cuts[metric.Creates].Elevated)
	assert.Equal(t, cuts[metric.Creates].Elevated, cuts[metric.Creates].Critical)
	for id := range metric.Count {
		if id != metric.Creates {
			assert.Equal(t, seed[id], cuts[id], "%s keeps its seed", id)
			assert.Equal(t, coding.BasisSeed, src[id])
		}
	}
}

func TestCutsShape(t *testing.T) {
	b := newBaseline(t, nil)
	today := baseline.DayOf(noon)
	b.ReplaceImported(today, realisticDay(t, 4, 20_000))
	th := b.Cuts(noon)
	seed := coding.DefaultCuts()
	cuts, src := apply(th, seed)
	require.NoError(t, cuts.Validate())
	for id := range metric.Count {
		m := th.Metrics[id]
		require.True(t, m.Enough, "%s: %d windows", id, m.Windows)
		assert.Equal(t, coding.BasisLearned, src[id])
		assert.Equal(t, uint64(20_000), m.Windows+m.Idle, "%s", id)
		for g := 1; g < len(m.Grade); g++ {
			assert.LessOrEqual(t, m.Grade[g-1], m.Grade[g], "%s grade cuts ascend", id)
		}
		assert.Equal(t, m.Grade[3], m.Level.Elevated)
		assert.Equal(t, m.Grade[4], m.Level.Critical)
		assert.Equal(t, coding.GradeTop, m.Grade.Code(m.Level.Critical*1.1, false))
		assert.Equal(t, coding.GradeIdle, m.Grade.Code(0, true))
	}
}

func TestCutsWithCustomQuantiles(t *testing.T) {
	b := newBaseline(t, &baseline.Options{ElevatedQuantile: 0.95, CriticalQuantile: 0.98, MinWindows: 1})
	today := baseline.DayOf(noon)
	for i := 1; i <= 1000; i++ {
		require.NoError(t, b.Add(today, metric.StatOps, float64(i)))
	}
	m := b.Cuts(noon).Metrics[metric.StatOps]
	// Rank ⌊q·(n−1)⌋ of 1..1000 is the value ⌊q·999⌋+1.
	for i, want := range []float64{500, 750, 900, 950, 979} {
		assertEdge(t, want, m.Grade[i])
	}
}

// assertEdge checks that cut is the upper edge of the bin holding the exact
// value x: above x, and at most one bin width γ = (1+α)/(1−α) above it.
func assertEdge(t *testing.T, x, cut float64) {
	t.Helper()
	gamma := (1 + baseline.RelativeAccuracy) / (1 - baseline.RelativeAccuracy)
	assert.Greater(t, cut, x)
	assert.LessOrEqual(t, cut, x*gamma*(1+slack))
}

// TestCutsBoundTheShareAbove checks the point of taking bin edges: on
// heavy-tailed days, the exact order statistic of each cut's rank is
// within one bin below the cut, and no more windows than those ranked
// above ⌊q·(n−1)⌋ (about a share 1−q) are above a cut at quantile q.
func TestCutsBoundTheShareAbove(t *testing.T) {
	b := newBaseline(t, nil)
	today := baseline.DayOf(noon)
	var values [metric.Count][]float64
	for id := range metric.Count {
		w := newWindowSource(21, id)
		for range 100_000 {
			v := w.next()
			require.NoError(t, b.Add(today, id, v))
			if !coding.IsIdle(id, v) {
				values[id] = append(values[id], v)
			}
		}
	}
	th := b.Cuts(noon)
	cuts, _ := apply(th, coding.DefaultCuts())
	qs := coding.GradeQuantiles(baseline.DefaultElevatedQuantile, baseline.DefaultCriticalQuantile)
	for id := range metric.Count {
		vs := values[id]
		slices.Sort(vs)
		n := len(vs)
		m := th.Metrics[id]
		require.EqualValues(t, n, m.Windows)
		for g, q := range qs {
			k := int(math.Floor(q * float64(n-1)))
			assertEdge(t, vs[k], m.Grade[g])
			above := n - sort.SearchFloat64s(vs, math.Nextafter(m.Grade[g], math.Inf(1)))
			assert.LessOrEqualf(t, above, n-1-k, "%s: %d of %d windows above the p%g cut", id, above, n, 100*q)
		}
		var elevated, critical int
		for _, v := range vs {
			switch cuts.Classify(id, v) {
			case coding.Elevated:
				elevated++
			case coding.Critical:
				critical++
			}
		}
		rankAbove := func(q float64) int { return n - 1 - int(math.Floor(q*float64(n-1))) }
		assert.LessOrEqual(t, critical, rankAbove(0.999), "%s critical", id)
		assert.LessOrEqual(t, elevated+critical, rankAbove(0.99), "%s elevated or critical", id)
	}
}

func TestEqualCutsStayValid(t *testing.T) {
	b := newBaseline(t, &baseline.Options{MinWindows: 10})
	today := baseline.DayOf(noon)
	b.ReplaceImported(today, dayOf(t, metric.Syncs, 3, 5000))
	th := b.Cuts(noon)
	m := th.Metrics[metric.Syncs]
	require.True(t, m.Enough)
	assert.Equal(t, m.Level.Elevated, m.Level.Critical, "one bin: every quantile is the same")
	cuts, _ := apply(th, coding.DefaultCuts())
	require.NoError(t, cuts.Validate())
	assert.Equal(t, coding.Normal, cuts.Classify(metric.Syncs, 3), "a point mass is not above its own cut")
}

func TestCutsOfAnEmptyBaseline(t *testing.T) {
	th := newBaseline(t, nil).Cuts(noon)
	assert.Empty(t, th.Days)
	assert.Equal(t, [metric.Count]baseline.MetricCuts{}, th.Metrics)
	cuts, src := apply(th, coding.DefaultCuts())
	assert.Equal(t, coding.DefaultCuts(), cuts)
	assert.Equal(t, coding.Bases{}, src)
}

func TestKeysAreOrdered(t *testing.T) {
	b := newBaseline(t, nil)
	d2, d1 := day(t, "2026-12-02"), day(t, "2026-12-01")
	require.NoError(t, b.Add(d2, metric.Opens, 5))
	b.ReplaceImported(d2, dayOf(t, metric.Opens, 5, 1))
	require.NoError(t, b.Add(d1, metric.Opens, 5))
	assert.Equal(t, []baseline.Key{{Origin: baseline.Live, Day: d1}, {Origin: baseline.Import, Day: d2}, {Origin: baseline.Live, Day: d2}}, b.Keys())
}

func ExampleBaseline_Cuts() {
	b, _ := baseline.New(&baseline.Options{MinWindows: 1000})
	today := baseline.DayOf(time.Date(2026, 12, 1, 15, 0, 0, 0, time.UTC))
	for i := 1; i <= 2000; i++ {
		_ = b.Add(today, metric.Opens, math.Exp(float64(i)/200)) // 2000 windows, 1 to 22026 opens/s
	}
	th := b.Cuts(time.Date(2026, 12, 1, 16, 0, 0, 0, time.UTC))
	c, bases := coding.Assemble(coding.DefaultCuts(), th.Learned())
	cuts, src := c.Levels, bases
	fmt.Printf("opens: %s, elevated %.0f, critical %.0f\n", src[metric.Opens], cuts[metric.Opens].Elevated, cuts[metric.Opens].Critical)
	fmt.Printf("creates: %s, elevated %.0f, critical %.0f\n", src[metric.Creates], cuts[metric.Creates].Elevated, cuts[metric.Creates].Critical)
	// Output:
	// opens: learned, elevated 19937, critical 22034
	// creates: seed, elevated 100, critical 1000
}
