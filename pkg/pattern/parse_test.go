package pattern_test

import (
	"errors"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"testing/iotest"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// testdata is the repository's fixture directory for this package.
var testdata = filepath.Join("..", "..", "testdata", "patterns")

// head is a valid pattern header of 7 lines; a body appended to it starts
// on line 8.
const head = `schema: 1
name: test_pattern
title: Test pattern
severity: warning
description: A test.
rationale: Because.
advice: Consider it; follow your site's policy.
`

// rule is a valid rule body: lines 8 to 11 after head.
const rule = `rule:
  hold: {k: 2, n: 3}
  all:
    - {metric: creates, level: critical}
`

// example is a valid example body: lines 8 to 11 after head.
const example = `example:
  method: ks
  metrics: [creates, stat_ops]
  grades: {creates: "566", stat_ops: "456"}
`

// without returns head without the line starting with key.
func without(key string) string {
	var b strings.Builder
	for _, l := range strings.SplitAfter(head, "\n") {
		if !strings.HasPrefix(l, key+":") {
			b.WriteString(l)
		}
	}
	return b.String()
}

// replace returns head with the line of key replaced by line.
func replace(key, line string) string {
	var b strings.Builder
	for _, l := range strings.SplitAfter(head, "\n") {
		if strings.HasPrefix(l, key+":") {
			l = line + "\n"
		}
		b.WriteString(l)
	}
	return b.String()
}

// conds returns a rule body (from line 8) with the given lines under all:,
// the first of them on line 11.
func conds(lines ...string) string {
	return "rule:\n  hold: {k: 1, n: 1}\n  all:\n    " + strings.Join(lines, "\n    ") + "\n"
}

func TestParseErrors(t *testing.T) {
	tests := []struct {
		name  string
		input string
		want  string // a part of the message, normally "bad.yaml:line: field: ..."
		more  bool   // the input has further errors, not only want
	}{
		// The document.
		{name: "empty file", input: "", want: "bad.yaml:1: empty file"},
		{name: "only a comment", input: "# nothing\n", want: "bad.yaml:1: empty file"},
		{name: "not a mapping", input: "- a\n- b\n", want: "bad.yaml:1: want a mapping, got a list"},
		{name: "a scalar", input: "hello\n", want: `bad.yaml:1: want a mapping, got !!str "hello"`},
		{name: "two documents", input: head + rule + "---\nschema: 1\n", want: "bad.yaml:12: a second YAML document"},
		{name: "syntax error", input: head + "rule: [\n", want: "bad.yaml: yaml: line"},
		{name: "anchor", input: head + "rule: &r\n  hold: {k: 1, n: 1}\n", want: "bad.yaml:8: YAML anchors and aliases are not supported"},
		{name: "alias", input: head + "clear_after: &c 2\nraise_after: *c\n" + rule, want: "bad.yaml:8: YAML anchors"},
		{name: "merge key", input: head + rule + "<<: {x: 1}\n", want: `bad.yaml:12: field names must be plain strings, got !!merge "<<"`},
		{name: "unknown field", input: head + "colour: red\n" + rule, want: "bad.yaml:8: colour: unknown field; want one of schema, name,"},
		{name: "field twice", input: head + "title: Again\n" + rule, want: "bad.yaml:8: title: given twice (first on line 3)"},
		{name: "field name not a string", input: head + "1: one\n" + rule, want: "bad.yaml:8: field names must be plain strings, got !!int"},
		{name: "neither rule nor example", input: head, want: "bad.yaml:1: no rule and no example; give exactly one"},
		{name: "rule and example", input: head + rule + example, want: "bad.yaml:12: example: give rule or example, not both (rule is on line 8)"},
		{name: "example and rule", input: head + example + rule, want: "bad.yaml:12: rule: give rule or example, not both (example is on line 8)"},

		// schema.
		{name: "schema missing", input: without("schema") + rule, want: "bad.yaml:1: schema: required (the supported schema is 1)"},
		{name: "schema 2", input: replace("schema", "schema: 2") + rule, want: "bad.yaml:1: schema: unsupported schema 2; the supported schema is 1"},
		{name: "schema quoted", input: replace("schema", `schema: "1"`) + rule, want: "bad.yaml:1: schema: unsupported schema 1; the supported schema is 1"},
		{name: "schema 2 stops", input: "schema: 2\nname: Bad\n", want: "bad.yaml:1: schema: unsupported schema 2"},

		// name.
		{name: "name missing", input: without("name") + rule, want: "bad.yaml:1: name: required"},
		{name: "name with capitals", input: replace("name", "name: Metadata-Storm") + rule, want: `bad.yaml:2: name: "Metadata-Storm" is not a valid name`},
		{name: "name of one letter", input: replace("name", "name: a") + rule, want: `bad.yaml:2: name: "a" is not a valid name`},
		{name: "name starting with a digit", input: replace("name", "name: 1storm") + rule, want: `bad.yaml:2: name: "1storm" is not a valid name`},
		{name: "name too long", input: replace("name", "name: a"+strings.Repeat("b", 63)) + rule, want: "bad.yaml:2: name: \"abbb"},
		{name: "name not a string", input: replace("name", "name: 12") + rule, want: `bad.yaml:2: name: want a string, got !!int "12"`},

		// title.
		{name: "title missing", input: without("title") + rule, want: "bad.yaml:1: title: required"},
		{name: "title empty", input: replace("title", `title: "  "`) + rule, want: "bad.yaml:3: title: must not be empty"},
		{name: "title null", input: replace("title", "title:") + rule, want: "bad.yaml:3: title: want a string, got nothing (null)"},
		{name: "title two lines", input: replace("title", `title: "one\ntwo"`) + rule, want: "bad.yaml:3: title: must be one line"},
		{name: "title too long", input: replace("title", "title: "+strings.Repeat("x", 81)) + rule, want: "bad.yaml:3: title: 81 characters; keep it to 80"},
		{name: "title with an escape", input: replace("title", `title: "red \e[31m"`) + rule, want: "bad.yaml:3: title: contains the control character U+001B"},
		{name: "title a list", input: replace("title", "title: [a]") + rule, want: "bad.yaml:3: title: want a string, got a list"},

		// description, rationale, advice.
		{name: "description missing", input: without("description") + rule, want: "bad.yaml:1: description: required"},
		{name: "description empty", input: replace("description", `description: ""`) + rule, want: "bad.yaml:5: description: must not be empty"},
		{name: "description with a bell", input: replace("description", `description: "ding\a"`) + rule, want: "bad.yaml:5: description: contains the control character U+0007"},
		{name: "description too long", input: replace("description", "description: "+strings.Repeat("x", 4097)) + rule, want: "bad.yaml:5: description: 4097 bytes; keep it to 4096"},
		{name: "rationale missing", input: without("rationale") + rule, want: "bad.yaml:1: rationale: required"},
		{name: "rationale empty", input: replace("rationale", "rationale: ''") + rule, want: "bad.yaml:6: rationale: must not be empty"},
		{name: "rationale a number", input: replace("rationale", "rationale: 3") + rule, want: `bad.yaml:6: rationale: want a string, got !!int "3"`},
		{name: "advice missing", input: without("advice") + rule, want: "bad.yaml:1: advice: required"},
		{name: "advice empty", input: replace("advice", "advice: |\n\n") + rule, want: "bad.yaml:7: advice: must not be empty"},
		{name: "advice a mapping", input: replace("advice", "advice: {a: b}") + rule, want: "bad.yaml:7: advice: want a string, got a mapping"},

		// severity.
		{name: "severity missing", input: without("severity") + rule, want: "bad.yaml:1: severity: required; want info, warning or critical"},
		{name: "severity unknown", input: replace("severity", "severity: high") + rule, want: `bad.yaml:4: severity: unknown severity "high"; want info, warning or critical`},
		{name: "severity a number", input: replace("severity", "severity: 2") + rule, want: `bad.yaml:4: severity: want a string, got !!int "2"`},

		// raise_after, clear_after, threshold.
		{name: "raise_after 0", input: head + "raise_after: 0\n" + rule, want: "bad.yaml:8: raise_after: 0 is out of range; want 1 to 64"},
		{name: "raise_after 65", input: head + "raise_after: 65\n" + rule, want: "bad.yaml:8: raise_after: 65 is out of range; want 1 to 64"},
		{name: "raise_after fraction", input: head + "raise_after: 1.5\n" + rule, want: `bad.yaml:8: raise_after: want an integer, got !!float "1.5"`},
		{name: "raise_after huge", input: head + "raise_after: 99999999999999999999\n" + rule, want: "bad.yaml:8: raise_after: want an integer"},
		{name: "clear_after 0", input: head + "clear_after: 0\n" + rule, want: "bad.yaml:8: clear_after: 0 is out of range; want 1 to 64"},
		{name: "clear_after a string", input: head + "clear_after: soon\n" + rule, want: `bad.yaml:8: clear_after: want an integer, got !!str "soon"`},
		{name: "threshold with a rule", input: head + "threshold: 0.5\n" + rule, want: "bad.yaml:8: threshold: not used with rule"},
		{name: "threshold 0", input: head + "threshold: 0\n" + example, want: "bad.yaml:8: threshold: 0 is out of range; want a score above 0 and at most 1"},
		{name: "threshold above 1", input: head + "threshold: 1.01\n" + example, want: "bad.yaml:8: threshold: 1.01 is out of range"},
		{name: "threshold NaN", input: head + "threshold: .nan\n" + example, want: "bad.yaml:8: threshold: want a finite number, got .nan"},
		{name: "threshold a word", input: head + "threshold: high\n" + example, want: `bad.yaml:8: threshold: want a number, got !!str "high"`},

		// rule.
		{name: "rule a string", input: head + "rule: storm\n", want: `bad.yaml:8: rule: want a mapping, got !!str "storm"`},
		{name: "rule unknown field", input: head + rule + "  when: always\n", want: "bad.yaml:12: rule.when: unknown field; want one of hold, min_nodes, all, any"},
		{name: "rule without hold", input: head + "rule:\n  all:\n    - {metric: creates, level: critical}\n", want: "bad.yaml:9: rule.hold: required; e.g. hold: {k: 2, n: 3}"},
		{name: "hold a number", input: head + "rule:\n  hold: 3\n  all: [{metric: creates, level: critical}]\n", want: `bad.yaml:9: rule.hold: want a mapping, got !!int "3"`},
		{name: "hold without k", input: head + "rule:\n  hold: {n: 3}\n  all: [{metric: creates, level: critical}]\n", want: "bad.yaml:9: rule.hold.k: required"},
		{name: "hold without n", input: head + "rule:\n  hold: {k: 3}\n  all: [{metric: creates, level: critical}]\n", want: "bad.yaml:9: rule.hold.n: required"},
		{name: "hold k above n", input: head + "rule:\n  hold:\n    k: 4\n    n: 3\n  all: [{metric: creates, level: critical}]\n", want: "bad.yaml:10: rule.hold.k: 4 is above n (3); want 1 <= k <= n"},
		{name: "hold k 0", input: head + "rule:\n  hold: {k: 0, n: 3}\n  all: [{metric: creates, level: critical}]\n", want: "bad.yaml:9: rule.hold.k: 0 is out of range; want 1 to 64"},
		{name: "hold n 65", input: head + "rule:\n  hold: {k: 1, n: 65}\n  all: [{metric: creates, level: critical}]\n", want: "bad.yaml:9: rule.hold.n: 65 is out of range; want 1 to 64"},
		{name: "hold unknown field", input: head + "rule:\n  hold: {k: 1, n: 2, m: 3}\n  all: [{metric: creates, level: critical}]\n", want: "bad.yaml:9: rule.hold.m: unknown field; want one of k, n"},
		{name: "min_nodes 0", input: head + rule + "  min_nodes: 0\n", want: "bad.yaml:12: rule.min_nodes: 0 is out of range; want 1 to 1048576"},
		{name: "no conditions", input: head + "rule:\n  hold: {k: 1, n: 1}\n", want: "bad.yaml:9: rule: no conditions; give all, any or both"},
		{name: "all not a list", input: head + "rule:\n  hold: {k: 1, n: 1}\n  all: {metric: creates, level: critical}\n", want: "bad.yaml:10: rule.all: want a list of conditions, got a mapping"},
		{name: "all empty", input: head + "rule:\n  hold: {k: 1, n: 1}\n  all: []\n", want: "bad.yaml:10: rule.all: empty list; remove it or give conditions"},
		{name: "any empty", input: head + rule + "  any: []\n", want: "bad.yaml:12: rule.any: empty list"},
		{name: "too many conditions", input: head + "rule:\n  hold: {k: 1, n: 1}\n  all: [" + strings.Repeat("{metric: creates, level: critical},", 33) + "]\n", want: "bad.yaml:10: rule.all: 33 conditions; at most 32"},

		// conditions.
		{name: "condition a string", input: head + conds("- creates"), want: `bad.yaml:11: rule.all[0]: want a mapping, got !!str "creates"`},
		{name: "condition without subject", input: head + conds("- {level: critical}"), want: "bad.yaml:11: rule.all[0]: want metric or derived"},
		{name: "condition with both subjects", input: head + conds("- {metric: creates, derived: data_bytes, level: critical}"), want: "bad.yaml:11: rule.all[0].derived: give metric or derived, not both"},
		{name: "unknown metric", input: head + conds("- {metric: creates, level: critical}", "- {metric: creats, level: critical}"), want: `bad.yaml:12: rule.all[1].metric: unknown metric "creats"`},
		{name: "metric not a string", input: head + conds("- {metric: [creates], level: critical}"), want: "bad.yaml:11: rule.all[0].metric: want a string, got a list"},
		{name: "unknown derived", input: head + conds("- {derived: mean_size, below: 10}"), want: `bad.yaml:11: rule.all[0].derived: unknown derived quantity "mean_size"; want one of mean_read_size,`},
		{name: "busiest_node_share without min_nodes", input: head + conds("- {derived: busiest_node_share, above: 0.8}"), want: "bad.yaml:11: rule.all[0].derived: busiest_node_share is defined only for jobs of 2 or more nodes; set rule.min_nodes to at least 2"},
		{name: "node_spread with min_nodes 1", input: head + "rule:\n  hold: {k: 1, n: 1}\n  min_nodes: 1\n  any:\n    - {derived: node_spread, above: 2}\n", want: "bad.yaml:12: rule.any[0].derived: node_spread is defined only for jobs of 2 or more nodes"},
		{name: "metric without comparison", input: head + conds("- {metric: creates}"), want: "bad.yaml:11: rule.all[0]: no comparison; want one of level, level_at_most, grade_at_least, grade_at_most"},
		{name: "derived without comparison", input: head + conds("- {derived: data_bytes}"), want: "bad.yaml:11: rule.all[0]: no comparison; want below or above"},
		{name: "two comparisons", input: head + conds("- metric: creates", "  level_at_most: elevated", "  level: elevated"), want: "bad.yaml:13: rule.all[0].level: one comparison per condition (level_at_most is on line 12)"},
		{name: "level on a derived", input: head + conds("- {derived: data_bytes, level: critical}"), want: "bad.yaml:11: rule.all[0].level: level compares a metric; use below or above with derived"},
		{name: "below on a metric", input: head + conds("- {metric: creates, below: 5}"), want: "bad.yaml:11: rule.all[0].below: below compares a derived quantity"},
		{name: "unknown level", input: head + conds("- {metric: creates, level: high}"), want: `bad.yaml:11: rule.all[0].level: unknown level "high"; want normal, elevated or critical`},
		{name: "level normal", input: head + conds("- {metric: creates, level: normal}"), want: "bad.yaml:11: rule.all[0].level: level normal always holds; drop the condition"},
		{name: "level_at_most critical", input: head + conds("- {metric: creates, level_at_most: critical}"), want: "bad.yaml:11: rule.all[0].level_at_most: level_at_most critical always holds"},
		{name: "level a number", input: head + conds("- {metric: creates, level: 2}"), want: `bad.yaml:11: rule.all[0].level: want a string, got !!int "2"`},
		{name: "grade_at_least 0", input: head + conds("- {metric: stat_ops, grade_at_least: 0}"), want: "bad.yaml:11: rule.all[0].grade_at_least: grade_at_least 0 always holds"},
		{name: "grade_at_most 6", input: head + conds("- {metric: stat_ops, grade_at_most: 6}"), want: "bad.yaml:11: rule.all[0].grade_at_most: grade_at_most 6 always holds"},
		{name: "grade 7", input: head + conds("- {metric: stat_ops, grade_at_least: 7}"), want: "bad.yaml:11: rule.all[0].grade_at_least: 7 is out of range; want 0 to 6"},
		{name: "grade a word", input: head + conds("- {metric: stat_ops, grade_at_most: low}"), want: `bad.yaml:11: rule.all[0].grade_at_most: want an integer, got !!str "low"`},
		{name: "below 0", input: head + conds("- {derived: data_bytes, below: 0}"), want: "bad.yaml:11: rule.all[0].below: below 0 never holds"},
		{name: "above infinity", input: head + conds("- {derived: data_bytes, above: .inf}"), want: "bad.yaml:11: rule.all[0].above: want a finite number, got .inf"},
		{name: "above a word", input: head + conds("- {derived: data_bytes, above: lots}"), want: `bad.yaml:11: rule.all[0].above: want a number, got !!str "lots"`},
		{name: "share above 1", input: head + "rule:\n  hold: {k: 1, n: 1}\n  min_nodes: 2\n  all:\n    - {derived: busiest_node_share, above: 1}\n", want: "bad.yaml:12: rule.all[0].above: above 1 never holds: a share is at most 1"},
		{name: "unknown condition field", input: head + conds("- {metric: creates, level: critical, for: 3}"), want: "bad.yaml:11: rule.all[0].for: unknown field; want one of metric, derived,"},
		{name: "error in any", input: head + rule + "  any:\n    - {metric: opens, level: critical}\n    - {metric: open, level: critical}\n", want: `bad.yaml:14: rule.any[1].metric: unknown metric "open"`},

		// example.
		{name: "example a list", input: head + "example: [a]\n", want: "bad.yaml:8: example: want a mapping, got a list"},
		{name: "example unknown field", input: head + example + "  weight: 2\n", want: "bad.yaml:12: example.weight: unknown field; want one of method, metrics, grades, last"},
		{name: "method missing", input: head + "example:\n  metrics: [creates]\n  grades: {creates: \"5\"}\n", want: "bad.yaml:9: example.method: required; want sellers, ks or euclidean"},
		{name: "method unknown", input: head + "example:\n  method: dtw\n  metrics: [creates]\n  grades: {creates: \"5\"}\n", want: `bad.yaml:9: example.method: unknown method "dtw"; want sellers, ks or euclidean`},
		{name: "metrics missing", input: head + "example:\n  method: ks\n  grades: {creates: \"5\"}\n", want: "bad.yaml:9: example.metrics: required"},
		{name: "grades missing", input: head + "example:\n  method: ks\n  metrics: [creates]\n", want: "bad.yaml:9: example.grades: required"},
		{name: "metrics empty", input: head + "example:\n  method: ks\n  metrics: []\n  grades: {creates: \"5\"}\n", want: "bad.yaml:10: example.metrics: want a non-empty list of metric names, got a list"},
		{name: "metrics a string", input: head + "example:\n  method: ks\n  metrics: creates\n  grades: {creates: \"5\"}\n", want: `bad.yaml:10: example.metrics: want a non-empty list of metric names, got !!str "creates"`},
		{name: "metrics unknown", input: head + "example:\n  method: ks\n  metrics:\n    - creates\n    - stats\n  grades: {creates: \"5\"}\n", want: `bad.yaml:12: example.metrics[1]: unknown metric "stats"`},
		{name: "metrics repeated", input: head + "example:\n  method: ks\n  metrics:\n    - creates\n    - creates\n  grades: {creates: \"5\"}\n", want: "bad.yaml:12: example.metrics[1]: creates is listed twice (also on line 11)"},
		{name: "grades a list", input: head + "example:\n  method: ks\n  metrics: [creates]\n  grades: [\"5\"]\n", want: "bad.yaml:11: example.grades: want a mapping from metric names to grade strings, got a list"},
		{name: "grades unknown metric", input: head + "example:\n  method: ks\n  metrics: [creates]\n  grades:\n    creates: \"5\"\n    creats: \"5\"\n", want: `bad.yaml:13: example.grades.creats: unknown metric "creats"`},
		{name: "grades not in metrics", input: head + "example:\n  method: ks\n  metrics: [creates]\n  grades:\n    creates: \"5\"\n    opens: \"5\"\n", want: "bad.yaml:13: example.grades.opens: opens is not in example.metrics"},
		{name: "metric without grades", input: head + "example:\n  method: ks\n  metrics:\n    - creates\n    - opens\n  grades:\n    creates: \"5\"\n", want: "bad.yaml:12: example.metrics[1]: opens has no grade string in example.grades"},
		{name: "grades given twice", input: head + "example:\n  method: ks\n  metrics: [creates]\n  grades:\n    creates: \"5\"\n    creates: \"6\"\n", want: "bad.yaml:13: example.grades.creates: given twice (first on line 12)"},
		{name: "grades unquoted", input: head + "example:\n  method: ks\n  metrics: [creates]\n  grades: {creates: 566}\n", want: `bad.yaml:11: example.grades.creates: want a quoted string of grade digits (e.g. "566666"), got !!int "566"`},
		{name: "grades bad digit", input: head + "example:\n  method: ks\n  metrics: [creates]\n  grades: {creates: \"5676\"}\n", want: `bad.yaml:11: example.grades.creates: grade string "5676": character 3 is '7', want a digit 0-6`},
		{name: "grades empty", input: head + "example:\n  method: ks\n  metrics: [creates]\n  grades: {creates: \"  \"}\n", want: "bad.yaml:11: example.grades.creates: no grades; want 1 to 64"},
		{name: "grades too long", input: head + "example:\n  method: ks\n  metrics: [creates]\n  grades: {creates: \"" + strings.Repeat("5", 65) + "\"}\n", want: "bad.yaml:11: example.grades.creates: 65 grades; at most 64 windows"},
		{name: "grades of unequal length", input: head + "example:\n  method: ks\n  metrics: [creates, opens]\n  grades:\n    creates: \"566\"\n    opens: \"56\"\n", want: "bad.yaml:13: example.grades.opens: 2 windows, but creates has 3; every metric needs the same number"},
		{name: "last with sellers", input: head + "example:\n  method: sellers\n  last: 10\n  metrics: [creates]\n  grades: {creates: \"5\"}\n", want: "bad.yaml:10: example.last: only for method ks"},
		{name: "last 0", input: head + example + "  last: 0\n", want: "bad.yaml:12: example.last: 0 is out of range; want 1 to 1008"},
		{name: "last too large", input: head + example + "  last: 1009\n", want: "bad.yaml:12: example.last: 1009 is out of range; want 1 to 1008"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p, err := pattern.Parse("bad.yaml", strings.NewReader(tt.input))
			require.Error(t, err)
			assert.Nil(t, p)
			assert.ErrorContains(t, err, tt.want)
			if !strings.Contains(tt.want, "yaml: line") {
				assert.ErrorIs(t, err, pattern.ErrInvalid)
			}
			if !tt.more {
				assert.Equal(t, 1, strings.Count(err.Error(), "\n")+1, "want one error, got:\n%v", err)
			}
		})
	}
}

