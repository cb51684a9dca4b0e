package eval

import (
	"fmt"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/matcher"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
	"sluice/pkg/sim"
	"sluice/pkg/tracker"
)

// TestExplanationIsTheDecision replays the evaluation's labelled jobs
// (every built-in pattern injected, and the hard negatives) and, after
// every tick, so at every window closed and every open-window evaluation,
// explains every pattern on every tracked job and checks the explanation
// against the decision:
//
//   - the windows it shows give its score: the rule held in Held of them,
//     and Held/N is the score, which is what the CLI prints;
//   - each window's "held" follows from the condition cells it shows
//     (all of All, one of Any, enough nodes), so no cell contradicts it;
//   - on a running job, its verdict is the flag machine's: a matched
//     verdict has a streak
//     whose latest score is the explanation's, an active flag carries
//     the same score, and a score the job lists is the explained one.
func TestExplanationIsTheDecision(t *testing.T) {
	o := Options{Jobs: 160, Seed: 3}.withDefaults()
	ps, err := pattern.Builtin()
	require.NoError(t, err)
	lib, err := matcher.Compile(ps)
	require.NoError(t, err)
	c, _, _, err := learn(o)
	require.NoError(t, err)
	jobs := sim.Labelled(sim.LabelledOptions{Jobs: o.Jobs, Seed: o.Seed, Step: o.Step, Window: o.Window,
		Reference: sim.Reference{Cuts: c.Levels, Grades: c.Grades}})
	tr, err := tracker.New(tracker.Options{Window: o.Window, Live: o.Live, Patterns: lib, KeepEnded: o.Window})
	require.NoError(t, err)
	tr.SetCoding(c)

	checked, matched, open := 0, 0, 0
	check := func() {
		for _, sum := range tr.Summaries() {
			xs, ok := tr.Explain(sum.ID)
			require.True(t, ok)
			require.Len(t, xs, lib.Len())
			for i, x := range xs {
				where := fmt.Sprintf("job %s (%d windows) pattern %s", sum.ID, sum.Windows, x.Pattern)
				require.Equal(t, ps[i].Name, x.Pattern, where)
				if x.Rule != nil {
					checkRule(t, ps[i].Rule, x, where)
				}
				if sum.Running() { // a job's end clears its streaks; its last verdicts stay explained
					checkDecision(t, sum, x, where)
				}
				checked++
				if x.Matched {
					matched++
				}
				if x.Open {
					open++
				}
			}
		}
	}
	_, _, err = replay(tr, jobs, jobStarts(jobs, o), o, check)
	require.NoError(t, err)
	t.Logf("%d explanations checked, %d matched, %d counting the open window", checked, matched, open)
	require.Positive(t, matched, "the jobs made patterns match")
	require.Positive(t, open, "and some verdicts counted the open window")
}

// checkRule checks that a rule explanation's windows give its score and
// that each window's verdict follows from the cells shown.
func checkRule(t *testing.T, r *pattern.Rule, x matcher.Explanation, where string) {
	t.Helper()
	e := x.Rule
	require.LessOrEqual(t, len(e.Columns), e.N, where)
	held := 0
	for k, col := range e.Columns {
		if col.Held {
			held++
		}
		require.Equal(t, col.Open, x.Open && k == len(e.Columns)-1, "%s: only the last window shown may be the open one", where)
		all, anyHeld, anyCount := true, false, 0
		for _, row := range e.Conditions {
			cell := row.Cells[k]
			if row.Any {
				anyCount++
				anyHeld = anyHeld || cell.Held
			} else {
				all = all && cell.Held
			}
		}
		nodes := r.MinNodes <= 1 || col.Nodes >= r.MinNodes
		require.Equal(t, all && (anyCount == 0 || anyHeld) && nodes, col.Held, "%s window %d: the cells shown give the verdict shown", where, col.Window)
	}
	require.Equal(t, held, e.Held, where)
	require.Equal(t, float64(held)/float64(e.N), x.Score, "%s: the score printed is held/n of the windows shown", where)
	require.Equal(t, held >= e.K, x.Matched, where)
}

// checkDecision checks the explanation's verdict against the flag
// machine's state for the job.
func checkDecision(t *testing.T, sum model.Summary, x matcher.Explanation, where string) {
	t.Helper()
	listed, ok := sum.PatternScores[x.Pattern]
	if x.Matched {
		require.True(t, ok, "%s: a matched verdict has a streak", where)
	}
	if ok {
		require.Equal(t, x.Score, listed, "%s: the streak's latest score is the explained one", where)
	}
	for _, f := range sum.ActiveFlags {
		if f.Reason == model.PatternOf(x.Pattern) {
			require.Equal(t, x.Score, f.Score, "%s: the active flag carries the explained score", where)
		}
	}
}
