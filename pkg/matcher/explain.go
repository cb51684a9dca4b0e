package matcher

import (
	"fmt"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// Explanation is how one pattern's latest verdict for a job came about,
// read from the evaluation that decided it: the same windows, the same
// bounds of the open window, the same condition tests. Nothing in it is
// computed another way, so it cannot contradict the decision.
type Explanation struct {
	Pattern   string         `json:"pattern"`
	Title     string         `json:"title"`
	Severity  model.Severity `json:"severity"`
	Kind      string         `json:"kind"` // "rule" or "example"
	Threshold float64        `json:"threshold"`
	// Score and Matched are the verdict explained, the one the flag
	// machine was given.
	Score   float64 `json:"score"`
	Matched bool    `json:"matched"`
	// Open says the verdict counted the window still open.
	Open    bool                `json:"open"`
	Rule    *RuleExplanation    `json:"rule,omitempty"`
	Example *ExampleExplanation `json:"example,omitempty"`
}

// RuleExplanation shows a rule's last N windows: per window whether each
// condition held, on what value, and whether the rule held. Score is
// Held/N; windows before the job's first count as not held and are not
// shown.
type RuleExplanation struct {
	K          int            `json:"k"`
	N          int            `json:"n"`
	MinNodes   int            `json:"min_nodes,omitempty"`
	Columns    []Column       `json:"columns"` // oldest first
	Conditions []ConditionRow `json:"conditions"`
	Held       int            `json:"held"` // columns in which the rule held
}

// Column is one window of a rule explanation.
type Column struct {
	Window int  `json:"window"` // the job's window index
	Open   bool `json:"open"`   // the window still open, tested on its bounds
	Nodes  int  `json:"nodes"`
	Held   bool `json:"held"`
}

// ConditionRow is one condition, window by window.
type ConditionRow struct {
	Condition string `json:"condition"` // e.g. "creates level >= critical"
	Any       bool   `json:"any"`       // one of the rule's any: conditions
	Cells     []Cell `json:"cells"`     // one per column
}

// Cell is one condition tested in one window.
type Cell struct {
	Held bool `json:"held"`
	// Value is what the condition looked at: a level ("crit"), a grade
	// ("g5"), a derived quantity ("0.83") or "n/a" when undefined.
	Value string `json:"value"`
	// Bound is, in the open window, the bound tested: "low" (the counts so
	// far over the whole window) or "high" (over the time they cover).
	Bound string `json:"bound,omitempty"`
}

// ExampleExplanation shows an example's grades beside the job's latest
// closed windows.
type ExampleExplanation struct {
	Method  string       `json:"method"`
	Windows []int        `json:"windows"` // the job's window indexes shown, oldest first
	Metrics []ExampleRow `json:"metrics"`
}

// ExampleRow is one metric of an example explanation. Job has one digit
// per window shown, right-aligned with Pattern (a space where the job has
// fewer windows than the pattern).
type ExampleRow struct {
	Metric  metric.ID `json:"metric"`
	Job     string    `json:"job"`
	Pattern string    `json:"pattern"`
}

// Explain returns the explanation of pattern i's latest verdict.
func (j *JobMatch) Explain(i int) Explanation {
	e := j.lib.entries[i]
	v := j.latest[i]
	x := Explanation{
		Pattern: e.p.Name, Title: e.p.Title, Severity: e.p.Severity, Kind: e.p.Kind(),
		Threshold: e.p.Threshold, Score: v.Score, Matched: v.Matched, Open: v.Open,
	}
	if e.p.Rule != nil {
		x.Rule = j.explainRule(e.p.Rule, v.Open)
	} else {
		x.Example = j.explainExample(e.p.Example)
	}
	return x
}

// explainRule lays out the windows the rule's state covers: the last N
// closed ones, or the last N-1 and the open window when the verdict
// counted it.
func (j *JobMatch) explainRule(r *pattern.Rule, open bool) *RuleExplanation {
	x := &RuleExplanation{K: r.Hold.K, N: r.Hold.N, MinNodes: r.MinNodes}
	closed := r.Hold.N
	if open {
		closed--
	}
	for _, v := range j.recentWindows(closed) {
		x.addColumn(r, Column{Window: v.Window, Nodes: v.Nodes, Held: RuleHolds(r, &v)},
			func(c pattern.Condition) Cell { return cellOf(c, &v, "") })
	}
	if open && j.open != nil {
		o := j.open
		x.addColumn(r, Column{Window: o.High.Window, Open: true, Nodes: o.High.Nodes, Held: RuleHoldsOpen(r, o)},
			func(c pattern.Condition) Cell {
				b := o.boundFor(c)
				return cellOf(c, b, map[bool]string{true: "high", false: "low"}[b == &o.High])
			})
	}
	return x
}

func (x *RuleExplanation) addColumn(r *pattern.Rule, col Column, cell func(pattern.Condition) Cell) {
	x.Columns = append(x.Columns, col)
	if col.Held {
		x.Held++
	}
	k := 0
	for set, conds := range [][]pattern.Condition{r.All, r.Any} {
		for _, c := range conds {
			if len(x.Conditions) <= k {
				x.Conditions = append(x.Conditions, ConditionRow{Condition: c.String(), Any: set == 1})
			}
			x.Conditions[k].Cells = append(x.Conditions[k].Cells, cell(c))
			k++
		}
	}
}

// cellOf tests c on v and says what it looked at.
func cellOf(c pattern.Condition, v *View, bound string) Cell {
	cell := Cell{Held: Holds(c, v), Bound: bound}
	switch c.Op {
	case pattern.LevelAtLeast, pattern.LevelAtMost:
		cell.Value = shortLevel(v.Levels[c.Metric])
	case pattern.GradeAtLeast, pattern.GradeAtMost:
		cell.Value = "g" + v.Grades[c.Metric].String()
	default:
		cell.Value = "n/a"
		if q, ok := Derived(c.Quantity, v); ok {
			cell.Value = fmt.Sprintf("%.3g", q)
		}
	}
	return cell
}

func shortLevel(l coding.Level) string {
	s := l.String()
	return s[:min(4, len(s))]
}

// explainExample puts the job's latest closed windows beside the example,
// right-aligned: the last window of each is the newest.
func (j *JobMatch) explainExample(ex *pattern.Example) *ExampleExplanation {
	m := ex.Len()
	ws := j.recentWindows(m)
	x := &ExampleExplanation{Method: ex.Method.String()}
	for _, v := range ws {
		x.Windows = append(x.Windows, v.Window)
	}
	for k, id := range ex.Metrics {
		row := ExampleRow{Metric: id, Pattern: coding.FormatGrades(ex.Grades[k])}
		pad := make([]byte, m-len(ws))
		for p := range pad {
			pad[p] = ' '
		}
		digits := make([]byte, 0, len(ws))
		for _, v := range ws {
			digits = append(digits, v.Grades[id].Byte())
		}
		row.Job = string(pad) + string(digits)
		x.Metrics = append(x.Metrics, row)
	}
	return x
}
