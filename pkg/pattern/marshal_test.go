package pattern_test

import (
	"bytes"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// roundTrip checks Parse(Marshal(p)) == p and that marshalling again
// gives the same bytes.
func roundTrip(t *testing.T, p *pattern.Pattern) []byte {
	t.Helper()
	out, err := p.Marshal()
	require.NoError(t, err)
	q, err := pattern.Parse(p.Source, bytes.NewReader(out))
	require.NoError(t, err, "%s", out)
	assert.Equal(t, p, q, "%s", out)
	again, err := q.Marshal()
	require.NoError(t, err)
	assert.Equal(t, string(out), string(again))
	return out
}

func TestMarshalRoundTripBuiltin(t *testing.T) {
	lib, err := pattern.Builtin()
	require.NoError(t, err)
	for _, p := range lib {
		t.Run(p.Name, func(t *testing.T) { roundTrip(t, p) })
	}
}

func TestMarshalRoundTripExample(t *testing.T) {
	roundTrip(t, loadFixture(t, "checkpoint_burst.yaml"))
}

// TestMarshalLearned is what `patterns learn` does: build an example from
// a signature and write it; the exact output is the format's reference.
func TestMarshalLearned(t *testing.T) {
	g := func(s string) []coding.Grade {
		gs, err := coding.ParseGrades(s)
		require.NoError(t, err)
		return gs
	}
	p := &pattern.Pattern{
		Source:      "learned_81234.yaml",
		Name:        "learned_81234",
		Title:       "Like job 81234",
		Description: "Learned from job 81234.\nEdit before use.",
		Rationale:   "Job 81234 overloaded the metadata servers.",
		Advice:      "Consider contacting the user; follow your site's policy.",
		Severity:    model.SeverityWarning,
		RaiseAfter:  2,
		ClearAfter:  3,
		Threshold:   0.85,
		Example: &pattern.Example{
			Method:  pattern.KS,
			Metrics: []metric.ID{metric.Creates, metric.StatOps},
			Grades:  [][]coding.Grade{g("0566"), g("1456")},
			Last:    12,
		},
	}
	out := roundTrip(t, p)
	assert.Equal(t, `schema: 1
name: learned_81234
title: Like job 81234
severity: warning
description: |-
  Learned from job 81234.
  Edit before use.
rationale: Job 81234 overloaded the metadata servers.
advice: Consider contacting the user; follow your site's policy.
raise_after: 2
clear_after: 3
threshold: 0.85
example:
  method: ks
  metrics: [creates, stat_ops]
  last: 12
  grades:
    creates: "0566"
    stat_ops: "1456"
`, string(out))
}

func TestMarshalRule(t *testing.T) {
	p := &pattern.Pattern{
		Source: "r.yaml", Name: "rule_pattern", Title: "A rule", Description: "d", Rationale: "r",
		Advice: "a", Severity: model.SeverityCritical, RaiseAfter: 1, ClearAfter: 4, Threshold: 0.5,
		Rule: &pattern.Rule{
			Hold:     pattern.Hold{K: 1, N: 2},
			MinNodes: 2,
			All: []pattern.Condition{
				{Op: pattern.Above, Quantity: pattern.NodeSpread, Value: 1.25},
				{Op: pattern.Below, Quantity: pattern.DataBytes, Value: 1e20},
			},
			Any: []pattern.Condition{
				{Op: pattern.LevelAtLeast, Metric: metric.Creates, Level: coding.Elevated},
				{Op: pattern.GradeAtMost, Metric: metric.ReadBytes, Grade: 1},
			},
		},
	}
	out := roundTrip(t, p)
	assert.Contains(t, string(out), `rule:
  hold: {k: 1, n: 2}
  min_nodes: 2
  all:
    - {derived: node_spread, above: 1.25}
    - {derived: data_bytes, below: 1e+20}
  any:
    - {metric: creates, level: elevated}
    - {metric: read_bytes, grade_at_most: 1}
`)
	assert.NotContains(t, string(out), "threshold")
}

func TestMarshalDefaults(t *testing.T) {
	p := &pattern.Pattern{
		Name: "zero_settings", Title: "t", Description: "d", Rationale: "r", Advice: "a",
		Rule: &pattern.Rule{Hold: pattern.Hold{K: 1, N: 1}, All: []pattern.Condition{
			{Op: pattern.LevelAtLeast, Metric: metric.Syncs, Level: coding.Critical}}},
	}
	out, err := p.Marshal()
	require.NoError(t, err)
	assert.NotContains(t, string(out), "raise_after")
	assert.NotContains(t, string(out), "min_nodes")
	q, err := pattern.Parse("z.yaml", bytes.NewReader(out))
	require.NoError(t, err)
	assert.Equal(t, pattern.DefaultRaiseAfter, q.RaiseAfter)
	assert.Equal(t, pattern.DefaultClearAfter, q.ClearAfter)
	assert.Equal(t, 1, q.Rule.MinNodes)
	assert.Equal(t, 1.0, q.Threshold)
}

func TestMarshalErrors(t *testing.T) {
	valid := func() *pattern.Pattern {
		return &pattern.Pattern{
			Name: "valid_name", Title: "t", Description: "d", Rationale: "r", Advice: "a",
			Rule: &pattern.Rule{Hold: pattern.Hold{K: 2, N: 3}, All: []pattern.Condition{
				{Op: pattern.LevelAtLeast, Metric: metric.Syncs, Level: coding.Critical}}},
		}
	}
	tests := []struct {
		name   string
		modify func(p *pattern.Pattern)
		want   string
	}{
		{"neither rule nor example", func(p *pattern.Pattern) { p.Rule = nil }, "want exactly one of Rule and Example"},
		{"both", func(p *pattern.Pattern) { p.Example = &pattern.Example{} }, "want exactly one of Rule and Example"},
		{"rule threshold not k/n", func(p *pattern.Pattern) { p.Threshold = 0.9 }, "threshold 0.9 of a rule must be hold.k/hold.n = 2/3"},
		{"bad name", func(p *pattern.Pattern) { p.Name = "Bad" }, `the output does not parse: Bad.yaml:2: name: "Bad" is not a valid name`},
		{"empty advice", func(p *pattern.Pattern) { p.Advice = "" }, "advice: must not be empty"},
		{"k above n", func(p *pattern.Pattern) { p.Rule.Hold.K = 4 }, "rule.hold.k: 4 is above n (3)"},
		{"invalid level condition", func(p *pattern.Pattern) { p.Rule.All[0].Level = coding.Normal }, "rule.all[0].level: level normal always holds"},
		{"example with uneven grades", func(p *pattern.Pattern) {
			p.Rule = nil
			p.Example = &pattern.Example{Metrics: []metric.ID{metric.Opens, metric.Closes},
				Grades: [][]coding.Grade{{1, 2}, {1}}}
		}, "example.grades.closes: 1 windows, but opens has 2"},
		{"example missing grades", func(p *pattern.Pattern) {
			p.Rule = nil
			p.Example = &pattern.Example{Metrics: []metric.ID{metric.Opens}}
		}, "example.grades.opens: no grades"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p := valid()
			tt.modify(p)
			_, err := p.Marshal()
			assert.ErrorContains(t, err, tt.want)
		})
	}
}

