package tracker

import (
	"fmt"
	"testing"
	"time"

	"sluice/pkg/baseline"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// BenchmarkWindowClose1000Nodes is one window of a 1,000-node job
// closing: the mean over nodes, levels, grades, balance, the signature
// append, and the baseline insert the aggregator then makes (one value per
// metric per window).
func BenchmarkWindowClose1000Nodes(b *testing.B) {
	tr, err := New(Options{Window: time.Minute})
	if err != nil {
		b.Fatal(err)
	}
	base, err := baseline.New(nil)
	if err != nil {
		b.Fatal(err)
	}
	ow := newOpenWindow()
	for n := range 1000 {
		var v metric.Values
		for i := range v {
			v[i] = uint64((n + 1) * (i + 1) * 1000)
		}
		ow.add(fmt.Sprintf("bw%04d", n), 600, v)
	}
	j := newJob(model.JobMeta{ID: "81234"})
	start := time.Date(2026, 12, 1, 14, 0, 0, 0, time.UTC)
	b.ReportAllocs()
	for b.Loop() {
		w := tr.windowOf(j.meta.ID, 0, start, start.Add(10*time.Minute), ow)
		j.signature.Append(w.Grades)
		day := baseline.DayOf(w.End)
		for id, r := range w.Rates {
			_ = base.Add(day, metric.ID(id), r)
		}
	}
}
