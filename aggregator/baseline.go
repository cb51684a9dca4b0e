package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"strings"
	"text/tabwriter"

	"sluice/pkg/api"
	"sluice/pkg/baseline"
	"sluice/pkg/progress"
)

const baselineUsage = `usage: aggregator baseline <import FILE | show | export> [options]

  import FILE  send a window-value CSV file to the running aggregator; each day
               in it replaces that day's earlier import (live windows stay)
  show         each metric's cut points in force, their basis and counts
  export       every stored day as window-value CSV (stdout or --out)

Run "aggregator baseline <subcommand> -h" for its options.
`

func baselineCmd(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	return group{name: "baseline", usage: baselineUsage, subs: map[string]func([]string) error{
		"import": func(a []string) error { return baselineImport(ctx, a, stdout, stderr) },
		"show":   func(a []string) error { return baselineShow(ctx, a, stdout) },
		"export": func(a []string) error { return baselineExport(ctx, a, stdout) },
	}}.run(args, stdout)
}

func baselineImport(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	c := newCommand("baseline import", "FILE", "Send a window-value CSV file (layout: pkg/windowcsv) to the running aggregator; each day in it replaces that day's earlier import.", stdout)
	client := c.client()
	quiet := c.fs.Bool("quiet", false, "no progress report")
	asJSON := c.jsonOption()
	pos, err := c.parse(args, 1)
	if err != nil {
		return err
	}
	path := pos[0]
	f, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("baseline import: %w", err)
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil {
		return fmt.Errorf("baseline import: %w", err)
	}
	var body io.Reader = f
	var meter *progress.Meter
	if !*quiet {
		meter = progress.New(stderr, "importing "+path, fi.Size(), progress.IsTerminal(stderr), nil)
		body = meter.Reader(f)
	}
	res, err := client().ImportBaseline(ctx, body, fi.Size())
	if meter != nil {
		meter.Done()
	}
	if err != nil {
		return fmt.Errorf("baseline import %s: %w", path, err)
	}
	if *asJSON {
		return printJSON(stdout, res)
	}
	printImport(stdout, path, res)
	return nil
}

func printImport(w io.Writer, path string, res api.ImportResult) {
	fmt.Fprintf(w, "%s: %d rows (%d windows) imported into %d days", path, res.Rows, res.Windows, len(res.Days))
	if n := len(res.Days); n > 0 {
		fmt.Fprintf(w, " (%s to %s)", res.Days[0], res.Days[n-1])
	}
	fmt.Fprintln(w)
	if res.Malformed > 0 {
		fmt.Fprintf(w, "%d malformed rows skipped:\n", res.Malformed)
		for _, e := range res.Errors {
			fmt.Fprintln(w, "  "+clean(e))
		}
		if res.Malformed > len(res.Errors) {
			fmt.Fprintf(w, "  ... and %d more\n", res.Malformed-len(res.Errors))
		}
	}
	if res.Rejected > 0 {
		fmt.Fprintf(w, "%d values refused by the baseline\n", res.Rejected)
	}
}

func baselineShow(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("baseline show", "", "Each metric's cut points in force, what they rest on (seed or learned), the windows behind them, and the days held.", stdout)
	client := c.client()
	asJSON := c.jsonOption()
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	b, err := client().Baseline(ctx)
	if err != nil {
		return fmt.Errorf("baseline show: %w", err)
	}
	if *asJSON {
		return printJSON(stdout, b)
	}
	printBaseline(stdout, b)
	return nil
}

// printBaseline writes one row per metric: what its cuts rest on, the cut
// points (per node, per second) and the windows behind them, then the
// days the baseline holds.
func printBaseline(w io.Writer, b api.BaselineReport) {
	q := b.Quantiles
	fmt.Fprintf(w, "horizon %d days, learned after %d non-idle windows; grades cut at p%g p%g p%g, levels at p%g (elevated) p%g (critical); recomputed %s\n\n",
		b.HorizonDays, b.MinWindows, 100*q[0], 100*q[1], 100*q[2], 100*q[3], 100*q[4], stamp(b.Recomputed))
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "METRIC\tBASIS\tELEVATED\tCRITICAL\tGRADE CUTS (1|2|3|4)\tWINDOWS\tIDLE\t")
	for _, m := range b.Metrics {
		g := m.Grades
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s | %s | %s\t%d\t%d\t\n", m.Metric, m.Basis,
			human(m.Elevated, m.Bytes), human(m.Critical, m.Bytes),
			human(g[0], m.Bytes), human(g[1], m.Bytes), human(g[2], m.Bytes), m.Windows, m.Idle)
	}
	tw.Flush()
	fmt.Fprintf(w, "\n%d days stored", len(b.Days))
	if n := len(b.Days); n > 0 {
		fmt.Fprintf(w, ", %s to %s", b.Days[0].Day, b.Days[n-1].Day)
	}
	fmt.Fprintln(w, ":")
	for _, d := range b.Days {
		origins := make([]string, len(d.Origins))
		for i, o := range d.Origins {
			origins[i] = string(o)
		}
		fmt.Fprintf(w, "  %s  %s\n", d.Day, strings.Join(origins, "+"))
	}
	if b.Rejected > 0 {
		fmt.Fprintf(w, "%d window values refused (NaN or negative)\n", b.Rejected)
	}
}

func baselineExport(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("baseline export", "", "Every stored day as window-value CSV, one row per sketch bin, so that an export imported elsewhere gives the same cut points.", stdout)
	client := c.client()
	out := c.fs.String("out", "", "file to write; empty writes to standard output")
	origin := c.fs.String("origin", "", `"live" or "import" for one origin only; empty merges both per day`)
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	w := stdout
	if *out != "" {
		f, err := os.Create(*out)
		if err != nil {
			return fmt.Errorf("baseline export: %w", err)
		}
		defer f.Close()
		w = f
	}
	if err := client().ExportBaseline(ctx, baseline.Origin(*origin), w); err != nil {
		return fmt.Errorf("baseline export: %w", err)
	}
	return nil
}