func TestParseReportsEveryError(t *testing.T) {
	input := "schema: 1\nname: X\ntitle: \"\"\nseverity: loud\nraise_after: 0\nrule:\n  hold: {k: 3, n: 2}\n  all: [{metric: creats, level: critical}]\n"
	_, err := pattern.Parse("many.yaml", strings.NewReader(input))
	require.Error(t, err)
	for _, want := range []string{
		`many.yaml:2: name: "X" is not a valid name`,
		"many.yaml:3: title: must not be empty",
		"many.yaml:1: description: required",
		"many.yaml:1: rationale: required",
		"many.yaml:1: advice: required",
		`many.yaml:4: severity: unknown severity "loud"`,
		"many.yaml:5: raise_after: 0 is out of range",
		"many.yaml:7: rule.hold.k: 3 is above n (2)",
		`many.yaml:8: rule.all[0].metric: unknown metric "creats"`,
	} {
		assert.ErrorContains(t, err, want)
	}
	var perr *pattern.Error
	require.ErrorAs(t, err, &perr)
	assert.Equal(t, "many.yaml", perr.File)
}

func TestParseRule(t *testing.T) {
	input := head + `raise_after: 4
clear_after: 5
rule:
  hold: {k: 2, n: 3}
  min_nodes: 4
  all:
    - {metric: read_bytes, level_at_most: normal}
    - {metric: stat_ops, grade_at_least: 4}
    - {derived: mean_write_size, below: 65536}
  any:
    - {metric: creates, level: critical}
    - {metric: syncs, grade_at_most: 2}
    - {derived: busiest_node_share, above: 0.8}
`
	got, err := pattern.Parse("rule.yaml", strings.NewReader(input))
	require.NoError(t, err)
	want := &pattern.Pattern{
		Source:      "rule.yaml",
		Name:        "test_pattern",
		Title:       "Test pattern",
		Description: "A test.",
		Rationale:   "Because.",
		Advice:      "Consider it; follow your site's policy.",
		Severity:    model.SeverityWarning,
		RaiseAfter:  4,
		ClearAfter:  5,
		Threshold:   2.0 / 3,
		Rule: &pattern.Rule{
			Hold:     pattern.Hold{K: 2, N: 3},
			MinNodes: 4,
			All: []pattern.Condition{
				{Op: pattern.LevelAtMost, Metric: metric.ReadBytes, Level: coding.Normal},
				{Op: pattern.GradeAtLeast, Metric: metric.StatOps, Grade: 4},
				{Op: pattern.Below, Quantity: pattern.MeanWriteSize, Value: 65536},
			},
			Any: []pattern.Condition{
				{Op: pattern.LevelAtLeast, Metric: metric.Creates, Level: coding.Critical},
				{Op: pattern.GradeAtMost, Metric: metric.Syncs, Grade: 2},
				{Op: pattern.Above, Quantity: pattern.BusiestNodeShare, Value: 0.8},
			},
		},
	}
	assert.Equal(t, want, got)
	assert.Equal(t, "rule", got.Kind())
}

