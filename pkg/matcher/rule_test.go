package matcher_test

import (
	"math"
	"slices"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/pattern"
)

// rates builds metric.Rates from name/value pairs.
func rates(kv map[metric.ID]float64) metric.Rates {
	var r metric.Rates
	for id, v := range kv {
		r[id] = v
	}
	return r
}

func TestDerived(t *testing.T) {
	meta := map[metric.ID]float64{
		metric.Opens: 10, metric.Closes: 10, metric.Creates: 5, metric.Removes: 5,
		metric.StatOps: 20, metric.MetaUpdates: 10, // 60 metadata ops/s
		metric.Syncs: 7, metric.OtherOps: 3, // not metadata
	}
	withData := func(extra map[metric.ID]float64) metric.Rates {
		m := map[metric.ID]float64{}
		for k, v := range meta {
			m[k] = v
		}
		for k, v := range extra {
			m[k] = v
		}
		return rates(m)
	}
	tests := []struct {
		name   string
		q      string
		input  matcher.View
		want   float64
		wantOK bool
	}{
		// 1e6 B/s over 100 writes/s is 10000 B per write.
		{"mean_write_size", "mean_write_size", matcher.View{Rates: rates(map[metric.ID]float64{metric.WriteBytes: 1e6, metric.WriteOps: 100})}, 10000, true},
		{"mean_write_size without writes", "mean_write_size", matcher.View{Rates: rates(map[metric.ID]float64{metric.WriteBytes: 1e6})}, 0, false},
		{"mean_read_size", "mean_read_size", matcher.View{Rates: rates(map[metric.ID]float64{metric.ReadBytes: 4e6, metric.ReadOps: 2})}, 2e6, true},
		{"mean_read_size without reads", "mean_read_size", matcher.View{}, 0, false},
		// (1e6 + 3e6) B/s over (100 + 300) ops/s.
		{"mean_transfer_size", "mean_transfer_size", matcher.View{Rates: rates(map[metric.ID]float64{
			metric.ReadBytes: 1e6, metric.WriteBytes: 3e6, metric.ReadOps: 100, metric.WriteOps: 300})}, 10000, true},
		{"mean_transfer_size without ops", "mean_transfer_size", matcher.View{Rates: rates(map[metric.ID]float64{metric.ReadBytes: 1e6})}, 0, false},
		// 60 metadata ops/s over 100 + 200 data ops/s.
		{"meta_to_data_ratio", "meta_to_data_ratio", matcher.View{Rates: withData(map[metric.ID]float64{metric.ReadOps: 100, metric.WriteOps: 200})}, 0.2, true},
		{"meta_to_data_ratio without data ops", "meta_to_data_ratio", matcher.View{Rates: withData(nil)}, 60, true},
		{"meta_to_data_ratio below one data op", "meta_to_data_ratio", matcher.View{Rates: withData(map[metric.ID]float64{metric.ReadOps: 0.5})}, 60, true},
		{"meta_to_data_ratio of nothing", "meta_to_data_ratio", matcher.View{}, 0, true},
		{"busiest_node_share", "busiest_node_share", matcher.View{Nodes: 4, BusiestShare: 0.9}, 0.9, true},
		{"busiest_node_share of one node", "busiest_node_share", matcher.View{Nodes: 1, BusiestShare: 1}, 0, false},
		{"node_spread", "node_spread", matcher.View{Nodes: 2, NodeSpread: 1.5}, 1.5, true},
		{"node_spread without nodes", "node_spread", matcher.View{NodeSpread: 1.5}, 0, false},
		{"data_bytes", "data_bytes", matcher.View{Rates: rates(map[metric.ID]float64{metric.ReadBytes: 1e6, metric.WriteBytes: 3e6})}, 4e6, true},
		{"data_bytes of nothing", "data_bytes", matcher.View{}, 0, true},
		// 60 syncs/s over 100 writes/s.
		{"sync_per_write", "sync_per_write", matcher.View{Rates: rates(map[metric.ID]float64{metric.Syncs: 60, metric.WriteOps: 100})}, 0.6, true},
		{"sync_per_write without writes", "sync_per_write", matcher.View{Rates: rates(map[metric.ID]float64{metric.Syncs: 60})}, 60, true},
		{"NaN rate", "data_bytes", matcher.View{Rates: rates(map[metric.ID]float64{metric.ReadBytes: math.NaN()})}, 0, false},
		{"unknown name", "mean_size", matcher.View{}, 0, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, ok := derived(tt.q, tt.input)
			assert.Equal(t, tt.wantOK, ok)
			assert.InDelta(t, tt.want, got, 1e-12)
		})
	}
}

