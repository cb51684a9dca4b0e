package pattern

import (
	"fmt"
	"strings"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// Limits and defaults of the pattern file format (schema 1); see the
// package doc.
const (
	// Schema is the only pattern file schema this package reads.
	Schema = 1
	// MaxWindows bounds hold.n, raise_after, clear_after and the length of
	// an example's grade strings: 64 windows, under 11 hours at 10 minutes.
	MaxWindows = 64
	// MaxLast bounds an example's last: 1008 windows, one week at 10
	// minutes.
	MaxLast = 1008
	// MaxConditions bounds each of rule.all and rule.any.
	MaxConditions = 32
	// MaxMinNodes bounds rule.min_nodes.
	MaxMinNodes = 1 << 20
	// MaxFileSize is the largest pattern file read, in bytes.
	MaxFileSize = 1 << 20
	// MaxTitle bounds the title, in characters.
	MaxTitle = 80
	// MaxText bounds description, rationale and advice, in bytes.
	MaxText = 4096

	// DefaultRaiseAfter is raise_after when the file leaves it out.
	DefaultRaiseAfter = 2
	// DefaultClearAfter is clear_after when the file leaves it out.
	DefaultClearAfter = 3
	// DefaultThreshold is an example pattern's threshold when the file
	// leaves it out. A rule's threshold is always hold.k / hold.n.
	DefaultThreshold = 0.8
)

// Pattern is one known behaviour read from a pattern file: what it is, why
// it matters, what to do, and how to recognise it (exactly one of Rule and
// Example is set).
type Pattern struct {
	// Source is where the pattern was read from (the name given to Parse,
	// a file path for LoadDir, "builtin/<file>" for Builtin). It is not
	// part of the file and Marshal does not write it.
	Source string
	// Name is the pattern's identifier, unique in a library.
	Name string
	// Title is a short human title.
	Title string
	// Description says what the behaviour looks like.
	Description string
	// Rationale says why it hurts a shared filesystem or why it is
	// recognised.
	Rationale string
	// Advice is the text for on-call staff.
	Advice string
	// Severity ranks a flag raised by the pattern.
	Severity model.Severity
	// RaiseAfter is the number of consecutive windows whose score must be
	// at or above Threshold before a flag is raised.
	RaiseAfter int
	// ClearAfter is the number of consecutive windows below Threshold
	// before a raised flag is cleared.
	ClearAfter int
	// Threshold is the score at or above which a window matches. For a
	// rule it is Rule.Hold.K / Rule.Hold.N.
	Threshold float64
	// Rule is set for a rule pattern.
	Rule *Rule
	// Example is set for an example pattern.
	Example *Example
}

// Kind returns "rule" or "example".
func (p *Pattern) Kind() string {
	if p.Rule != nil {
		return "rule"
	}
	return "example"
}

// Method is how an example pattern is compared with a job's signature;
// the comparison itself lives in package similarity.
type Method uint8

// The methods.
const (
	// Sellers is the ordered, stretch-tolerant edit distance.
	Sellers Method = iota
	// KS is the order-free Kolmogorov–Smirnov comparison of grade
	// distributions.
	KS
	// Euclidean is the rigid distance to the job's last windows.
	Euclidean
)

var methodNames = [...]string{Sellers: "sellers", KS: "ks", Euclidean: "euclidean"}

// String returns the method's name as written in pattern files.
func (m Method) String() string {
	if int(m) < len(methodNames) {
		return methodNames[m]
	}
	return fmt.Sprintf("method(%d)", uint8(m))
}

// MarshalText encodes the method by name.
func (m Method) MarshalText() ([]byte, error) { return []byte(m.String()), nil }

// UnmarshalText decodes a method name.
func (m *Method) UnmarshalText(b []byte) error {
	for i, n := range methodNames {
		if n == string(b) {
			*m = Method(i)
			return nil
		}
	}
	return fmt.Errorf("unknown method %q; want sellers, ks or euclidean", b)
}

// Hold says in how many of the latest windows a rule must hold: at least K
// of the last N, 1 <= K <= N <= MaxWindows.
type Hold struct {
	// K is how many of the last N windows must satisfy the rule.
	K int
	// N is how many of the latest windows are looked at.
	N int
}

// Rule recognises a behaviour from each window's levels, grades and
// derived quantities. A window satisfies the rule when the job has at
// least MinNodes nodes, every condition of All holds, and (if Any is not
// empty) at least one condition of Any holds.
type Rule struct {
	// Hold is the k-of-n requirement over the latest windows.
	Hold Hold
	// MinNodes is the smallest job, in nodes, the rule applies to (1 or
	// more).
	MinNodes int
	// All are the conditions that must all hold.
	All []Condition
	// Any are the conditions of which one must hold; empty means no such
	// requirement.
	Any []Condition
}

// Comparison is a condition's comparison.
type Comparison uint8

// The comparisons. Level and grade comparisons apply to a metric, Below
// and Above to a derived quantity.
const (
	// LevelAtLeast is `level:`: the metric's level is at least Level.
	LevelAtLeast Comparison = iota + 1
	// LevelAtMost is `level_at_most:`.
	LevelAtMost
	// GradeAtLeast is `grade_at_least:`.
	GradeAtLeast
	// GradeAtMost is `grade_at_most:`.
	GradeAtMost
	// Below is `below:`: the quantity is strictly below Value.
	Below
	// Above is `above:`: the quantity is strictly above Value.
	Above
)

// opKeys are the YAML keys of the comparisons, indexed by Comparison.
var opKeys = [...]string{
	LevelAtLeast: "level",
	LevelAtMost:  "level_at_most",
	GradeAtLeast: "grade_at_least",
	GradeAtMost:  "grade_at_most",
	Below:        "below",
	Above:        "above",
}

// String returns the comparison's key in pattern files.
func (o Comparison) String() string {
	if o > 0 && int(o) < len(opKeys) {
		return opKeys[o]
	}
	return fmt.Sprintf("op(%d)", uint8(o))
}

// onMetric reports whether the comparison applies to a metric.
func (o Comparison) onMetric() bool { return o >= LevelAtLeast && o <= GradeAtMost }

// Condition is one test of a window. Metric is used by the level and grade
// comparisons, Quantity by Below and Above; Level, Grade or Value is the
// operand of Op.
type Condition struct {
	// Op is the comparison.
	Op Comparison
	// Metric is the subject of a level or grade comparison.
	Metric metric.ID
	// Quantity is the subject of Below and Above.
	Quantity Quantity
	// Level is the operand of LevelAtLeast and LevelAtMost.
	Level coding.Level
	// Grade is the operand of GradeAtLeast and GradeAtMost.
	Grade coding.Grade
	// Value is the operand of Below and Above.
	Value float64
}

// String writes the condition for people, e.g. "creates level >= critical"
// or "mean_write_size < 65536 bytes".
func (c Condition) String() string {
	switch c.Op {
	case LevelAtLeast:
		return fmt.Sprintf("%s level >= %s", c.Metric, c.Level)
	case LevelAtMost:
		return fmt.Sprintf("%s level <= %s", c.Metric, c.Level)
	case GradeAtLeast:
		return fmt.Sprintf("%s grade >= %d", c.Metric, c.Grade)
	case GradeAtMost:
		return fmt.Sprintf("%s grade <= %d", c.Metric, c.Grade)
	case Below:
		return strings.TrimSpace(fmt.Sprintf("%s < %s %s", c.Quantity, formatFloat(c.Value), c.Quantity.Unit()))
	case Above:
		return strings.TrimSpace(fmt.Sprintf("%s > %s %s", c.Quantity, formatFloat(c.Value), c.Quantity.Unit()))
	}
	return "invalid condition"
}

// Example is a signature excerpt to compare jobs with: per metric, the
// same number (1..MaxWindows) of grades, oldest first.
type Example struct {
	// Method is how the comparison is made.
	Method Method
	// Metrics are the metrics compared, in file order, without repeats.
	Metrics []metric.ID
	// Grades[i] is the grade sequence of Metrics[i].
	Grades [][]coding.Grade
	// Last, for KS only, is how many of the job's latest windows are
	// compared; 0 means all of them.
	Last int
}

// Len returns the number of windows of the example.
func (e *Example) Len() int {
	if len(e.Grades) == 0 {
		return 0
	}
	return len(e.Grades[0])
}

// Windows returns the example window by window, oldest first: entry i
// holds the grades of window i in Metrics order (the layout
// similarity.NewPattern takes, with the metric IDs as indexes).
func (e *Example) Windows() [][]coding.Grade {
	out := make([][]coding.Grade, e.Len())
	for i := range out {
		out[i] = make([]coding.Grade, len(e.Metrics))
		for t := range e.Metrics {
			out[i][t] = e.Grades[t][i]
		}
	}
	return out
}

// Merge returns the library in force at a site: the built-in patterns in
// their order, each replaced in place by the site pattern of the same name
// if there is one, followed by the site patterns that replace nothing, in
// their order. A site therefore changes a built-in's conditions, advice or
// severity by shipping a file with the built-in's name. When two site
// patterns share a name (LoadDir refuses that) the later one wins. The
// patterns are shared, not copied.
func Merge(builtin, site []*Pattern) []*Pattern {
	bySite := make(map[string]*Pattern, len(site))
	for _, p := range site {
		bySite[p.Name] = p
	}
	out := make([]*Pattern, 0, len(builtin)+len(site))
	used := make(map[string]bool, len(site))
	for _, p := range builtin {
		if s, ok := bySite[p.Name]; ok {
			if !used[p.Name] {
				out = append(out, s)
				used[p.Name] = true
			}
			continue
		}
		out = append(out, p)
	}
	for _, p := range site {
		if !used[p.Name] && bySite[p.Name] == p {
			out = append(out, p)
			used[p.Name] = true
		}
	}
	return out
}

// Describe returns a short multi-line text about p for `patterns show`:
// name, title, severity, how it matches, description, rationale and advice.
func Describe(p *Pattern) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %s\n", p.Name, p.Title)
	fmt.Fprintf(&b, "  severity:  %s\n", p.Severity)
	switch {
	case p.Rule != nil:
		r := p.Rule
		fmt.Fprintf(&b, "  rule:      in at least %d of the last %d windows", r.Hold.K, r.Hold.N)
		if r.MinNodes > 1 {
			fmt.Fprintf(&b, ", jobs of %d or more nodes", r.MinNodes)
		}
		b.WriteString("\n")
		for _, c := range r.All {
			fmt.Fprintf(&b, "    all of:  %s\n", c)
		}
		for _, c := range r.Any {
			fmt.Fprintf(&b, "    any of:  %s\n", c)
		}
	case p.Example != nil:
		e := p.Example
		fmt.Fprintf(&b, "  example:   %s over %d windows", e.Method, e.Len())
		if e.Last > 0 {
			fmt.Fprintf(&b, ", against the job's last %d", e.Last)
		}
		b.WriteString("\n")
		for i, id := range e.Metrics {
			fmt.Fprintf(&b, "    %-12s %s\n", id.String()+":", coding.FormatGrades(e.Grades[i]))
		}
	}
	threshold := formatFloat(p.Threshold)
	if p.Rule != nil {
		threshold = fmt.Sprintf("%d/%d", p.Rule.Hold.K, p.Rule.Hold.N)
	}
	fmt.Fprintf(&b, "  matches:   score >= %s; flag after %d matching window(s), clear after %d\n",
		threshold, p.RaiseAfter, p.ClearAfter)
	fmt.Fprintf(&b, "  what:      %s\n", oneLine(p.Description))
	fmt.Fprintf(&b, "  why:       %s\n", oneLine(p.Rationale))
	fmt.Fprintf(&b, "  advice:    %s\n", oneLine(p.Advice))
	return b.String()
}

// oneLine joins a text's lines with spaces.
func oneLine(s string) string { return strings.Join(strings.Fields(s), " ") }