func TestParseDefaults(t *testing.T) {
	got, err := pattern.Parse("d.yaml", strings.NewReader(head+example))
	require.NoError(t, err)
	assert.Equal(t, pattern.DefaultRaiseAfter, got.RaiseAfter)
	assert.Equal(t, pattern.DefaultClearAfter, got.ClearAfter)
	assert.Equal(t, pattern.DefaultThreshold, got.Threshold)
	assert.Equal(t, "example", got.Kind())

	got, err = pattern.Parse("d.yaml", strings.NewReader(head+rule))
	require.NoError(t, err)
	assert.Equal(t, 1, got.Rule.MinNodes, "min_nodes defaults to 1")
	assert.Equal(t, 2.0/3, got.Threshold, "a rule's threshold is k/n")
	assert.Nil(t, got.Rule.Any)
}

func TestParseTrimsText(t *testing.T) {
	input := replace("description", "description: >\n  Folded\n  text.\n\n") + rule
	got, err := pattern.Parse("t.yaml", strings.NewReader(input))
	require.NoError(t, err)
	assert.Equal(t, "Folded text.", got.Description)
}

func TestParseExampleFixture(t *testing.T) {
	f, err := os.Open(filepath.Join(testdata, "good", "checkpoint_burst.yaml"))
	require.NoError(t, err)
	defer f.Close()
	got, err := pattern.Parse("checkpoint_burst.yaml", f)
	require.NoError(t, err)
	g := func(s string) []coding.Grade {
		gs, err := coding.ParseGrades(s)
		require.NoError(t, err)
		return gs
	}
	assert.Equal(t, "checkpoint_burst", got.Name)
	assert.Equal(t, model.SeverityInfo, got.Severity)
	assert.Equal(t, 0.75, got.Threshold)
	assert.Equal(t, 1, got.RaiseAfter)
	assert.Equal(t, 2, got.ClearAfter)
	assert.Equal(t, &pattern.Example{
		Method:  pattern.Sellers,
		Metrics: []metric.ID{metric.WriteBytes, metric.WriteOps, metric.Creates, metric.Syncs},
		Grades:  [][]coding.Grade{g("116611"), g("114411"), g("005500"), g("004400")},
	}, got.Example)
	assert.Equal(t, 6, got.Example.Len())
	w := got.Example.Windows()
	require.Len(t, w, 6)
	assert.Equal(t, []coding.Grade{6, 4, 5, 4}, w[2], "window 2 in metrics order")
}