// TestMarshalRoundTripRandom round-trips random valid patterns: random
// conditions and examples, and text with characters YAML treats specially.
func TestMarshalRoundTripRandom(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	texts := []string{"plain", "a: b", "- dash", "#hash", "'single'", `"double"`, "yes", "null", "~", "1e3", "012",
		"two\nlines", "tab\there", "trailing  \nspace", "x\n\n\ny", "%percent", "@at", "`tick", "line\n---\nsep",
		"ünïcödé ✓", "a\u2028b", "{flow}", "[list]", "& amp", "* star", "! bang", "| pipe", "> gt"}
	text := func() string { return texts[rng.IntN(len(texts))] }
	cond := func(minNodes int) pattern.Condition {
		switch rng.IntN(6) {
		case 0:
			return pattern.Condition{Op: pattern.LevelAtLeast, Metric: metric.ID(rng.IntN(int(metric.Count))), Level: coding.Level(1 + rng.IntN(2))}
		case 1:
			return pattern.Condition{Op: pattern.LevelAtMost, Metric: metric.ID(rng.IntN(int(metric.Count))), Level: coding.Level(rng.IntN(2))}
		case 2:
			return pattern.Condition{Op: pattern.GradeAtLeast, Metric: metric.ID(rng.IntN(int(metric.Count))), Grade: coding.Grade(1 + rng.IntN(6))}
		case 3:
			return pattern.Condition{Op: pattern.GradeAtMost, Metric: metric.ID(rng.IntN(int(metric.Count))), Grade: coding.Grade(rng.IntN(6))}
		}
		qs := pattern.Quantities()
		q := qs[rng.IntN(len(qs))]
		for q.NeedsNodes() && minNodes < 2 {
			q = qs[rng.IntN(len(qs))]
		}
		v := []float64{0.5, 1e-9, 65536, 1048576, 0.1 + 0.2, 1e21, 123456789.125, rng.Float64()}[rng.IntN(8)]
		if q == pattern.BusiestNodeShare {
			v = rng.Float64() * 0.99
		}
		if v == 0 {
			v = 0.25
		}
		if rng.IntN(2) == 0 {
			return pattern.Condition{Op: pattern.Below, Quantity: q, Value: v}
		}
		return pattern.Condition{Op: pattern.Above, Quantity: q, Value: v}
	}
	for i := range 500 {
		p := &pattern.Pattern{
			Source: "random.yaml", Name: "random_pattern", Title: strings.NewReplacer("\n", " ", "\u2028", " ").Replace(text()),
			Description: text(), Rationale: text(), Advice: text(),
			Severity: model.Severity(rng.IntN(3)), RaiseAfter: 1 + rng.IntN(64), ClearAfter: 1 + rng.IntN(64),
		}
		if i%2 == 0 {
			n := 1 + rng.IntN(64)
			r := &pattern.Rule{Hold: pattern.Hold{K: 1 + rng.IntN(n), N: n}, MinNodes: 1 + rng.IntN(8)}
			for range rng.IntN(4) {
				r.All = append(r.All, cond(r.MinNodes))
			}
			for range rng.IntN(4) {
				r.Any = append(r.Any, cond(r.MinNodes))
			}
			if len(r.All)+len(r.Any) == 0 {
				r.All = append(r.All, cond(r.MinNodes))
			}
			p.Rule, p.Threshold = r, float64(r.Hold.K)/float64(r.Hold.N)
		} else {
			e := &pattern.Example{Method: pattern.Method(rng.IntN(3))}
			length := 1 + rng.IntN(64)
			for _, id := range rng.Perm(int(metric.Count))[:1+rng.IntN(int(metric.Count))] {
				e.Metrics = append(e.Metrics, metric.ID(id))
				gs := make([]coding.Grade, length)
				for j := range gs {
					gs[j] = coding.Grade(rng.IntN(coding.GradeCount))
				}
				e.Grades = append(e.Grades, gs)
			}
			if e.Method == pattern.KS && rng.IntN(2) == 0 {
				e.Last = 1 + rng.IntN(pattern.MaxLast)
			}
			p.Example, p.Threshold = e, 0.01+0.99*rng.Float64()
		}
		roundTrip(t, p)
		if t.Failed() {
			break
		}
	}
}
