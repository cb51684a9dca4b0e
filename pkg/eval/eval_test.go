package eval_test

import (
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/eval"
	"sluice/pkg/metric"
	"sluice/pkg/pattern"
	"sluice/pkg/sim"
)

// TestBuiltinsMeetTargets evaluates the built-in library on 350 labelled
// jobs (seed 1) and holds every built-in to the targets: recall and
// precision at least 0.95, median detection delay at most 2 windows, and
// at most 1% of benign jobs flagged by a problem pattern. `make eval` runs
// the same evaluation on 1,000 jobs and prints the table.
func TestBuiltinsMeetTargets(t *testing.T) {
	res, err := eval.Run(eval.Options{Jobs: 350, Seed: 1})
	require.NoError(t, err)
	t.Log("\n" + table(res))
	for id := range metric.Count {
		assert.Equal(t, coding.BasisLearned, res.Bases[id], "%s: the baseline of ordinary jobs is large enough to learn every metric's cuts", id)
	}
	builtin, err := pattern.Builtin()
	require.NoError(t, err)
	require.Len(t, res.Rows, len(builtin))
	for _, row := range res.Rows {
		assert.True(t, row.Builtin, row.Pattern)
		assert.Positive(t, row.Positives, "%s: the scenarios inject every built-in", row.Pattern)
		assert.Empty(t, row.Misses(), "%s misses its targets", row.Pattern)
	}
	assert.LessOrEqual(t, res.BenignFlaggedShare(), eval.BenignFlaggedTarget,
		"benign jobs flagged by a problem pattern: %d of %d, by class %v", res.BenignFlagged, res.Benign, res.FlaggedByClass)
}

func table(res *eval.Result) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%-18s %4s %7s %7s %9s %10s %6s %6s\n", "pattern", "pos", "recall", "flagged", "precision", "false/1000", "p50", "p90")
	for _, r := range res.Rows {
		fmt.Fprintf(&b, "%-18s %4d %7.3f %7d %9.3f %10.1f %6.2f %6.2f %v\n", r.Pattern, r.Positives, r.Recall(), r.Flagged,
			r.Precision(), r.FalsePer1000(), r.MedianDelay(), r.P90Delay(), r.Misses())
	}
	fmt.Fprintf(&b, "benign flagged: %d of %d (%.2f%%) %v\n", res.BenignFlagged, res.Benign, 100*res.BenignFlaggedShare(), res.FlaggedByClass)
	return b.String()
}

// parse reads one pattern file given inline.
func parse(t *testing.T, name, text string) *pattern.Pattern {
	t.Helper()
	p, err := pattern.Parse(name, strings.NewReader(text))
	require.NoError(t, err)
	return p
}

const patternHead = `schema: 1
title: Test pattern
severity: warning
description: test.
rationale: test.
advice: Consider nothing; follow your site's policy.
raise_after: 1
`

// TestEvaluationCanFail replaces metadata_storm by a rule that cannot hold
// on a storm (it wants critical creates and critical write bytes at once)
// and adds a site rule that holds on nearly every window: the first must
// lose its recall, the second its precision, and the benign share must
// exceed the target.
func TestEvaluationCanFail(t *testing.T) {
	builtin, err := pattern.Builtin()
	require.NoError(t, err)
	never := parse(t, "site/metadata_storm.yaml", patternHead+`name: metadata_storm
rule:
  hold: {k: 2, n: 3}
  all:
    - {metric: creates, level: critical}
    - {metric: write_bytes, level: critical}
`)
	always := parse(t, "site/busy.yaml", patternHead+`name: busy
rule:
  hold: {k: 1, n: 1}
  all:
    - {metric: stat_ops, grade_at_least: 1}
`)
	ps := pattern.Merge(builtin, []*pattern.Pattern{never, always})
	res, err := eval.Run(eval.Options{Jobs: 60, Seed: 3, BaselineJobs: 300, Patterns: ps})
	require.NoError(t, err)
	t.Log("\n" + table(res))

	storm, ok := res.Row("metadata_storm")
	require.True(t, ok)
	assert.False(t, storm.Builtin, "the site file replaced the built-in")
	assert.Positive(t, storm.Positives)
	assert.Zero(t, storm.Found)
	assert.Contains(t, strings.Join(storm.Misses(), "; "), "recall 0.000 < 0.95")

	busy, ok := res.Row("busy")
	require.True(t, ok)
	assert.Zero(t, busy.Positives, "nothing is labelled with a site pattern")
	assert.Greater(t, busy.FalsePer1000(), 500.0)
	assert.Contains(t, strings.Join(busy.Misses(), "; "), "precision 0.000 < 0.95")
	assert.Greater(t, res.BenignFlaggedShare(), eval.BenignFlaggedTarget)
	assert.Equal(t, res.Benign, res.Jobs[sim.ClassOrdinary]+res.Jobs[sim.ClassBurst]+res.Jobs[sim.ClassNoisyStart]+res.Jobs[sim.ClassStreaming])
}

// TestRowFigures checks the row arithmetic on hand-made counts.
func TestRowFigures(t *testing.T) {
	r := eval.PatternResult{Pattern: "p", Positives: 20, Found: 19, Flagged: 20, Correct: 19, Benign: 500, FalseFlags: 1,
		Delays: []float64{0.5, 0.9, 1.0, 1.1, 1.2, 1.3, 1.4, 1.5, 1.6, 1.7, 1.8, 1.9, 2.0, 2.1, 2.2, 2.3, 2.4, 2.5, 3.5}}
	assert.InDelta(t, 0.95, r.Recall(), 1e-12)
	assert.InDelta(t, 0.95, r.Precision(), 1e-12)
	assert.InDelta(t, 2.0, r.FalsePer1000(), 1e-12)
	assert.Equal(t, 1.7, r.MedianDelay(), "nearest rank: the 10th of 19")
	assert.Equal(t, 2.5, r.P90Delay(), "nearest rank: the 18th of 19")
	assert.Empty(t, r.Misses(), "0.95 meets a target of 0.95")

	r.Found, r.Correct = 18, 18
	r.Delays = []float64{2.5, 3, 3}
	assert.Len(t, r.Misses(), 3, "recall, delay and precision")
	assert.Contains(t, eval.PatternResult{Positives: 3}.Misses(), "never flagged")
	assert.Empty(t, eval.PatternResult{}.Misses(), "no positives and no flags: nothing to hold it to")
}

func TestOptionsDefaults(t *testing.T) {
	res, err := eval.Run(eval.Options{Jobs: 5, BaselineJobs: 50, Start: time.Date(2026, 5, 1, 0, 0, 0, 0, time.UTC)})
	require.NoError(t, err)
	assert.Equal(t, uint64(1), res.Options.Seed)
	assert.Equal(t, 10*time.Minute, res.Options.Window)
	assert.Positive(t, res.Samples)
	assert.Positive(t, res.BaselineWindows)
}
