package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

// patternSet is the built-in library (unless left out) with the site's
// directory laid over it.
func patternSet(dir string, builtin bool) ([]*pattern.Pattern, error) {
	var base []*pattern.Pattern
	if builtin {
		var err error
		if base, err = pattern.Builtin(); err != nil {
			return nil, fmt.Errorf("built-in patterns: %w", err)
		}
	}
	if dir == "" {
		return base, nil
	}
	site, err := pattern.LoadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("--patterns.dir: %w", err)
	}
	return pattern.Merge(base, site), nil
}

func loadLibrary(dir string, builtin bool) (*matcher.Library, error) {
	ps, err := patternSet(dir, builtin)
	if err != nil {
		return nil, err
	}
	return matcher.Compile(ps)
}

const patternsUsage = `usage: aggregator patterns <list | show NAME | check DIR | learn> [options]

  list        the patterns the running aggregator matches jobs against
  show NAME   one of them in full
  check DIR   validate every pattern file in DIR (on this machine); non-zero
              exit on any error
  learn       write an example pattern from a job's signature (--job, --name)

Run "aggregator patterns <subcommand> -h" for its options.
`

func patternsCmd(ctx context.Context, args []string, stdout io.Writer) error {
	return group{name: "patterns", usage: patternsUsage, subs: map[string]func([]string) error{
		"list":  func(a []string) error { return patternsList(ctx, a, stdout) },
		"show":  func(a []string) error { return patternsShow(ctx, a, stdout) },
		"check": func(a []string) error { return patternsCheck(a, stdout) },
		"learn": func(a []string) error { return patternsLearn(ctx, a, stdout) },
	}}.run(args, stdout)
}

func patternsList(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("patterns list", "", "The patterns the running aggregator matches jobs against, in its order.", stdout)
	client := c.client()
	asJSON := c.jsonOption()
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	ps, err := client().Patterns(ctx)
	if err != nil {
		return fmt.Errorf("patterns list: %w", err)
	}
	if *asJSON {
		return printJSON(stdout, map[string]any{"patterns": ps})
	}
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "NAME\tSEVERITY\tKIND\tTITLE\tSOURCE")
	for _, p := range ps {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\n", p.Name, p.Severity, p.Kind, dash(p.Title), dash(p.Source))
	}
	return tw.Flush()
}

func patternsShow(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("patterns show", "NAME", "One pattern the running aggregator uses, in full (--json: with its file text).", stdout)
	client := c.client()
	asJSON := c.jsonOption()
	pos, err := c.parse(args, 1)
	if err != nil {
		return err
	}
	ap, err := client().Pattern(ctx, pos[0])
	if err != nil {
		return fmt.Errorf("patterns show: %w", err)
	}
	if *asJSON {
		return printJSON(stdout, ap)
	}
	p, err := pattern.Parse(ap.Source, strings.NewReader(ap.File))
	if err != nil {
		return fmt.Errorf("patterns show: the aggregator's text of %s: %w", ap.Name, err)
	}
	fmt.Fprintf(stdout, "%s  (from %s)\n", strings.TrimRight(pattern.Describe(p), "\n"), ap.Source)
	return nil
}

func patternsCheck(args []string, stdout io.Writer) error {
	c := newCommand("patterns check", "DIR", "Validate every pattern file (*.yaml) in DIR on this machine; non-zero exit on any error.", stdout)
	pos, err := c.parse(args, 1)
	if err != nil {
		return err
	}
	dir := pos[0]
	ps, err := pattern.LoadDir(dir)
	if err != nil {
		return err
	}
	if _, err := matcher.Compile(ps); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "%s: %d patterns, all valid\n", dir, len(ps))
	return nil
}

