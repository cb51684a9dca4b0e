package baseline_test

import (
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/baseline"
	"sluice/pkg/metric"
)

// BenchmarkAdd is the per-window fast path: one value into today's live
// day (target ≤ 100 ns).
func BenchmarkAdd(b *testing.B) {
	bl, err := baseline.New(nil)
	require.NoError(b, err)
	today := baseline.DayOf(time.Date(2026, 12, 1, 12, 0, 0, 0, time.UTC))
	const n = 1 << 12
	var ids [n]metric.ID
	var rates [n]float64
	for i := range n {
		ids[i] = metric.ID(i % int(metric.Count))
		rates[i] = newWindowSource(uint64(i), ids[i]).next()
	}
	i := 0
	for b.Loop() {
		if err := bl.Add(today, ids[i%n], rates[i%n]); err != nil {
			b.Fatal(err)
		}
		i++
	}
}

// BenchmarkCuts30Days recomputes the cuts over a full default horizon: 30
// days of 20,000 heavy-tailed windows per metric each, all 12 metrics
// learned (target ≤ 10 ms).
func BenchmarkCuts30Days(b *testing.B) {
	bl, err := baseline.New(nil)
	require.NoError(b, err)
	now := time.Date(2026, 12, 31, 12, 0, 0, 0, time.UTC)
	today := baseline.DayOf(now)
	for i := range baseline.DefaultDays {
		require.NoError(b, bl.Put(baseline.Key{Origin: baseline.Live, Day: today - baseline.DayKey(i)}, realisticDay(b, uint64(i), 20_000)))
	}
	th := bl.Cuts(now)
	require.Len(b, th.Days, baseline.DefaultDays)
	for id := range metric.Count {
		require.True(b, th.Metrics[id].Enough)
	}
	for b.Loop() {
		bl.Cuts(now)
	}
}

// BenchmarkMarshalDay encodes a realistic day of 50,000 windows per metric
// and reports its stored size.
func BenchmarkMarshalDay(b *testing.B) {
	d := realisticDay(b, 1, 50_000)
	var size int
	for b.Loop() {
		buf, err := d.MarshalBinary()
		if err != nil {
			b.Fatal(err)
		}
		size = len(buf)
	}
	b.ReportMetric(float64(size), "bytes/day")
}

// BenchmarkUnmarshalDay decodes the day of BenchmarkMarshalDay.
func BenchmarkUnmarshalDay(b *testing.B) {
	buf := marshal(b, realisticDay(b, 1, 50_000))
	var d baseline.Day
	for b.Loop() {
		if err := d.UnmarshalBinary(buf); err != nil {
			b.Fatal(err)
		}
	}
}
