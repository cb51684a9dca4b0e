package pattern

import (
	"fmt"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"go.yaml.in/yaml/v3"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// decoder validates one file's node tree, collecting errors.
type decoder struct {
	file string
	errs []error
}

func (d *decoder) fail(n *yaml.Node, field, format string, args ...any) {
	line := 1
	if n != nil && n.Line > 0 {
		line = n.Line
	}
	d.errs = append(d.errs, &Error{File: d.file, Line: line, Field: field, Msg: fmt.Sprintf(format, args...)})
}

// mapping is a decoded YAML mapping: its fields by key.
type mapping struct {
	node *yaml.Node
	path string
	keys map[string]*yaml.Node
	vals map[string]*yaml.Node
}

// join returns path.key, or key at the top.
func join(path, key string) string {
	if path == "" {
		return key
	}
	return path + "." + key
}

// mapping checks that n is a mapping with string keys among known, none
// repeated, and returns it; ok is false when n is not a mapping at all.
func (d *decoder) mapping(n *yaml.Node, path string, known ...string) (mapping, bool) {
	m := mapping{node: n, path: path, keys: map[string]*yaml.Node{}, vals: map[string]*yaml.Node{}}
	if n.Kind != yaml.MappingNode {
		d.fail(n, path, "want a mapping, got %s", describe(n))
		return m, false
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		if k.Kind != yaml.ScalarNode || k.ShortTag() != "!!str" {
			d.fail(k, path, "field names must be plain strings, got %s", describe(k))
			continue
		}
		field := join(path, k.Value)
		if !slices.Contains(known, k.Value) {
			d.fail(k, field, "unknown field; want one of %s", strings.Join(known, ", "))
			continue
		}
		if prev, ok := m.keys[k.Value]; ok {
			d.fail(k, field, "given twice (first on line %d)", prev.Line)
			continue
		}
		m.keys[k.Value], m.vals[k.Value] = k, v
	}
	return m, true
}

// need reports a missing required field at the mapping's line.
func (d *decoder) need(m mapping, key, hint string) {
	if _, ok := m.vals[key]; !ok {
		d.fail(m.node, join(m.path, key), "required%s", hint)
	}
}

// describe names a node's kind and tag for messages.
func describe(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		if n.ShortTag() == "!!null" {
			return "nothing (null)"
		}
		return fmt.Sprintf("%s %q", n.ShortTag(), n.Value)
	case yaml.DocumentNode:
		return "a document"
	}
	return "nothing"
}

// str decodes a string scalar.
func (d *decoder) str(n *yaml.Node, field string) (string, bool) {
	if n.Kind != yaml.ScalarNode || n.ShortTag() != "!!str" {
		d.fail(n, field, "want a string, got %s", describe(n))
		return "", false
	}
	return n.Value, true
}

// integer decodes an integer scalar in [lo, hi].
func (d *decoder) integer(n *yaml.Node, field string, lo, hi int) (int, bool) {
	if n.Kind != yaml.ScalarNode || n.ShortTag() != "!!int" {
		d.fail(n, field, "want an integer, got %s", describe(n))
		return 0, false
	}
	var v int64
	if err := n.Decode(&v); err != nil {
		d.fail(n, field, "want an integer from %d to %d, got %q", lo, hi, n.Value)
		return 0, false
	}
	if v < int64(lo) || v > int64(hi) {
		d.fail(n, field, "%d is out of range; want %d to %d", v, lo, hi)
		return 0, false
	}
	return int(v), true
}

// number decodes a finite number scalar (integer or float).
func (d *decoder) number(n *yaml.Node, field string) (float64, bool) {
	if n.Kind != yaml.ScalarNode || (n.ShortTag() != "!!int" && n.ShortTag() != "!!float") {
		d.fail(n, field, "want a number, got %s", describe(n))
		return 0, false
	}
	var v float64
	if err := n.Decode(&v); err != nil {
		d.fail(n, field, "want a number, got %q", n.Value)
		return 0, false
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		d.fail(n, field, "want a finite number, got %s", n.Value)
		return 0, false
	}
	return v, true
}

