package baseline

import (
	"math"
	"slices"
	"time"

	"github.com/DataDog/sketches-go/ddsketch"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// Thresholds are the cuts learned over the horizon at one instant.
type Thresholds struct {
	// Days lists the days that contributed, in either origin, ascending and
	// without duplicates.
	Days []DayKey
	// Metrics holds one entry per metric.
	Metrics [metric.Count]MetricCuts
}

// MetricCuts are one metric's learned cuts and the counts behind them.
//
// Level holds the cut points at the elevated and critical quantiles: each
// is the upper edge of the sketch bin holding its quantile, never below
// the exact quantile and at most 2.02% above it, so that only windows
// ranked above the quantile's rank (a share of about 1−q) are above the
// cut; zero when the metric has no non-idle window. Grade holds the cuts
// at coding.GradeQuantiles(elevated, critical), taken the same way and
// non-decreasing. Enough says Windows reached Options.MinWindows and the
// cuts are positive, so they may replace the seed cuts.
type MetricCuts struct {
	coding.Learned
	// Windows is the number of non-idle windows the quantiles are over.
	Windows uint64
	// Idle is the number of idle windows left out of them.
	Idle uint64
}

// Learned returns what was learned of each metric, for coding.Assemble.
func (t *Thresholds) Learned() *[metric.Count]coding.Learned {
	var out [metric.Count]coding.Learned
	for i, m := range t.Metrics {
		out[i] = m.Learned
	}
	return &out
}

// Cuts merges every day of every origin inside the horizon at now (the
// Options.Days days ending with now's UTC day; later days count too) and
// returns each metric's cuts. It reuses scratch sketches, so its cost is
// the merges (at most MaxBins additions per day and metric) and five rank
// searches per metric, with one allocation: the returned Days.
func (b *Baseline) Cuts(now time.Time) Thresholds {
	first := b.first(now)
	b.entries = b.entries[:0]
	for k := range b.days {
		if k.Day >= first {
			b.entries = append(b.entries, k)
		}
	}
	// A fixed merge order makes the result independent of map order even
	// when a merge collapses bins.
	slices.SortFunc(b.entries, compareKeys)

	t := Thresholds{Days: make([]DayKey, 0, len(b.entries))}
	for i := range b.merged {
		b.merged[i].Clear()
	}
	for j, k := range b.entries {
		if j == 0 || k.Day != b.entries[j-1].Day {
			t.Days = append(t.Days, k.Day)
		}
		d := b.days[k]
		for i, s := range d.sketches {
			// Cannot fail: every sketch uses the same mapping.
			_ = b.merged[i].MergeWith(s)
			t.Metrics[i].Idle += d.idle[i]
		}
	}
	qs := coding.GradeQuantiles(b.opts.ElevatedQuantile, b.opts.CriticalQuantile)
	for i, s := range b.merged {
		m := &t.Metrics[i]
		m.Windows = uint64(s.GetCount())
		if m.Windows == 0 {
			continue
		}
		prev := 0.0
		for g, q := range qs {
			m.Grade[g] = max(upperEdge(s, q), prev) // keep the cuts ascending
			prev = m.Grade[g]
		}
		m.Level = coding.Cut{Elevated: m.Grade[3], Critical: m.Grade[4]}
		m.Enough = m.Windows >= b.opts.MinWindows && m.Level.Elevated > 0 &&
			m.Level.Elevated <= m.Level.Critical && !math.IsInf(m.Level.Critical, 0)
	}
	return t
}

// upperEdge returns the upper boundary of the bin holding quantile q of s,
// whose values are all positive: the bin of the order statistic of rank
// ⌊q·(n−1)⌋, as ddsketch's GetValueAtQuantile picks it.
//
// A cut is the bin's upper edge rather than its representative value
// (GetValueAtQuantile) because levels and grades test "rate > cut": with the
// edge, every window in the quantile's bin stays at or below the cut, so
// only windows ranked above ⌊q·(n−1)⌋ (a share of about 1−q) are above it.
// With the representative, up to half the bin would be, which for a point
// mass (every window of a metric at the same rate) makes all of them
// critical. The price is a one-sided error: the edge is never below the
// exact quantile and at most γ−1 = 2α/(1−α) (2.02%) above it, where the
// representative is within α either way.
func upperEdge(s *ddsketch.DDSketch, q float64) float64 {
	st := s.GetPositiveValueStore()
	rank := float64(q * (st.TotalCount() - 1)) // no fused multiply-add, as in ddsketch
	return s.LowerBound(st.KeyAtRank(rank) + 1)
}