func TestParseKSLast(t *testing.T) {
	got, err := pattern.Parse("ks.yaml", strings.NewReader(head+example+"  last: 36\n"))
	require.NoError(t, err)
	assert.Equal(t, pattern.KS, got.Example.Method)
	assert.Equal(t, 36, got.Example.Last)
	assert.Equal(t, []metric.ID{metric.Creates, metric.StatOps}, got.Example.Metrics)
}

func TestParseGradesWithSpaces(t *testing.T) {
	input := head + "example:\n  method: euclidean\n  metrics: [opens]\n  grades: {opens: \"556 666\"}\n"
	got, err := pattern.Parse("sp.yaml", strings.NewReader(input))
	require.NoError(t, err)
	assert.Equal(t, pattern.Euclidean, got.Example.Method)
	assert.Equal(t, 6, got.Example.Len())
}

func TestParseReadError(t *testing.T) {
	boom := errors.New("boom")
	_, err := pattern.Parse("r.yaml", iotest.ErrReader(boom))
	assert.ErrorIs(t, err, boom)
	assert.ErrorContains(t, err, "read pattern r.yaml")
}

func TestParseTooLarge(t *testing.T) {
	r := io.MultiReader(strings.NewReader(head+rule+"# "), strings.NewReader(strings.Repeat("x", pattern.MaxFileSize)))
	_, err := pattern.Parse("big.yaml", r)
	assert.ErrorContains(t, err, "big.yaml:1: file is larger than 1048576 bytes")
	assert.ErrorIs(t, err, pattern.ErrInvalid)
}