// patternsLearn turns a job's windows (or a span of them) into an example
// pattern file: Sellers over the metrics that were not idle throughout,
// at most five, the busiest first.
func patternsLearn(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("patterns learn", "", "Write an example pattern (Sellers) from a job's closed windows, running or finished, ready to edit.", stdout)
	client := c.client()
	job := c.fs.String("job", "", "the job to learn from (required)")
	name := c.fs.String("name", "", "the new pattern's name (required; lower case, digits, _)")
	from := c.fs.String("from", "", "first window to take, RFC 3339 time (default: the job's first)")
	to := c.fs.String("to", "", "last window to take, RFC 3339 time (default: the job's last)")
	out := c.fs.String("out", "", "file to write; empty writes to standard output")
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	if *job == "" || *name == "" {
		return c.usage(errors.New("--job and --name are required"))
	}
	detail, err := client().Job(ctx, *job)
	if err != nil {
		return fmt.Errorf("patterns learn: %w", err)
	}
	ws, err := span(detail.ClosedWindows, *from, *to)
	if err != nil {
		return fmt.Errorf("patterns learn: %w", err)
	}
	p, err := learnExample(*name, detail.Summary, ws)
	if err != nil {
		return fmt.Errorf("patterns learn: %w", err)
	}
	text, err := p.Marshal()
	if err != nil {
		return fmt.Errorf("patterns learn: %w", err)
	}
	if *out == "" {
		_, err = stdout.Write(text)
		return err
	}
	return os.WriteFile(*out, text, 0o644)
}

func span(ws []model.Window, from, to string) ([]model.Window, error) {
	lo, hi := time.Time{}, time.Time{}
	var err error
	if from != "" {
		if lo, err = time.Parse(time.RFC3339, from); err != nil {
			return nil, fmt.Errorf("--from: %w", err)
		}
	}
	if to != "" {
		if hi, err = time.Parse(time.RFC3339, to); err != nil {
			return nil, fmt.Errorf("--to: %w", err)
		}
	}
	var out []model.Window
	for _, w := range ws {
		if (lo.IsZero() || !w.End.Before(lo)) && (hi.IsZero() || !w.Start.After(hi)) {
			out = append(out, w)
		}
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no closed window in the span (the job has %d)", len(ws))
	}
	if len(out) > 64 {
		return nil, fmt.Errorf("%d windows in the span; a pattern takes at most 64 (use --from and --to)", len(out))
	}
	return out, nil
}

func learnExample(name string, job model.Summary, ws []model.Window) (*pattern.Pattern, error) {
	type busy struct {
		id  metric.ID
		sum int
	}
	var picked []busy
	for _, id := range metric.All() {
		sum := 0
		for _, w := range ws {
			sum += int(w.Grades[id])
		}
		if sum > 0 {
			picked = append(picked, busy{id, sum})
		}
	}
	if len(picked) == 0 {
		return nil, errors.New("every metric was idle in every window: nothing to learn")
	}
	slices.SortStableFunc(picked, func(a, b busy) int { return b.sum - a.sum }) // busiest first
	picked = picked[:min(5, len(picked))]
	ex := &pattern.Example{Method: pattern.Sellers}
	for _, b := range picked {
		gs := make([]coding.Grade, len(ws))
		for i, w := range ws {
			gs[i] = w.Grades[b.id]
		}
		ex.Metrics = append(ex.Metrics, b.id)
		ex.Grades = append(ex.Grades, gs)
	}
	who := strings.TrimSpace(strings.Join([]string{job.Name, job.User}, ", "))
	p := &pattern.Pattern{
		Name: name, Title: fmt.Sprintf("Learned from job %s", job.ID), Severity: model.SeverityWarning,
		Description: fmt.Sprintf("The signature of job %s (%s) over %d windows from %s. Edit this text to say what the behaviour is.",
			job.ID, who, len(ws), ws[0].Start.UTC().Format(time.RFC3339)),
		Rationale:  "Learned from a job that staff reviewed; say here why the behaviour matters.",
		Advice:     "Consider looking at the job's recent windows with aggregator explain; follow your site's policy before contacting the user or acting on the job.",
		RaiseAfter: 1, ClearAfter: 2, Threshold: 0.8, Example: ex,
	}
	return p, nil
}
