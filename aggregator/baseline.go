package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"net/http"
	"os"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/schollz/progressbar/v3"

	"sluice/pkg/aggregate"
)

const baselineUsage = `usage: aggregator baseline <import FILE | show | export> [flags]

  import FILE  send a window-value CSV file to the running aggregator; each day
               in it replaces that day's earlier import (live windows stay)
  show         print each metric's cut points in force, their source and counts
  export       write every stored day as window-value CSV (stdout or --out)
`

func baselineCmd(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		fmt.Fprint(stderr, baselineUsage)
		return errors.New("baseline: no subcommand given")
	}
	switch args[0] {
	case "import":
		return baselineImport(ctx, args[1:], stdout, stderr)
	case "show":
		return baselineShow(ctx, args[1:], stdout)
	case "export":
		return baselineExport(ctx, args[1:], stdout)
	case "-h", "--help", "help":
		fmt.Fprint(stderr, baselineUsage)
		return nil
	}
	fmt.Fprint(stderr, baselineUsage)
	return fmt.Errorf("baseline: unknown subcommand %q", args[0])
}

func baselineImport(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("aggregator baseline import", flag.ContinueOnError)
	url := urlFlag(fs)
	quiet := fs.Bool("quiet", false, "no progress bar")
	path, err := parseWithFile(fs, args)
	if err != nil {
		return fmt.Errorf("baseline import: %w", err)
	}
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
	if !*quiet {
		bar := progressbar.NewOptions64(fi.Size(),
			progressbar.OptionSetDescription("importing "+path),
			progressbar.OptionSetWriter(stderr),
			progressbar.OptionShowBytes(true),
			progressbar.OptionShowTotalBytes(true),
			progressbar.OptionSetPredictTime(true),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionOnCompletion(func() { fmt.Fprintln(stderr) }),
		)
		r := progressbar.NewReader(f, bar)
		body = &r
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, strings.TrimRight(*url, "/")+"/api/v1/baseline/import", body)
	if err != nil {
		return err
	}
	req.ContentLength = fi.Size()
	req.Header.Set("Content-Type", "text/csv")
	var res aggregate.ImportResult
	if err := do(req, *url, &res); err != nil {
		return fmt.Errorf("baseline import %s: %w", path, err)
	}
	printImport(stdout, path, res)
	return nil
}

func printImport(w io.Writer, path string, res aggregate.ImportResult) {
	fmt.Fprintf(w, "%s: %d rows (%d windows) imported into %d days", path, res.Rows, res.Windows, len(res.Days))
	if n := len(res.Days); n > 0 {
		fmt.Fprintf(w, " (%s to %s)", res.Days[0], res.Days[n-1])
	}
	fmt.Fprintln(w)
	if res.Malformed > 0 {
		fmt.Fprintf(w, "%d malformed rows skipped:\n", res.Malformed)
		for _, e := range res.Errors {
			fmt.Fprintln(w, "  "+e)
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
	fs := flag.NewFlagSet("aggregator baseline show", flag.ContinueOnError)
	url := urlFlag(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, strings.TrimRight(*url, "/")+"/api/v1/baseline", nil)
	if err != nil {
		return err
	}
	var b aggregate.Baseline
	if err := do(req, *url, &b); err != nil {
		return fmt.Errorf("baseline show: %w", err)
	}
	printBaseline(stdout, b)
	return nil
}

// printBaseline writes one row per metric: where its cuts come from, the
// cut points (per node, per second) and the windows behind them, then the
// days the baseline holds.
func printBaseline(w io.Writer, b aggregate.Baseline) {
	q := b.Quantiles
	fmt.Fprintf(w, "horizon %d days, learned after %d non-idle windows; grades cut at p%g p%g p%g, levels at p%g (elevated) p%g (critical)\n\n",
		b.HorizonDays, b.MinWindows, 100*q[0], 100*q[1], 100*q[2], 100*q[3], 100*q[4])
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "METRIC\tSOURCE\tELEVATED\tCRITICAL\tGRADE CUTS (1|2|3|4)\tWINDOWS\tIDLE\t")
	for _, m := range b.Metrics {
		g := m.Grades
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s | %s | %s\t%d\t%d\t\n", m.Metric, m.Source,
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
	fs := flag.NewFlagSet("aggregator baseline export", flag.ContinueOnError)
	url := urlFlag(fs)
	out := fs.String("out", "", "file to write; empty writes to standard output")
	origin := fs.String("origin", "", `"live" or "import" for one origin only; empty merges both per day`)
	if err := parse(fs, args); err != nil {
		return err
	}
	u := strings.TrimRight(*url, "/") + "/api/v1/baseline/export"
	if *origin != "" {
		u += "?origin=" + *origin
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, u, nil)
	if err != nil {
		return err
	}
	resp, err := send(req, *url)
	if err != nil {
		return fmt.Errorf("baseline export: %w", err)
	}
	defer resp.Body.Close()
	w := stdout
	if *out != "" {
		f, err := os.Create(*out)
		if err != nil {
			return fmt.Errorf("baseline export: %w", err)
		}
		defer f.Close()
		w = f
	}
	if _, err := io.Copy(w, resp.Body); err != nil {
		return fmt.Errorf("baseline export: %w", err)
	}
	return nil
}

// parseWithFile parses flags given before or after one FILE argument.
func parseWithFile(fs *flag.FlagSet, args []string) (string, error) {
	if err := fs.Parse(args); err != nil {
		return "", err
	}
	if fs.NArg() == 0 {
		return "", errors.New("give exactly one FILE")
	}
	file := fs.Arg(0)
	if err := parse(fs, fs.Args()[1:]); err != nil {
		return "", err
	}
	return file, nil
}

// send does req against the aggregator at base and returns the response
// when it is 200 OK.
func send(req *http.Request, base string) (*http.Response, error) {
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return nil, fmt.Errorf("ask the aggregator at %s: %w (is it running? set --url)", base, err)
	}
	if resp.StatusCode != http.StatusOK {
		defer resp.Body.Close()
		body, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
		return nil, fmt.Errorf("aggregator at %s answered %s: %s", base, resp.Status, strings.TrimSpace(string(body)))
	}
	return resp, nil
}

// do sends req and decodes the JSON answer into v.
func do(req *http.Request, base string, v any) error {
	resp, err := send(req, base)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	if err := json.NewDecoder(resp.Body).Decode(v); err != nil {
		return fmt.Errorf("decode the answer of %s: %w", base, err)
	}
	return nil
}