func TestLoadDir(t *testing.T) {
	got, err := pattern.LoadDir(filepath.Join(testdata, "good"))
	require.NoError(t, err)
	require.Len(t, got, 1)
	assert.Equal(t, "checkpoint_burst", got[0].Name)
	assert.Equal(t, filepath.Join(testdata, "good", "checkpoint_burst.yaml"), got[0].Source)
}

func TestLoadDirSorted(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"zeta", "alpha", "mid"} {
		body := strings.Replace(head, "name: test_pattern", "name: "+name, 1) + rule
		require.NoError(t, os.WriteFile(filepath.Join(dir, name+".yaml"), []byte(body), 0o644))
	}
	require.NoError(t, os.WriteFile(filepath.Join(dir, "ignored.yml"), []byte("not read"), 0o644))
	require.NoError(t, os.Mkdir(filepath.Join(dir, "sub.yaml"), 0o755))
	got, err := pattern.LoadDir(dir)
	require.NoError(t, err)
	var names []string
	for _, p := range got {
		names = append(names, p.Name)
	}
	assert.Equal(t, []string{"alpha", "mid", "zeta"}, names)
}

func TestLoadDirEmpty(t *testing.T) {
	got, err := pattern.LoadDir(t.TempDir())
	require.NoError(t, err)
	assert.Empty(t, got)
}