// text decodes a required free-text field: trimmed, not empty, at most
// limit bytes, no control characters but newline and tab; oneLine also
// refuses newlines.
func (d *decoder) text(m mapping, key string, limit int, oneLine bool) string {
	n, ok := m.vals[key]
	if !ok {
		d.need(m, key, "")
		return ""
	}
	s, ok := d.str(n, key)
	if !ok {
		return ""
	}
	s = strings.TrimSpace(s)
	switch {
	case s == "":
		d.fail(n, key, "must not be empty")
	case oneLine && utf8.RuneCountInString(s) > limit:
		d.fail(n, key, "%d characters; keep it to %d", utf8.RuneCountInString(s), limit)
	case !oneLine && len(s) > limit:
		d.fail(n, key, "%d bytes; keep it to %d", len(s), limit)
	case !utf8.ValidString(s):
		d.fail(n, key, "is not valid UTF-8")
	default:
		for _, r := range s {
			if oneLine && (r == '\n' || r == '\u2028' || r == '\u2029') {
				d.fail(n, key, "must be one line")
				return ""
			}
			if unicode.IsControl(r) && r != '\n' && r != '\t' {
				d.fail(n, key, "contains the control character %U", r)
				return ""
			}
		}
		return s
	}
	return ""
}

var nameRE = regexp.MustCompile(`^[a-z][a-z0-9_]{1,62}$`)

var topKeys = []string{"schema", "name", "title", "description", "rationale", "severity", "advice",
	"raise_after", "clear_after", "threshold", "rule", "example"}

// pattern decodes the document's mapping; it also returns the name's line.
func (d *decoder) pattern(root *yaml.Node) (*Pattern, int) {
	p := &Pattern{RaiseAfter: DefaultRaiseAfter, ClearAfter: DefaultClearAfter, Threshold: DefaultThreshold}
	m, ok := d.mapping(root, "", topKeys...)
	if !ok {
		return p, 0
	}
	if n, ok := m.vals["schema"]; !ok {
		d.need(m, "schema", fmt.Sprintf(" (the supported schema is %d)", Schema))
	} else if n.Kind != yaml.ScalarNode || n.ShortTag() != "!!int" || n.Value != strconv.Itoa(Schema) {
		d.fail(n, "schema", "unsupported schema %s; the supported schema is %d", n.Value, Schema)
		return p, 0 // the rest may follow other rules
	}
	nameLine := m.node.Line
	if n, ok := m.vals["name"]; !ok {
		d.need(m, "name", "")
	} else if s, ok := d.str(n, "name"); ok {
		nameLine = n.Line
		if !nameRE.MatchString(s) {
			d.fail(n, "name", "%q is not a valid name; want 2 to 63 of a-z, 0-9 and _, starting with a letter", s)
		}
		p.Name = s
	}
	p.Title = d.text(m, "title", MaxTitle, true)
	p.Description = d.text(m, "description", MaxText, false)
	p.Rationale = d.text(m, "rationale", MaxText, false)
	p.Advice = d.text(m, "advice", MaxText, false)
	if n, ok := m.vals["severity"]; !ok {
		d.need(m, "severity", "; want info, warning or critical")
	} else if s, ok := d.str(n, "severity"); ok {
		if err := p.Severity.UnmarshalText([]byte(s)); err != nil {
			d.fail(n, "severity", "%v", err)
		}
	}
	if n, ok := m.vals["raise_after"]; ok {
		p.RaiseAfter, _ = d.integer(n, "raise_after", 1, MaxWindows)
	}
	if n, ok := m.vals["clear_after"]; ok {
		p.ClearAfter, _ = d.integer(n, "clear_after", 1, MaxWindows)
	}
	rule, hasRule := m.vals["rule"]
	example, hasExample := m.vals["example"]
	switch {
	case hasRule && hasExample:
		first, second := "rule", "example"
		if m.keys["example"].Line < m.keys["rule"].Line {
			first, second = second, first
		}
		d.fail(m.keys[second], second, "give rule or example, not both (%s is on line %d)", first, m.keys[first].Line)
	case hasRule:
		p.Rule = d.rule(rule)
		if n, ok := m.vals["threshold"]; ok {
			d.fail(n, "threshold", "not used with rule: a rule matches in hold.k of hold.n windows, so its threshold is k/n")
		}
		if p.Rule != nil && p.Rule.Hold.N > 0 {
			p.Threshold = float64(p.Rule.Hold.K) / float64(p.Rule.Hold.N)
		}
	case hasExample:
		p.Example = d.example(example)
		if n, ok := m.vals["threshold"]; ok {
			if v, ok := d.number(n, "threshold"); ok {
				if !(v > 0 && v <= 1) {
					d.fail(n, "threshold", "%s is out of range; want a score above 0 and at most 1", n.Value)
				}
				p.Threshold = v
			}
		}
	default:
		d.fail(m.node, "", "no rule and no example; give exactly one")
	}
	return p, nameLine
}

