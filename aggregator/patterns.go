package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net/http"
	neturl "net/url"
	"os"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"sluice/pkg/aggregate"
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

const patternsUsage = `usage: aggregator patterns <list | show NAME | check DIR | learn> [flags]

  list        the patterns in force: built-in, laid over by --dir
  show NAME   one pattern in full
  check DIR   validate every pattern file in DIR; non-zero exit on any error
  learn       write an example pattern from a job's signature (--job, --name)
`

func patternsCmd(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		fmt.Fprint(stderr, patternsUsage)
		return errors.New("patterns: no subcommand given")
	}
	switch args[0] {
	case "list":
		return patternsList(args[1:], stdout)
	case "show":
		return patternsShow(args[1:], stdout)
	case "check":
		return patternsCheck(args[1:], stdout)
	case "learn":
		return patternsLearn(ctx, args[1:], stdout)
	case "-h", "--help", "help":
		fmt.Fprint(stderr, patternsUsage)
		return nil
	}
	fmt.Fprint(stderr, patternsUsage)
	return fmt.Errorf("patterns: unknown subcommand %q", args[0])
}

func patternsList(args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator patterns list", flag.ContinueOnError)
	dir := fs.String("dir", "", "site pattern directory laid over the built-ins")
	if err := parse(fs, args); err != nil {
		return err
	}
	ps, err := patternSet(*dir, true)
	if err != nil {
		return err
	}
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "NAME\tSEVERITY\tKIND\tTITLE\tSOURCE")
	for _, p := range ps {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\n", p.Name, p.Severity, p.Kind(), p.Title, p.Source)
	}
	return tw.Flush()
}

func patternsShow(args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator patterns show", flag.ContinueOnError)
	dir := fs.String("dir", "", "site pattern directory laid over the built-ins")
	name, err := parseWithFile(fs, args)
	if err != nil {
		return fmt.Errorf("patterns show: %w", err)
	}
	ps, err := patternSet(*dir, true)
	if err != nil {
		return err
	}
	for _, p := range ps {
		if p.Name == name {
			fmt.Fprintln(stdout, pattern.Describe(p))
			return nil
		}
	}
	return fmt.Errorf("patterns show: no pattern %q (see aggregator patterns list)", name)
}

func patternsCheck(args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator patterns check", flag.ContinueOnError)
	dir, err := parseWithFile(fs, args)
	if err != nil {
		return fmt.Errorf("patterns check: %w", err)
	}
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
	fs := flag.NewFlagSet("aggregator patterns learn", flag.ContinueOnError)
	url := urlFlag(fs)
	job := fs.String("job", "", "the job to learn from (required)")
	name := fs.String("name", "", "the new pattern's name (required; lower case, digits, _)")
	from := fs.String("from", "", "first window to take, RFC 3339 time (default: the job's first)")
	to := fs.String("to", "", "last window to take, RFC 3339 time (default: the job's last)")
	out := fs.String("out", "", "file to write; empty writes to standard output")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *job == "" || *name == "" {
		return errors.New("patterns learn: --job and --name are required")
	}
	detail, err := fetchJob(ctx, *url, *job)
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
		Name: name, Title: fmt.Sprintf("Learned from job %s", job.ID), Severity: pattern.Warning,
		Description: fmt.Sprintf("The signature of job %s (%s) over %d windows from %s. Edit this text to say what the behaviour is.",
			job.ID, who, len(ws), ws[0].Start.UTC().Format(time.RFC3339)),
		Rationale:  "Learned from a job that staff reviewed; say here why the behaviour matters.",
		Advice:     "Consider looking at the job's recent windows with aggregator explain; follow your site's policy before contacting the user or acting on the job.",
		RaiseAfter: 1, ClearAfter: 2, Threshold: 0.8, Example: ex,
	}
	return p, nil
}

func fetchJob(ctx context.Context, base, id string) (aggregate.JobDetail, error) {
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, strings.TrimRight(base, "/")+"/api/v1/jobs/"+neturl.PathEscape(id), nil)
	if err != nil {
		return aggregate.JobDetail{}, err
	}
	var d aggregate.JobDetail
	if err := do(req, base, &d); err != nil {
		return aggregate.JobDetail{}, err
	}
	return d, nil
}
