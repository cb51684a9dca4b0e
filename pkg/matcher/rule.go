package matcher

import (
	"math"
	"math/bits"
	"slices"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// View is what the matcher sees of one window of a job: closed, or one of
// the two bounds of the window still open.
type View struct {
	// Window is the job's window index (model.Window.Index).
	Window int
	// Levels and Grades are the window's codes per metric.
	Levels coding.Levels
	Grades coding.Grades
	// Rates is the window's per-node rate per metric: the mean over the
	// job's nodes of each node's rate, in bytes/s or ops/s.
	Rates metric.Rates
	// Nodes is the number of nodes the job ran on in the window.
	Nodes int
	// BusiestShare is the busiest node's share of the job's data bytes
	// (model.Window.BusiestShare); NodeSpread the coefficient of variation
	// of the per-node data byte rates (model.Window.NodeSpread).
	BusiestShare float64
	NodeSpread   float64
}

// ViewOf is how the matcher sees a closed window.
func ViewOf(w *model.Window) View {
	return View{
		Window: w.Index, Levels: w.Levels, Grades: w.Grades, Rates: w.Rates, Nodes: w.Nodes,
		BusiestShare: w.BusiestShare, NodeSpread: w.NodeSpread,
	}
}

// Open is the window still open, as two bounds on what it will be when it
// closes: Low, its counts so far spread over the whole window (as if the
// rest stayed idle), and High, its counts so far over the time they cover
// (as if the rest went on at the same rate).
type Open struct {
	Low, High View
}

// boundFor is the bound a condition is tested on in the open window: an
// "at most" condition (level_at_most, grade_at_most, below) on High, any
// other on Low, so that a match on an open window rests on a guess in
// neither direction.
func (o *Open) boundFor(c pattern.Condition) *View {
	switch c.Op {
	case pattern.LevelAtMost, pattern.GradeAtMost, pattern.Below:
		return &o.High
	}
	return &o.Low
}

// Derived computes the derived quantity q for v. The second result is
// false when q is undefined for the window: a mean size without
// operations, a node figure for a job of fewer than two nodes, or a NaN.
// Because every rate in v is the same mean over nodes, ratios of rates
// equal the ratios of the job's totals.
func Derived(q pattern.Quantity, v *View) (float64, bool) {
	r := &v.Rates
	var x float64
	switch q {
	case pattern.MeanReadSize:
		x = ratio(r[metric.ReadBytes], r[metric.ReadOps])
	case pattern.MeanWriteSize:
		x = ratio(r[metric.WriteBytes], r[metric.WriteOps])
	case pattern.MeanTransferSize:
		x = ratio(r[metric.ReadBytes]+r[metric.WriteBytes], r[metric.ReadOps]+r[metric.WriteOps])
	case pattern.MetaToDataRatio:
		var meta float64
		for id := range metric.Count {
			if id.IsMetadata() {
				meta += r[id]
			}
		}
		x = meta / max(1, r[metric.ReadOps]+r[metric.WriteOps])
	case pattern.BusiestNodeShare:
		x = nodeFigure(v.BusiestShare, v.Nodes)
	case pattern.NodeSpread:
		x = nodeFigure(v.NodeSpread, v.Nodes)
	case pattern.DataBytes:
		x = r[metric.ReadBytes] + r[metric.WriteBytes]
	case pattern.SyncPerWrite:
		x = r[metric.Syncs] / max(1, r[metric.WriteOps])
	default:
		return 0, false
	}
	if math.IsNaN(x) {
		return 0, false
	}
	return x, true
}

// ratio returns a/b, NaN when b is not positive.
func ratio(a, b float64) float64 {
	if !(b > 0) {
		return math.NaN()
	}
	return a / b
}

// nodeFigure returns x for a job of two or more nodes, NaN otherwise.
func nodeFigure(x float64, nodes int) float64 {
	if nodes < 2 {
		return math.NaN()
	}
	return x
}

// Holds reports whether the condition holds in v. A comparison with an
// undefined derived quantity does not hold; an invalid condition never
// holds.
func Holds(c pattern.Condition, v *View) bool {
	switch c.Op {
	case pattern.LevelAtLeast:
		return c.Metric.Valid() && v.Levels[c.Metric] >= c.Level
	case pattern.LevelAtMost:
		return c.Metric.Valid() && v.Levels[c.Metric] <= c.Level
	case pattern.GradeAtLeast:
		return c.Metric.Valid() && v.Grades[c.Metric] >= c.Grade
	case pattern.GradeAtMost:
		return c.Metric.Valid() && v.Grades[c.Metric] <= c.Grade
	case pattern.Below, pattern.Above:
		x, ok := Derived(c.Quantity, v)
		if !ok {
			return false
		}
		if c.Op == pattern.Below {
			return x < c.Value
		}
		return x > c.Value
	}
	return false
}

// RuleHolds reports whether v satisfies the rule: the job has at least
// MinNodes nodes, every condition of All holds and, when Any is not empty,
// one of Any holds. A rule without conditions never holds.
func RuleHolds(r *pattern.Rule, v *View) bool {
	return ruleHolds(r, v.Nodes, func(c pattern.Condition) bool { return Holds(c, v) })
}

// RuleHoldsOpen reports whether the rule holds for the open window: each
// condition on the bound Open.boundFor gives it, the node count on High.
func RuleHoldsOpen(r *pattern.Rule, o *Open) bool {
	return ruleHolds(r, o.High.Nodes, func(c pattern.Condition) bool { return Holds(c, o.boundFor(c)) })
}

func ruleHolds(r *pattern.Rule, nodes int, holds func(pattern.Condition) bool) bool {
	if len(r.All) == 0 && len(r.Any) == 0 {
		return false
	}
	if r.MinNodes > 1 && nodes < r.MinNodes {
		return false
	}
	for _, c := range r.All {
		if !holds(c) {
			return false
		}
	}
	if len(r.Any) == 0 {
		return true
	}
	for _, c := range r.Any {
		if holds(c) {
			return true
		}
	}
	return false
}

// RuleState is one job's streaming state for one rule: whether the rule
// held in each of the last N windows, as a bitmask (bit 0 the newest). It
// costs 16 bytes and O(1) per window. Windows before the first Push count
// as not held. The zero RuleState behaves as hold {k: 1, n: 1}. It is not
// safe for concurrent use.
type RuleState struct {
	bits uint64
	k, n uint8
}

// NewRuleState returns an empty state for h; out-of-range values are
// clamped into 1 <= K <= N <= pattern.MaxWindows.
func NewRuleState(h pattern.Hold) RuleState {
	n := min(max(h.N, 1), pattern.MaxWindows)
	k := min(max(h.K, 1), n)
	return RuleState{k: uint8(k), n: uint8(n)}
}

func (s *RuleState) size() (k, n int) { return max(int(s.k), 1), max(int(s.n), 1) }

// Push records whether the rule held in the newest window and returns the
// score: the fraction of the last N windows in which it held.
func (s *RuleState) Push(held bool) float64 {
	_, n := s.size()
	s.bits <<= 1
	if held {
		s.bits |= 1
	}
	s.bits &= ^uint64(0) >> (64 - n)
	return s.Score()
}

// Count returns the number of the last N windows in which the rule held.
func (s *RuleState) Count() int { return bits.OnesCount64(s.bits) }

// Held reports whether the rule held in the window back places before
// the newest (0: the newest).
func (s *RuleState) Held(back int) bool { return back < 64 && s.bits&(1<<back) != 0 }

// Score returns Count / N, in [0, 1].
func (s *RuleState) Score() float64 {
	_, n := s.size()
	return float64(s.Count()) / float64(n)
}

// Matched reports whether the rule held in at least K of the last N
// windows, which is the same as Score() >= K/N (the pattern's Threshold).
func (s *RuleState) Matched() bool {
	k, _ := s.size()
	return s.Count() >= k
}

// Span is how far back the oldest window that held lies among the last N:
// 1 when only the newest held, 0 when none did.
func (s *RuleState) Span() int { return bits.Len64(s.bits) }

// Reset forgets every window.
func (s *RuleState) Reset() { s.bits = 0 }

// Drivers are the metrics behind a match of p, as shown in v: a rule's
// level and grade conditions of the "at least" kind that hold in v (else
// every metric its level and grade conditions name), or an example's
// metrics.
func Drivers(p *pattern.Pattern, v *View) []metric.ID {
	var ids []metric.ID
	add := func(id metric.ID) {
		if !slices.Contains(ids, id) {
			ids = append(ids, id)
		}
	}
	if p.Example != nil {
		for _, id := range p.Example.Metrics {
			add(id)
		}
		return ids
	}
	conds := slices.Concat(p.Rule.All, p.Rule.Any)
	for _, c := range conds {
		if (c.Op == pattern.LevelAtLeast || c.Op == pattern.GradeAtLeast) && Holds(c, v) {
			add(c.Metric)
		}
	}
	if len(ids) == 0 {
		for _, c := range conds {
			if c.Op != pattern.Below && c.Op != pattern.Above {
				add(c.Metric)
			}
		}
	}
	return ids
}