var (
	ruleKeys      = []string{"hold", "min_nodes", "all", "any"}
	holdKeys      = []string{"k", "n"}
	conditionKeys = []string{"metric", "derived", "level", "level_at_most", "grade_at_least", "grade_at_most", "below", "above"}
	exampleKeys   = []string{"method", "metrics", "grades", "last"}
)

func (d *decoder) rule(n *yaml.Node) *Rule {
	m, ok := d.mapping(n, "rule", ruleKeys...)
	if !ok {
		return nil
	}
	r := &Rule{MinNodes: 1}
	if h, ok := m.vals["hold"]; !ok {
		d.need(m, "hold", "; e.g. hold: {k: 2, n: 3}")
	} else if hm, ok := d.mapping(h, "rule.hold", holdKeys...); ok {
		d.need(hm, "n", "")
		d.need(hm, "k", "")
		if nn, ok := hm.vals["n"]; ok {
			r.Hold.N, _ = d.integer(nn, "rule.hold.n", 1, MaxWindows)
		}
		if kn, ok := hm.vals["k"]; ok {
			if k, ok := d.integer(kn, "rule.hold.k", 1, MaxWindows); ok {
				if r.Hold.N > 0 && k > r.Hold.N {
					d.fail(kn, "rule.hold.k", "%d is above n (%d); want 1 <= k <= n", k, r.Hold.N)
				}
				r.Hold.K = k
			}
		}
	}
	if mn, ok := m.vals["min_nodes"]; ok {
		if v, ok := d.integer(mn, "rule.min_nodes", 1, MaxMinNodes); ok {
			r.MinNodes = v
		}
	}
	r.All = d.conditions(m, "all", r.MinNodes)
	r.Any = d.conditions(m, "any", r.MinNodes)
	_, hasAll := m.vals["all"]
	_, hasAny := m.vals["any"]
	if !hasAll && !hasAny {
		d.fail(m.node, "rule", "no conditions; give all, any or both")
	}
	return r
}

// conditions decodes rule.all or rule.any.
func (d *decoder) conditions(m mapping, key string, minNodes int) []Condition {
	n, ok := m.vals[key]
	if !ok {
		return nil
	}
	field := "rule." + key
	if n.Kind != yaml.SequenceNode {
		d.fail(n, field, "want a list of conditions, got %s", describe(n))
		return nil
	}
	if len(n.Content) == 0 {
		d.fail(n, field, "empty list; remove it or give conditions")
		return nil
	}
	if len(n.Content) > MaxConditions {
		d.fail(n, field, "%d conditions; at most %d", len(n.Content), MaxConditions)
		return nil
	}
	out := make([]Condition, 0, len(n.Content))
	for i, c := range n.Content {
		cond, ok := d.condition(c, fmt.Sprintf("%s[%d]", field, i), minNodes)
		if ok {
			out = append(out, cond)
		}
	}
	return out
}

func (d *decoder) condition(n *yaml.Node, path string, minNodes int) (Condition, bool) {
	var c Condition
	m, ok := d.mapping(n, path, conditionKeys...)
	if !ok {
		return c, false
	}
	errs := len(d.errs)
	mk, hasMetric := m.vals["metric"]
	dk, hasDerived := m.vals["derived"]
	switch {
	case hasMetric && hasDerived:
		d.fail(m.keys["derived"], join(path, "derived"), "give metric or derived, not both")
		return c, false
	case !hasMetric && !hasDerived:
		d.fail(n, path, "want metric or derived (e.g. {metric: creates, level: critical})")
		return c, false
	case hasMetric:
		if s, ok := d.str(mk, join(path, "metric")); ok {
			id, err := metric.Parse(s)
			if err != nil {
				d.fail(mk, join(path, "metric"), "%v", err)
			}
			c.Metric = id
		}
	default:
		if s, ok := d.str(dk, join(path, "derived")); ok {
			q, err := ParseQuantity(s)
			switch {
			case err != nil:
				d.fail(dk, join(path, "derived"), "%v; want one of %s", err, quantityList())
			case q.NeedsNodes() && minNodes < 2:
				d.fail(dk, join(path, "derived"), "%s is defined only for jobs of 2 or more nodes; set rule.min_nodes to at least 2", q)
			}
			c.Quantity = q
		}
	}
	var ops []Comparison // the comparisons given, in file order
	for op := LevelAtLeast; op <= Above; op++ {
		if _, ok := m.keys[op.String()]; ok {
			ops = append(ops, op)
		}
	}
	slices.SortFunc(ops, func(a, b Comparison) int { return m.keys[a.String()].Line - m.keys[b.String()].Line })
	var opKey *yaml.Node
	for _, op := range ops {
		kn := m.keys[op.String()]
		field := join(path, op.String())
		switch {
		case opKey != nil:
			d.fail(kn, field, "one comparison per condition (%s is on line %d)", opKey.Value, opKey.Line)
			continue
		case op.onMetric() && !hasMetric:
			d.fail(kn, field, "%s compares a metric; use below or above with derived", op)
		case !op.onMetric() && !hasDerived:
			d.fail(kn, field, "%s compares a derived quantity; use level, level_at_most, grade_at_least or grade_at_most with metric", op)
		}
		opKey, c.Op = kn, op
		d.operand(&c, m.vals[op.String()], field)
	}
	if opKey == nil {
		if hasMetric {
			d.fail(n, path, "no comparison; want one of level, level_at_most, grade_at_least, grade_at_most")
		} else {
			d.fail(n, path, "no comparison; want below or above")
		}
	}
	return c, len(d.errs) == errs
}