func TestConditionHolds(t *testing.T) {
	var w matcher.View
	w.Levels[metric.Creates] = coding.Critical
	w.Levels[metric.ReadBytes] = coding.Elevated
	w.Grades[metric.StatOps] = 4
	w.Rates[metric.WriteBytes] = 1e6
	w.Rates[metric.WriteOps] = 100 // mean write 10000 B
	tests := []struct {
		name  string
		input pattern.Condition
		want  bool
	}{
		{"level reached", pattern.Condition{Op: pattern.LevelAtLeast, Metric: metric.Creates, Level: coding.Critical}, true},
		{"level above", pattern.Condition{Op: pattern.LevelAtLeast, Metric: metric.Creates, Level: coding.Elevated}, true},
		{"level not reached", pattern.Condition{Op: pattern.LevelAtLeast, Metric: metric.ReadBytes, Level: coding.Critical}, false},
		{"level_at_most equal", pattern.Condition{Op: pattern.LevelAtMost, Metric: metric.ReadBytes, Level: coding.Elevated}, true},
		{"level_at_most exceeded", pattern.Condition{Op: pattern.LevelAtMost, Metric: metric.ReadBytes, Level: coding.Normal}, false},
		{"grade_at_least equal", pattern.Condition{Op: pattern.GradeAtLeast, Metric: metric.StatOps, Grade: 4}, true},
		{"grade_at_least not reached", pattern.Condition{Op: pattern.GradeAtLeast, Metric: metric.StatOps, Grade: 5}, false},
		{"grade_at_most equal", pattern.Condition{Op: pattern.GradeAtMost, Metric: metric.StatOps, Grade: 4}, true},
		{"grade_at_most exceeded", pattern.Condition{Op: pattern.GradeAtMost, Metric: metric.StatOps, Grade: 3}, false},
		{"below", pattern.Condition{Op: pattern.Below, Quantity: pattern.MeanWriteSize, Value: 65536}, true},
		{"below is strict", pattern.Condition{Op: pattern.Below, Quantity: pattern.MeanWriteSize, Value: 10000}, false},
		{"above", pattern.Condition{Op: pattern.Above, Quantity: pattern.MeanWriteSize, Value: 9999}, true},
		{"above is strict", pattern.Condition{Op: pattern.Above, Quantity: pattern.MeanWriteSize, Value: 10000}, false},
		{"undefined quantity holds neither way (below)", pattern.Condition{Op: pattern.Below, Quantity: pattern.MeanReadSize, Value: 1e9}, false},
		{"undefined quantity holds neither way (above)", pattern.Condition{Op: pattern.Above, Quantity: pattern.MeanReadSize, Value: 1}, false},
		{"zero condition", pattern.Condition{}, false},
		{"invalid metric", pattern.Condition{Op: pattern.LevelAtMost, Metric: metric.Count, Level: coding.Critical}, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.want, matcher.Holds(tt.input, &w))
		})
	}
}

func TestRuleHolds(t *testing.T) {
	critical := func(id metric.ID) pattern.Condition {
		return pattern.Condition{Op: pattern.LevelAtLeast, Metric: id, Level: coding.Critical}
	}
	r := &pattern.Rule{
		Hold:     pattern.Hold{K: 1, N: 1},
		MinNodes: 2,
		All:      []pattern.Condition{{Op: pattern.LevelAtMost, Metric: metric.ReadBytes, Level: coding.Normal}},
		Any:      []pattern.Condition{critical(metric.Creates), critical(metric.Removes)},
	}
	view := func(nodes int, crit ...metric.ID) matcher.View {
		w := matcher.View{Nodes: nodes}
		for _, id := range crit {
			w.Levels[id] = coding.Critical
		}
		return w
	}
	assert.True(t, matcher.RuleHolds(r, ptr(view(2, metric.Creates))), "all and one of any")
	assert.True(t, matcher.RuleHolds(r, ptr(view(3, metric.Removes, metric.Creates))), "all and two of any")
	assert.False(t, matcher.RuleHolds(r, ptr(view(2))), "none of any")
	assert.False(t, matcher.RuleHolds(r, ptr(view(2, metric.Creates, metric.ReadBytes))), "all fails")
	assert.False(t, matcher.RuleHolds(r, ptr(view(1, metric.Creates))), "too few nodes")

	onlyAll := &pattern.Rule{Hold: pattern.Hold{K: 1, N: 1}, All: []pattern.Condition{critical(metric.Syncs)}}
	assert.True(t, matcher.RuleHolds(onlyAll, ptr(view(0, metric.Syncs))), "min_nodes 0 or 1 ignores Nodes")
	onlyAny := &pattern.Rule{Hold: pattern.Hold{K: 1, N: 1}, MinNodes: 1, Any: []pattern.Condition{critical(metric.Syncs)}}
	assert.True(t, matcher.RuleHolds(onlyAny, ptr(view(1, metric.Syncs))))
	assert.False(t, matcher.RuleHolds(onlyAny, ptr(view(1))))
	assert.False(t, matcher.RuleHolds(&pattern.Rule{}, ptr(view(1))), "a rule without conditions never holds")
}