func TestLoadDirMissing(t *testing.T) {
	_, err := pattern.LoadDir(filepath.Join(t.TempDir(), "nope"))
	assert.ErrorIs(t, err, fs.ErrNotExist)
	assert.ErrorContains(t, err, "read pattern directory")
}

func TestLoadDirCollectsErrors(t *testing.T) {
	dir := filepath.Join(testdata, "bad")
	_, err := pattern.LoadDir(dir)
	require.Error(t, err)
	msg := err.Error()
	for _, want := range []string{
		filepath.Join(dir, "rule_and_example.yaml") + ":12: example: give rule or example, not both (rule is on line 8)",
		filepath.Join(dir, "unknown_metric.yaml") + `:14: rule.any[0].metric: unknown metric "creats"`,
		filepath.Join(dir, "wrong_schema.yaml") + ":1: schema: unsupported schema 2; the supported schema is 1",
	} {
		assert.Contains(t, msg, want)
	}
	assert.Equal(t, 3, strings.Count(msg, "\n")+1, "one error per file, notes.txt not read:\n%s", msg)
}

func TestLoadDirDuplicateNames(t *testing.T) {
	dir := filepath.Join(testdata, "duplicate")
	_, err := pattern.LoadDir(dir)
	require.Error(t, err)
	assert.ErrorIs(t, err, pattern.ErrInvalid)
	assert.ErrorContains(t, err, filepath.Join(dir, "b_second.yaml")+`:2: name: "same_name" is already the name of the pattern in `+
		filepath.Join(dir, "a_first.yaml")+":2")
}