// operand decodes the value of c.Op.
func (d *decoder) operand(c *Condition, n *yaml.Node, field string) {
	switch c.Op {
	case LevelAtLeast, LevelAtMost:
		s, ok := d.str(n, field)
		if !ok {
			return
		}
		if err := c.Level.UnmarshalText([]byte(s)); err != nil {
			d.fail(n, field, "%v; want normal, elevated or critical", err)
			return
		}
		if c.Op == LevelAtLeast && c.Level == coding.Normal || c.Op == LevelAtMost && c.Level == coding.Critical {
			d.fail(n, field, "%s %s always holds; drop the condition", c.Op, c.Level)
		}
	case GradeAtLeast, GradeAtMost:
		g, ok := d.integer(n, field, 0, int(coding.GradeTop))
		if !ok {
			return
		}
		c.Grade = coding.Grade(g)
		if c.Op == GradeAtLeast && c.Grade == coding.GradeIdle || c.Op == GradeAtMost && c.Grade == coding.GradeTop {
			d.fail(n, field, "%s %d always holds; drop the condition", c.Op, g)
		}
	case Below, Above:
		v, ok := d.number(n, field)
		if !ok {
			return
		}
		c.Value = v
		switch {
		case c.Op == Below && v <= 0:
			d.fail(n, field, "below %s never holds: derived quantities are never negative", n.Value)
		case c.Op == Above && c.Quantity == BusiestNodeShare && v >= 1:
			d.fail(n, field, "above %s never holds: a share is at most 1", n.Value)
		}
	}
}

func quantityList() string {
	var names []string
	for _, q := range Quantities() {
		names = append(names, q.String())
	}
	return strings.Join(names, ", ")
}

// example decodes the example: its method, last (KS only), metrics and
// one grade string per metric, all of the same length.
func (d *decoder) example(n *yaml.Node) *Example {
	m, ok := d.mapping(n, "example", exampleKeys...)
	if !ok {
		return nil
	}
	e := &Example{}
	d.exampleMethod(m, e)
	d.exampleLast(m, e)
	d.need(m, "metrics", "; e.g. metrics: [creates, stat_ops]")
	d.need(m, "grades", "; e.g. grades: {creates: \"566666\"}")
	mn, hasMetrics := m.vals["metrics"]
	gn, hasGrades := m.vals["grades"]
	if !hasMetrics || !hasGrades {
		return e
	}
	index, ok := d.exampleMetrics(mn, e)
	if !ok {
		return e
	}
	if gn.Kind != yaml.MappingNode {
		d.fail(gn, "example.grades", "want a mapping from metric names to grade strings, got %s", describe(gn))
		return e
	}
	keys := d.gradeKeys(gn, index)
	d.exampleGrades(e, mn, gn, index, keys)
	return e
}

// exampleMethod decodes the required example.method.
func (d *decoder) exampleMethod(m mapping, e *Example) {
	mn, ok := m.vals["method"]
	if !ok {
		d.need(m, "method", "; want sellers, ks or euclidean")
		return
	}
	if s, ok := d.str(mn, "example.method"); ok {
		if err := e.Method.UnmarshalText([]byte(s)); err != nil {
			d.fail(mn, "example.method", "%v", err)
		}
	}
}

// exampleLast decodes example.last, which only method ks takes; the method
// must be decoded first.
func (d *decoder) exampleLast(m mapping, e *Example) {
	ln, ok := m.vals["last"]
	if !ok {
		return
	}
	if v, ok := d.integer(ln, "example.last", 1, MaxLast); ok {
		if e.Method != KS {
			d.fail(m.keys["last"], "example.last", "only for method ks")
		}
		e.Last = v
	}
}