func TestRuleState(t *testing.T) {
	s := matcher.NewRuleState(pattern.Hold{K: 2, N: 3})
	// Hand sequence; the last three windows after each push and their count.
	seq := []bool{true, false, true, false, false, true, true, true, false}
	wantCount := []int{
		1, // T
		1, // T F
		2, // T F T
		1, // F T F
		1, // T F F
		1, // F F T
		2, // F T T
		3, // T T T
		2, // T T F
	}
	for i, held := range seq {
		score := s.Push(held)
		assert.Equal(t, float64(wantCount[i])/3, score, "window %d", i)
		assert.Equal(t, wantCount[i], s.Count(), "window %d", i)
		assert.Equal(t, wantCount[i] >= 2, s.Matched(), "window %d", i)
		assert.Equal(t, score, s.Score())
	}
	s.Reset()
	assert.Equal(t, 0, s.Count())
	assert.False(t, s.Matched())
}

func TestRuleStateSixtyFour(t *testing.T) {
	s := matcher.NewRuleState(pattern.Hold{K: 64, N: 64})
	for i := range 64 {
		s.Push(true)
		assert.Equal(t, i == 63, s.Matched())
	}
	assert.Equal(t, 1.0, s.Score())
	assert.Equal(t, 63.0/64, s.Push(false))
	for range 63 {
		s.Push(false)
	}
	assert.Equal(t, 0.0, s.Score(), "64 windows later the last true is gone")
}

func TestRuleStateEdges(t *testing.T) {
	var zero matcher.RuleState // behaves as hold {k: 1, n: 1}
	assert.Equal(t, 1.0, zero.Push(true))
	assert.True(t, zero.Matched())
	assert.Equal(t, 0.0, zero.Push(false))

	clamped := matcher.NewRuleState(pattern.Hold{K: 99, N: 99}) // 64 of 64
	for range 63 {
		clamped.Push(true)
	}
	assert.False(t, clamped.Matched())
	clamped.Push(true)
	assert.True(t, clamped.Matched())

	r := &pattern.Rule{Hold: pattern.Hold{K: 1, N: 2}}
	s := matcher.NewRuleState(r.Hold)
	s.Push(true)
	assert.Equal(t, 0.5, s.Push(false))
	assert.True(t, s.Matched())
	assert.Equal(t, 0.0, s.Push(false))
}

// TestThresholdAgreesWithMatched checks that comparing a rule's score with
// its threshold k/n in floating point is exactly "at least k of n".
func TestThresholdAgreesWithMatched(t *testing.T) {
	for n := 1; n <= pattern.MaxWindows; n++ {
		for k := 1; k <= n; k++ {
			threshold := float64(k) / float64(n)
			for c := 0; c <= n; c++ {
				require.Equal(t, c >= k, float64(c)/float64(n) >= threshold, "k=%d n=%d count=%d", k, n, c)
			}
		}
	}
}

// view builds a WindowView from per-node rates, with levels from the
// default cut points and grades from a made-up but consistent baseline
// whose five grade cuts are elevated/100, /20, /5, elevated and critical
// (so grade 5 is elevated and grade 6 critical, as in package coding).
func view(r map[metric.ID]float64, nodes int, busiest float64) matcher.View {
	cuts := coding.DefaultCuts()
	w := matcher.View{Rates: rates(r), Nodes: nodes, BusiestShare: busiest}
	for id := range metric.Count {
		c := cuts[id]
		w.Levels[id] = cuts.Classify(id, w.Rates[id])
		g := coding.GradeCuts{c.Elevated / 100, c.Elevated / 20, c.Elevated / 5, c.Elevated, c.Critical}
		w.Grades[id] = g.Code(w.Rates[id], coding.IsIdle(id, w.Rates[id]))
	}
	return w
}

