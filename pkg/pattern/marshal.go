package pattern

import (
	"bytes"
	"fmt"
	"math"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"

	"sluice/pkg/coding"
)

// Marshal writes p in the pattern file format, fields in the order the
// package doc lists them, ready to edit (this is how `aggregator patterns
// learn` writes an example from a job's signature). Zero RaiseAfter,
// ClearAfter, Threshold and Rule.MinNodes mean their defaults; for a rule,
// Threshold must be zero or hold.k / hold.n and is not written. Source is
// not written. The output is checked by parsing it back, so Marshal never
// writes a file Parse refuses; the error then names the output's lines.
func (p *Pattern) Marshal() ([]byte, error) {
	if (p.Rule == nil) == (p.Example == nil) {
		return nil, fmt.Errorf("marshal pattern %q: want exactly one of Rule and Example", p.Name)
	}
	top := mappingNode()
	add(top, "schema", intNode(Schema))
	add(top, "name", strNode(p.Name))
	add(top, "title", strNode(p.Title))
	add(top, "severity", strNode(p.Severity.String()))
	add(top, "description", textNode(p.Description))
	add(top, "rationale", textNode(p.Rationale))
	add(top, "advice", textNode(p.Advice))
	if p.RaiseAfter != 0 {
		add(top, "raise_after", intNode(p.RaiseAfter))
	}
	if p.ClearAfter != 0 {
		add(top, "clear_after", intNode(p.ClearAfter))
	}
	if p.Rule != nil {
		r := p.Rule
		if p.Threshold != 0 && r.Hold.N > 0 && p.Threshold != float64(r.Hold.K)/float64(r.Hold.N) {
			return nil, fmt.Errorf("marshal pattern %q: threshold %g of a rule must be hold.k/hold.n = %d/%d",
				p.Name, p.Threshold, r.Hold.K, r.Hold.N)
		}
		add(top, "rule", ruleNode(r))
	} else {
		if p.Threshold != 0 {
			add(top, "threshold", floatNode(p.Threshold))
		}
		add(top, "example", exampleNode(p.Example))
	}
	var buf bytes.Buffer
	enc := yaml.NewEncoder(&buf)
	enc.SetIndent(2)
	if err := enc.Encode(top); err != nil {
		return nil, fmt.Errorf("marshal pattern %q: %w", p.Name, err)
	}
	if err := enc.Close(); err != nil {
		return nil, fmt.Errorf("marshal pattern %q: %w", p.Name, err)
	}
	name := p.Name + ".yaml"
	if _, _, err := parse(name, buf.Bytes()); err != nil {
		return nil, fmt.Errorf("marshal pattern %q: the output does not parse: %w", p.Name, err)
	}
	return buf.Bytes(), nil
}

func ruleNode(r *Rule) *yaml.Node {
	n := mappingNode()
	hold := mappingNode()
	hold.Style = yaml.FlowStyle
	add(hold, "k", intNode(r.Hold.K))
	add(hold, "n", intNode(r.Hold.N))
	add(n, "hold", hold)
	if r.MinNodes > 1 {
		add(n, "min_nodes", intNode(r.MinNodes))
	}
	if len(r.All) > 0 {
		add(n, "all", conditionsNode(r.All))
	}
	if len(r.Any) > 0 {
		add(n, "any", conditionsNode(r.Any))
	}
	return n
}

func conditionsNode(cs []Condition) *yaml.Node {
	seq := &yaml.Node{Kind: yaml.SequenceNode, Tag: "!!seq"}
	for _, c := range cs {
		m := mappingNode()
		m.Style = yaml.FlowStyle
		switch c.Op {
		case LevelAtLeast, LevelAtMost:
			add(m, "metric", strNode(c.Metric.String()))
			add(m, c.Op.String(), strNode(c.Level.String()))
		case GradeAtLeast, GradeAtMost:
			add(m, "metric", strNode(c.Metric.String()))
			add(m, c.Op.String(), intNode(int(c.Grade)))
		default:
			add(m, "derived", strNode(c.Quantity.String()))
			add(m, c.Op.String(), floatNode(c.Value))
		}
		seq.Content = append(seq.Content, m)
	}
	return seq
}

func exampleNode(e *Example) *yaml.Node {
	n := mappingNode()
	add(n, "method", strNode(e.Method.String()))
	metrics := &yaml.Node{Kind: yaml.SequenceNode, Tag: "!!seq", Style: yaml.FlowStyle}
	grades := mappingNode()
	for i, id := range e.Metrics {
		metrics.Content = append(metrics.Content, strNode(id.String()))
		var gs []coding.Grade
		if i < len(e.Grades) {
			gs = e.Grades[i]
		}
		g := strNode(coding.FormatGrades(gs))
		g.Style = yaml.DoubleQuotedStyle
		add(grades, id.String(), g)
	}
	add(n, "metrics", metrics)
	if e.Last != 0 {
		add(n, "last", intNode(e.Last))
	}
	add(n, "grades", grades)
	return n
}

func mappingNode() *yaml.Node { return &yaml.Node{Kind: yaml.MappingNode, Tag: "!!map"} }

func add(m *yaml.Node, key string, v *yaml.Node) {
	m.Content = append(m.Content, strNode(key), v)
}

func strNode(s string) *yaml.Node { return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: s} }

// textNode writes multi-line text as a literal block.
func textNode(s string) *yaml.Node {
	n := strNode(s)
	if strings.Contains(s, "\n") {
		n.Style = yaml.LiteralStyle
	}
	return n
}

func intNode(v int) *yaml.Node {
	return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!int", Value: strconv.Itoa(v)}
}

// floatNode writes a number, tagged as YAML resolves its text so that no
// explicit tag is written.
func floatNode(v float64) *yaml.Node {
	s := formatFloat(v)
	tag := "!!int"
	if strings.ContainsAny(s, ".eE") {
		tag = "!!float"
	}
	return &yaml.Node{Kind: yaml.ScalarNode, Tag: tag, Value: s}
}

// formatFloat writes v exactly and readably: whole numbers below 2^53 as
// integers (65536, not 6.5536e+04), others in the shortest form that reads
// back as the same float64.
func formatFloat(v float64) string {
	if v == math.Trunc(v) && math.Abs(v) < 1<<53 {
		return strconv.FormatFloat(v, 'f', -1, 64)
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}