// exampleMetrics decodes example.metrics, a list of distinct metric names,
// into e.Metrics and returns each metric's position in the list; ok is
// false when mn is not a non-empty list.
func (d *decoder) exampleMetrics(mn *yaml.Node, e *Example) (index map[metric.ID]int, ok bool) {
	if mn.Kind != yaml.SequenceNode || len(mn.Content) == 0 {
		d.fail(mn, "example.metrics", "want a non-empty list of metric names, got %s", describe(mn))
		return nil, false
	}
	index = map[metric.ID]int{}
	for i, item := range mn.Content {
		field := fmt.Sprintf("example.metrics[%d]", i)
		s, ok := d.str(item, field)
		if !ok {
			continue
		}
		id, err := metric.Parse(s)
		if err != nil {
			d.fail(item, field, "%v", err)
			continue
		}
		if j, ok := index[id]; ok {
			d.fail(item, field, "%s is listed twice (also on line %d)", id, mn.Content[j].Line)
			continue
		}
		index[id] = i
		e.Metrics = append(e.Metrics, id)
	}
	return index, true
}

// gradeKeys checks the keys of example.grades, a mapping gn, against the
// metrics listed (index) and returns each valid metric's key node.
func (d *decoder) gradeKeys(gn *yaml.Node, index map[metric.ID]int) map[metric.ID]*yaml.Node {
	keys := map[metric.ID]*yaml.Node{}
	for i := 0; i+1 < len(gn.Content); i += 2 {
		k := gn.Content[i]
		if k.Kind != yaml.ScalarNode || k.ShortTag() != "!!str" {
			d.fail(k, "example.grades", "keys must be metric names, got %s", describe(k))
			continue
		}
		field := "example.grades." + k.Value
		id, err := metric.Parse(k.Value)
		switch {
		case err != nil:
			d.fail(k, field, "%v", err)
			continue
		case keys[id] != nil:
			d.fail(k, field, "given twice (first on line %d)", keys[id].Line)
			continue
		}
		keys[id] = k
		if _, ok := index[id]; !ok {
			d.fail(k, field, "%s is not in example.metrics", id)
		}
	}
	return keys
}

// exampleGrades decodes the grade string of each metric listed into
// e.Grades; every string must have as many windows as the first good one.
func (d *decoder) exampleGrades(e *Example, mn, gn *yaml.Node, index map[metric.ID]int, keys map[metric.ID]*yaml.Node) {
	e.Grades = make([][]coding.Grade, len(e.Metrics))
	var first metric.ID
	firstLen := -1
	for t, id := range e.Metrics {
		k := keys[id]
		if k == nil {
			i := index[id]
			d.fail(mn.Content[i], fmt.Sprintf("example.metrics[%d]", i), "%s has no grade string in example.grades", id)
			continue
		}
		gs, ok := d.gradeString(valueOf(gn, k), "example.grades."+id.String(), first, firstLen)
		if !ok {
			continue
		}
		if firstLen < 0 {
			first, firstLen = id, len(gs)
		}
		e.Grades[t] = gs
	}
}

// gradeString decodes one metric's grade string vn: 1 to MaxWindows
// grades, and firstLen of them when metric first had firstLen (-1 when no
// metric came before).
func (d *decoder) gradeString(vn *yaml.Node, field string, first metric.ID, firstLen int) ([]coding.Grade, bool) {
	if vn.Kind != yaml.ScalarNode || vn.ShortTag() != "!!str" {
		d.fail(vn, field, "want a quoted string of grade digits (e.g. \"566666\"), got %s", describe(vn))
		return nil, false
	}
	gs, err := coding.ParseGrades(vn.Value)
	switch {
	case err != nil:
		d.fail(vn, field, "%v", err)
	case len(gs) == 0:
		d.fail(vn, field, "no grades; want 1 to %d", MaxWindows)
	case len(gs) > MaxWindows:
		d.fail(vn, field, "%d grades; at most %d windows", len(gs), MaxWindows)
	case firstLen >= 0 && len(gs) != firstLen:
		d.fail(vn, field, "%d windows, but %s has %d; every metric needs the same number", len(gs), first, firstLen)
	default:
		return gs, true
	}
	return nil, false
}

// valueOf returns the value of key node k in mapping n.
func valueOf(n, k *yaml.Node) *yaml.Node {
	for i := 0; i+1 < len(n.Content); i += 2 {
		if n.Content[i] == k {
			return n.Content[i+1]
		}
	}
	return nil
}