// TestBuiltinsOnBehaviours feeds each built-in a window of each canonical
// behaviour (rates per node against the default cut points) and checks
// that exactly the intended patterns hold: the library is crisp.
func TestBuiltinsOnBehaviours(t *testing.T) {
	lib, err := pattern.Builtin()
	require.NoError(t, err)
	tests := []struct {
		name  string
		input matcher.View
		want  []string
	}{
		{"metadata storm: 5000 creates/s, little data", view(map[metric.ID]float64{
			metric.Creates: 5000, metric.StatOps: 3000, metric.Opens: 500, metric.Closes: 500,
			metric.WriteBytes: 2e6, metric.WriteOps: 500}, 1, 1), []string{"metadata_storm"}},
		{"remove storm", view(map[metric.ID]float64{metric.Removes: 3000, metric.StatOps: 3000}, 16, 0.1), []string{"metadata_storm"}},
		{"small writes: 50000 writes/s of 4 KiB", view(map[metric.ID]float64{
			metric.WriteOps: 50000, metric.WriteBytes: 50000 * 4096}, 2, 0.5), []string{"small_write_flood"}},
		{"open/close churn", view(map[metric.ID]float64{
			metric.Opens: 5000, metric.Closes: 5000, metric.ReadOps: 5000, metric.ReadBytes: 5e6}, 1, 1), []string{"open_close_churn"}},
		{"fsync storm: a sync per write", view(map[metric.ID]float64{
			metric.Syncs: 1500, metric.WriteOps: 1500, metric.WriteBytes: 1500 * 8192}, 1, 1), []string{"fsync_storm"}},
		{"imbalanced: one of 8 nodes does 95%", view(map[metric.ID]float64{
			metric.WriteBytes: 5e8, metric.WriteOps: 500}, 8, 0.95), []string{"imbalanced_io"}},
		{"imbalanced but a small job", view(map[metric.ID]float64{
			metric.WriteBytes: 5e8, metric.WriteOps: 500}, 2, 0.95), nil},
		{"imbalanced but little I/O", view(map[metric.ID]float64{
			metric.WriteBytes: 1e6, metric.WriteOps: 10}, 8, 0.95), nil},
		{"500 stats/s, below the elevated cut: not yet polling", view(map[metric.ID]float64{metric.StatOps: 500}, 1, 1), nil},
		{"stat polling at an elevated rate", view(map[metric.ID]float64{metric.StatOps: 3000}, 1, 1), []string{"stat_polling"}},
		{"critical stats are a stat storm, not polling", view(map[metric.ID]float64{metric.StatOps: 20000}, 1, 1), []string{"stat_storm"}},
		{"stats with data are not polling", view(map[metric.ID]float64{metric.StatOps: 500, metric.ReadBytes: 1e8, metric.ReadOps: 100}, 1, 1), nil},
		{"heavy streaming: 4 GB/s in 4 MB writes", view(map[metric.ID]float64{
			metric.WriteBytes: 4e9, metric.WriteOps: 1000, metric.Opens: 1, metric.Closes: 1}, 4, 0.26), []string{"heavy_streaming"}},
		{"heavy reads", view(map[metric.ID]float64{metric.ReadBytes: 5e9, metric.ReadOps: 2000}, 4, 0.25), []string{"heavy_streaming"}},
		{"busy but healthy", view(map[metric.ID]float64{
			metric.ReadBytes: 5e8, metric.ReadOps: 500, metric.WriteBytes: 2e8, metric.WriteOps: 200,
			metric.Opens: 50, metric.Closes: 50, metric.StatOps: 100}, 4, 0.3), nil},
		{"idle", view(nil, 4, 0), nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var got []string
			for _, p := range lib {
				if matcher.RuleHolds(p.Rule, ptr(tt.input)) {
					got = append(got, p.Name)
				}
			}
			slices.Sort(got)
			assert.Equal(t, tt.want, got)
		})
	}
}

// TestHoldsBetween: on an open window, "at least" conditions are tested on
// the low bound and "at most" ones on the high bound, so a creates storm
// half-way into a window that is also moving data at a critical rate so
// far does not match a rule that wants data normal.
func TestHoldsBetween(t *testing.T) {
	r := &pattern.Rule{
		Hold: pattern.Hold{K: 1, N: 1},
		All: []pattern.Condition{
			{Op: pattern.LevelAtLeast, Metric: metric.Creates, Level: coding.Critical},
			{Op: pattern.LevelAtMost, Metric: metric.WriteBytes, Level: coding.Normal},
		},
	}
	var low, high matcher.View
	low.Levels[metric.Creates], high.Levels[metric.Creates] = coding.Critical, coding.Critical
	assert.True(t, matcher.RuleHoldsOpen(r, &matcher.Open{Low: low, High: high}))
	high.Levels[metric.WriteBytes] = coding.Critical // critical so far, diluted in low
	assert.True(t, matcher.RuleHolds(r, ptr(low)), "the low bound alone would match")
	assert.False(t, matcher.RuleHoldsOpen(r, &matcher.Open{Low: low, High: high}))
	low.Levels[metric.Creates] = coding.Elevated // critical only at the rate so far
	high.Levels[metric.WriteBytes] = coding.Normal
	assert.False(t, matcher.RuleHoldsOpen(r, &matcher.Open{Low: low, High: high}))
}

// ptr returns a pointer to a copy of v.
func ptr(v matcher.View) *matcher.View { return &v }

// derived computes the named quantity, false for an unknown name.
func derived(name string, v matcher.View) (float64, bool) {
	q, err := pattern.ParseQuantity(name)
	if err != nil {
		return 0, false
	}
	return matcher.Derived(q, &v)
}
