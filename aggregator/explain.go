package main

import (
	"context"
	"fmt"
	"io"
	"strings"

	"sluice/pkg/api"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// explainCmd prints how each pattern's latest verdict on a job came about,
// as the aggregator decided it: for a rule, each condition window by
// window ('+' held, '.' did not) with the value it tested; for an example,
// the job's grades beside the pattern's with a mark under each window ('='
// the same, '~' one grade apart, '^' further).
func explainCmd(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("explain", "JOB", "How each pattern's latest verdict on the job came about, as the aggregator decided it.", stdout)
	client := c.client()
	all := c.fs.Bool("all", false, "every pattern, not only those that flagged, matched or scored")
	asJSON := c.jsonOption()
	pos, err := c.parse(args, 1)
	if err != nil {
		return err
	}
	x, err := client().Explain(ctx, pos[0])
	if err != nil {
		return fmt.Errorf("explain: %w", err)
	}
	if *asJSON {
		return printJSON(stdout, x)
	}
	printExplanation(stdout, x, *all)
	return nil
}

func printExplanation(w io.Writer, x api.JobExplanation, all bool) {
	j := x.Job
	fmt.Fprintf(w, "job %s (%s, user %s): %s, %d closed windows, %d nodes\n",
		dash(j.ID), dash(j.Name), dash(j.User), j.State, x.ClosedWindows, max(len(j.Nodes), j.NodesSeen))
	shown := 0
	for _, p := range x.Patterns {
		if !all && p.Flag == nil && !p.Matched && p.Score == 0 {
			continue
		}
		fmt.Fprintln(w)
		printPattern(w, p)
		shown++
	}
	if shown == 0 {
		fmt.Fprintln(w, "no pattern has matched or scored on this job; its signature:")
		printSignature(w, j)
	}
}

func printPattern(w io.Writer, p api.PatternExplanation) {
	verdict := "not matched"
	if p.Matched {
		verdict = "matched"
	}
	if p.Open {
		verdict += ", counting the window still open"
	}
	state := "no flag"
	if f := p.Flag; f != nil {
		state = fmt.Sprintf("FLAGGED since %s (flag %s, %s)", stamp(f.Since), f.ID, f.State)
	}
	fmt.Fprintf(w, "%s — %s (%s): score %.2f, %s; %s\n", p.Pattern, p.Title, p.Severity, p.Score, verdict, state)
	switch {
	case p.Rule != nil:
		printRule(w, p.Rule)
	case p.Example != nil:
		printExample(w, p.Example, p.Threshold)
	}
	fmt.Fprintf(w, "  advice: %s\n", strings.Join(strings.Fields(p.Advice), " "))
}

func printRule(w io.Writer, r *matcher.RuleExplanation) {
	fmt.Fprintf(w, "  rule: %d of the last %d windows must hold", r.K, r.N)
	if r.MinNodes > 1 {
		fmt.Fprintf(w, " (jobs of %d nodes or more)", r.MinNodes)
	}
	fmt.Fprintln(w, "; '+' held, '.' did not")
	head := make([]string, len(r.Columns))
	for i, col := range r.Columns {
		head[i] = fmt.Sprintf("w%d", col.Window)
		if col.Open {
			head[i] = fmt.Sprintf("w%d open", col.Window)
		}
	}
	fmt.Fprintf(w, "    %-34s %s\n", "", cells(head))
	for _, row := range r.Conditions {
		cs := make([]string, len(row.Cells))
		for i, cl := range row.Cells {
			mark := '.'
			if cl.Held {
				mark = '+'
			}
			cs[i] = fmt.Sprintf("%c %s", mark, cl.Value)
			if cl.Bound != "" {
				cs[i] += " " + cl.Bound
			}
		}
		label := row.Condition
		if row.Any {
			label = "any: " + label
		}
		fmt.Fprintf(w, "    %-34s %s\n", label, cells(cs))
	}
	held := make([]string, len(r.Columns))
	for i, col := range r.Columns {
		held[i] = "-"
		if col.Held {
			held[i] = "HELD"
		}
	}
	fmt.Fprintf(w, "    %-34s %s\n", "rule", cells(held))
	fmt.Fprintf(w, "  held in %d of the last %d windows: score %d/%d\n", r.Held, r.N, r.Held, r.N)
	if len(r.Columns) > 0 && r.Columns[len(r.Columns)-1].Open {
		fmt.Fprintln(w, "  (the open window: \"at least\" tests on its counts so far over the whole window (low), \"at most\" tests on its rate so far (high))")
	}
}

func printExample(w io.Writer, ex *matcher.ExampleExplanation, threshold float64) {
	fmt.Fprintf(w, "  %s example (matches at score >= %.2f); the job's last %d windows beside the pattern's:\n", ex.Method, threshold, len(ex.Windows))
	for _, row := range ex.Metrics {
		marks := make([]byte, len(row.Pattern))
		for k := range marks {
			marks[k] = mark(row.Job[k], row.Pattern[k])
		}
		fmt.Fprintf(w, "    %-12s job %s  pattern %s  %s\n", row.Metric, row.Job, row.Pattern, marks)
	}
}

// mark compares a job's grade digit with the pattern's: '=' the same, '~'
// one apart, '^' further, ' ' where the job has no window.
func mark(job, pat byte) byte {
	if job == ' ' {
		return ' '
	}
	switch d := int(job) - int(pat); {
	case d == 0:
		return '='
	case d == 1 || d == -1:
		return '~'
	}
	return '^'
}

func cells(cs []string) string {
	var b strings.Builder
	for _, c := range cs {
		fmt.Fprintf(&b, "%-14s", c)
	}
	return strings.TrimRight(b.String(), " ")
}

func printSignature(w io.Writer, j model.Summary) {
	for _, id := range metric.All() {
		if s := j.Signature[id.String()]; hasActivity(s) {
			fmt.Fprintf(w, "  %-12s %s\n", id, s)
		}
	}
}

// hasActivity reports whether a signature text holds a grade above idle.
func hasActivity(s string) bool {
	for _, r := range strings.Fields(s) {
		r = strings.TrimPrefix(r, "|")
		if r != "" && r[0] != '0' {
			return true
		}
	}
	return false
}
