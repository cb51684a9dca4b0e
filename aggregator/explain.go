package main

import (
	"cmp"
	"context"
	"flag"
	"fmt"
	"io"
	"net/http"
	"slices"
	"strings"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// explain prints, for every pattern the job matched lately, the job's
// recent windows beside the pattern: for an example, the grades side by
// side with a mark under each window ('=' the same, '~' one grade apart,
// '^' further); for a rule, each condition window by window ('+' held,
// '.' did not) with the value it tested.
func explain(ctx context.Context, args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator explain", flag.ContinueOnError)
	url := urlFlag(fs)
	id, err := parseWithFile(fs, args)
	if err != nil {
		return fmt.Errorf("explain: %w (give a JOB id)", err)
	}
	d, err := fetchJob(ctx, *url, id)
	if err != nil {
		return fmt.Errorf("explain: %w", err)
	}
	var lib struct {
		Patterns []struct {
			Name, File string
		} `json:"patterns"`
	}
	if err := call(ctx, http.MethodGet, *url, "/api/v1/patterns", nil, &lib); err != nil {
		return fmt.Errorf("explain: %w", err)
	}
	job := d.Summary
	fmt.Fprintf(stdout, "job %s (%s, user %s): %s, %d closed windows, %d nodes\n", job.ID, dash(job.Name), dash(job.User), job.State, len(d.ClosedWindows), max(len(job.Nodes), job.NodesSeen))
	names := matchedPatterns(job)
	if len(names) == 0 {
		fmt.Fprintln(stdout, "no pattern matched this job lately; its signature:")
		printSignature(stdout, job)
		return nil
	}
	for _, name := range names {
		i := slices.IndexFunc(lib.Patterns, func(p struct{ Name, File string }) bool { return p.Name == name })
		if i < 0 {
			continue
		}
		p, err := pattern.Parse(name, strings.NewReader(lib.Patterns[i].File))
		if err != nil {
			return fmt.Errorf("explain: pattern %s: %w", name, err)
		}
		fmt.Fprintln(stdout)
		explainPattern(stdout, p, job, d.ClosedWindows)
	}
	return nil
}

// matchedPatterns lists the patterns with an active flag, then those with
// a score, highest score first.
func matchedPatterns(j model.Summary) []string {
	var names []string
	for _, f := range j.ActiveFlags {
		if f.Pattern != "" {
			names = append(names, f.Pattern)
		}
	}
	var scored []string
	for name := range j.PatternScores {
		if !slices.Contains(names, name) {
			scored = append(scored, name)
		}
	}
	slices.SortFunc(scored, func(a, b string) int {
		return cmp.Or(cmp.Compare(j.PatternScores[b], j.PatternScores[a]), strings.Compare(a, b))
	})
	return append(names, scored...)
}

func explainPattern(w io.Writer, p *pattern.Pattern, j model.Summary, ws []model.Window) {
	state := "no flag"
	for _, f := range j.ActiveFlags {
		if f.Pattern == p.Name {
			state = fmt.Sprintf("FLAGGED since %s", f.Since.Local().Format("15:04"))
		}
	}
	fmt.Fprintf(w, "%s — %s (%s, score %.2f, %s)\n", p.Name, p.Title, p.Severity, j.PatternScores[p.Name], state)
	if p.Rule != nil {
		explainRule(w, p.Rule, j, ws)
	} else {
		explainExample(w, p.Example, ws)
	}
	fmt.Fprintf(w, "  advice: %s\n", strings.Join(strings.Fields(p.Advice), " "))
}

func explainExample(w io.Writer, ex *pattern.Example, ws []model.Window) {
	m := ex.Len()
	last := ws[max(0, len(ws)-m):]
	fmt.Fprintf(w, "  %s over the job's last %d windows against the pattern's %d:\n", ex.Method, len(last), m)
	for i, id := range ex.Metrics {
		var job, marks strings.Builder
		pat := ex.Grades[i]
		for k := range m {
			jk := len(last) - m + k
			if jk < 0 {
				job.WriteByte(' ')
				marks.WriteByte(' ')
				continue
			}
			g := last[jk].Grades[id]
			job.WriteByte(g.Byte())
			marks.WriteByte(mark(g, pat[k]))
		}
		fmt.Fprintf(w, "    %-12s job %s  pattern %s  %s\n", id, job.String(), coding.FormatGrades(pat), marks.String())
	}
}

func mark(a, b coding.Grade) byte {
	switch d := int(a) - int(b); {
	case d == 0:
		return '='
	case d == 1 || d == -1:
		return '~'
	}
	return '^'
}

func explainRule(w io.Writer, r *pattern.Rule, j model.Summary, ws []model.Window) {
	n := r.Hold.N
	last := ws[max(0, len(ws)-n):]
	views := make([]pattern.WindowView, 0, len(last)+1)
	head := []string{}
	for _, win := range last {
		views = append(views, pattern.ViewOf(&win))
		head = append(head, fmt.Sprintf("w%d", win.Index))
	}
	if j.State == "running" {
		views = append(views, pattern.WindowView{Levels: j.LiveLevels, Grades: j.LiveGrades, Rates: j.Live, Nodes: max(len(j.Nodes), j.NodesSeen)})
		head = append(head, "live")
	}
	fmt.Fprintf(w, "  rule: %d of the last %d windows must hold; '+' held, '.' did not\n", r.Hold.K, n)
	fmt.Fprintf(w, "    %-34s %s\n", "", cells(head))
	row := func(label string, c pattern.Condition) {
		var cs []string
		for _, v := range views {
			m := '.'
			if c.Holds(v) {
				m = '+'
			}
			cs = append(cs, fmt.Sprintf("%c %s", m, value(c, v)))
		}
		fmt.Fprintf(w, "    %-34s %s\n", label+c.String(), cells(cs))
	}
	for _, c := range r.All {
		row("", c)
	}
	for _, c := range r.Any {
		row("any: ", c)
	}
	var held []string
	for _, v := range views {
		held = append(held, map[bool]string{true: "HELD", false: "-"}[r.Holds(v)])
	}
	fmt.Fprintf(w, "    %-34s %s\n", "rule", cells(held))
}

func cells(cs []string) string {
	var b strings.Builder
	for _, c := range cs {
		fmt.Fprintf(&b, "%-12s", c)
	}
	return strings.TrimRight(b.String(), " ")
}

// value is what a condition looked at in a window, for the reader.
func value(c pattern.Condition, v pattern.WindowView) string {
	switch c.Op {
	case pattern.LevelAtLeast, pattern.LevelAtMost:
		return short(v.Levels[c.Metric])
	case pattern.GradeAtLeast, pattern.GradeAtMost:
		return "g" + v.Grades[c.Metric].String()
	}
	x, ok := c.Quantity.Value(v)
	if !ok {
		return "n/a"
	}
	return fmt.Sprintf("%.3g", x)
}

func short(l coding.Level) string { return l.String()[:4] }

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
