package pattern

import (
	"fmt"
	"math"
	"math/bits"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// WindowView is what a rule sees of one closed (or live) window of a job.
type WindowView struct {
	// Levels is the window's level per metric.
	Levels coding.Levels
	// Grades is the window's grade per metric.
	Grades coding.Grades
	// Rates is the window's per-node rate per metric: the mean over the
	// job's nodes of each node's rate, in bytes/s or ops/s.
	Rates metric.Rates
	// Nodes is the number of nodes the job ran on in the window.
	Nodes int
	// BusiestShare is the busiest node's share of the job's data bytes
	// (read plus write) in the window, 0..1 (model.Window.BusiestShare).
	BusiestShare float64
	// NodeSpread is the coefficient of variation (standard deviation over
	// mean) of the per-node data byte rates (model.Window.NodeSpread).
	NodeSpread float64
}

// ViewOf is how a rule sees a closed window.
func ViewOf(w *model.Window) WindowView {
	return WindowView{
		Levels: w.Levels, Grades: w.Grades, Rates: w.Rates, Nodes: w.Nodes,
		BusiestShare: w.BusiestShare, NodeSpread: w.NodeSpread,
	}
}

// Quantity is a derived quantity: a number computed from a window's rates
// or node figures that rules can compare with below: and above:.
type Quantity uint8

// The derived quantities; the package doc gives each formula and unit.
const (
	// MeanReadSize is read_bytes / read_ops, in bytes.
	MeanReadSize Quantity = iota + 1
	// MeanWriteSize is write_bytes / write_ops, in bytes.
	MeanWriteSize
	// MeanTransferSize is (read_bytes + write_bytes) / (read_ops +
	// write_ops), in bytes.
	MeanTransferSize
	// MetaToDataRatio is metadata operations over max(1, read_ops +
	// write_ops).
	MetaToDataRatio
	// BusiestNodeShare is WindowView.BusiestShare (jobs of 2+ nodes).
	BusiestNodeShare
	// NodeSpread is WindowView.NodeSpread (jobs of 2+ nodes).
	NodeSpread
	// DataBytes is read_bytes + write_bytes, in bytes/s per node.
	DataBytes
	// SyncPerWrite is syncs / max(1, write_ops).
	SyncPerWrite
)

var quantityNames = [...]string{
	MeanReadSize:     "mean_read_size",
	MeanWriteSize:    "mean_write_size",
	MeanTransferSize: "mean_transfer_size",
	MetaToDataRatio:  "meta_to_data_ratio",
	BusiestNodeShare: "busiest_node_share",
	NodeSpread:       "node_spread",
	DataBytes:        "data_bytes",
	SyncPerWrite:     "sync_per_write",
}

// Quantities lists every derived quantity.
func Quantities() []Quantity {
	out := make([]Quantity, 0, len(quantityNames)-1)
	for q := MeanReadSize; int(q) < len(quantityNames); q++ {
		out = append(out, q)
	}
	return out
}

// String returns the quantity's name as written in pattern files.
func (q Quantity) String() string {
	if q > 0 && int(q) < len(quantityNames) {
		return quantityNames[q]
	}
	return fmt.Sprintf("quantity(%d)", uint8(q))
}

// ParseQuantity returns the derived quantity with the given name.
func ParseQuantity(name string) (Quantity, error) {
	for i, n := range quantityNames {
		if i > 0 && n == name {
			return Quantity(i), nil
		}
	}
	return 0, fmt.Errorf("unknown derived quantity %q", name)
}

// Unit returns the quantity's unit: "bytes", "bytes/s" or "" for a ratio.
func (q Quantity) Unit() string {
	switch q {
	case MeanReadSize, MeanWriteSize, MeanTransferSize:
		return "bytes"
	case DataBytes:
		return "bytes/s"
	}
	return ""
}

// NeedsNodes reports whether the quantity is defined only for jobs of two
// or more nodes; a rule using it must have min_nodes of at least 2.
func (q Quantity) NeedsNodes() bool { return q == BusiestNodeShare || q == NodeSpread }

// Value computes q for w. The second result is false when q is undefined
// for the window: a mean size without operations, a node figure for a job
// of fewer than two nodes, or a NaN. Because every rate in w is the same
// mean over nodes, ratios of rates equal the ratios of the job's totals.
func (q Quantity) Value(w WindowView) (float64, bool) {
	r := &w.Rates
	var v float64
	switch q {
	case MeanReadSize:
		v = ratio(r[metric.ReadBytes], r[metric.ReadOps])
	case MeanWriteSize:
		v = ratio(r[metric.WriteBytes], r[metric.WriteOps])
	case MeanTransferSize:
		v = ratio(r[metric.ReadBytes]+r[metric.WriteBytes], r[metric.ReadOps]+r[metric.WriteOps])
	case MetaToDataRatio:
		var meta float64
		for id := range metric.Count {
			if id.IsMetadata() {
				meta += r[id]
			}
		}
		v = meta / max(1, r[metric.ReadOps]+r[metric.WriteOps])
	case BusiestNodeShare:
		v = nodeFigure(w.BusiestShare, w.Nodes)
	case NodeSpread:
		v = nodeFigure(w.NodeSpread, w.Nodes)
	case DataBytes:
		v = r[metric.ReadBytes] + r[metric.WriteBytes]
	case SyncPerWrite:
		v = r[metric.Syncs] / max(1, r[metric.WriteOps])
	default:
		return 0, false
	}
	if math.IsNaN(v) {
		return 0, false
	}
	return v, true
}

// ratio returns a/b, NaN when b is not positive.
func ratio(a, b float64) float64 {
	if !(b > 0) {
		return math.NaN()
	}
	return a / b
}

// nodeFigure returns v for a job of two or more nodes, NaN otherwise.
func nodeFigure(v float64, nodes int) float64 {
	if nodes < 2 {
		return math.NaN()
	}
	return v
}

// Derived computes the derived quantity called name for w; the second
// result is false for an unknown name or an undefined value (see
// Quantity.Value).
func Derived(name string, w WindowView) (float64, bool) {
	q, err := ParseQuantity(name)
	if err != nil {
		return 0, false
	}
	return q.Value(w)
}

// Holds reports whether the condition holds in w. A comparison with an
// undefined derived quantity does not hold; an invalid condition never
// holds.
func (c Condition) Holds(w WindowView) bool {
	switch c.Op {
	case LevelAtLeast:
		return c.Metric.Valid() && w.Levels[c.Metric] >= c.Level
	case LevelAtMost:
		return c.Metric.Valid() && w.Levels[c.Metric] <= c.Level
	case GradeAtLeast:
		return c.Metric.Valid() && w.Grades[c.Metric] >= c.Grade
	case GradeAtMost:
		return c.Metric.Valid() && w.Grades[c.Metric] <= c.Grade
	case Below, Above:
		v, ok := c.Quantity.Value(w)
		if !ok {
			return false
		}
		if c.Op == Below {
			return v < c.Value
		}
		return v > c.Value
	}
	return false
}

// Holds reports whether w satisfies the rule: the job has at least
// MinNodes nodes, every condition of All holds and, when Any is not empty,
// one of Any holds. A rule without conditions never holds.
func (r *Rule) Holds(w WindowView) bool {
	return r.holds(w.Nodes, func(c Condition) bool { return c.Holds(w) })
}

// HoldsBetween reports whether the rule holds for a window that is still
// open, given two bounds on what it will be when it closes: low, its
// counts so far spread over the whole window (as if the rest stayed idle),
// and high, its counts so far over the time they cover (as if the rest
// went on at the same rate). A condition of the "at least" kind (level,
// grade_at_least, above) must hold on low and one of the "at most" kind
// (level_at_most, grade_at_most, below) on high, so that a match on an
// open window does not rest on a guess in either direction.
func (r *Rule) HoldsBetween(low, high WindowView) bool {
	return r.holds(high.Nodes, func(c Condition) bool {
		switch c.Op {
		case LevelAtMost, GradeAtMost, Below:
			return c.Holds(high)
		}
		return c.Holds(low)
	})
}

func (r *Rule) holds(nodes int, holds func(Condition) bool) bool {
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

// NewState returns a streaming state for one job and this rule.
func (r *Rule) NewState() RuleState { return NewRuleState(r.Hold) }

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
// clamped into 1 <= K <= N <= MaxWindows.
func NewRuleState(h Hold) RuleState {
	n := min(max(h.N, 1), MaxWindows)
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
