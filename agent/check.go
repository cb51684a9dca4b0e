package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net/url"
	"os"
	"strings"
	"text/tabwriter"
	"time"

	"sluice/pkg/nodeagent"
	"sluice/pkg/source"
)

// check validates the configuration, reads every source once and lists
// what it found and the metrics it will produce. Any problem is an error,
// so the command exits non-zero.
func check(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	a, f, err := setup("agent check", args, stderr)
	if err != nil {
		return err
	}
	var problems []error
	if err := checkBrokerURL(f.natsURL); err != nil {
		problems = append(problems, err)
	}
	reports, err := a.Check(ctx)
	if err != nil {
		problems = append(problems, err)
	}
	fmt.Fprintf(stdout, "node %s, interval %s, phase %s, broker %s, state %s\n\n", a.Node(), a.Interval(), a.Phase().Round(time.Millisecond), f.natsURL, f.stateDir)
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "SOURCE\tINSTANCES\tMETRICS\tSTATUS")
	for _, r := range reports {
		fmt.Fprintf(tw, "%s\t%d\t%s\t%s\n", r.Name, len(r.Instances), metricNames(r), status(r))
	}
	tw.Flush()
	if err := nodeagent.Usable(reports); err != nil {
		problems = append(problems, err)
	}
	if len(problems) > 0 {
		return fmt.Errorf("check failed: %w", errors.Join(problems...))
	}
	fmt.Fprintln(stdout, "\nok")
	return nil
}

// metricNames lists the metrics a source gives, marked "per job" when they
// go to each job's block rather than to the node's values.
func metricNames(r nodeagent.SourceReport) string {
	if len(r.Metrics) == 0 {
		return "-"
	}
	var ns []string
	for _, id := range r.Metrics {
		ns = append(ns, id.String())
	}
	if r.PerJob {
		return strings.Join(ns, " ") + ", per job"
	}
	return strings.Join(ns, " ")
}

func status(r nodeagent.SourceReport) string {
	switch {
	case errors.Is(r.Err, source.ErrNoData):
		return "no data: " + r.Err.Error()
	case r.Err != nil:
		return "error: " + r.Err.Error()
	case r.Malformed > 0:
		return fmt.Sprintf("ok, %d malformed lines skipped", r.Malformed)
	}
	return "ok"
}

func checkBrokerURL(list string) error {
	for _, u := range strings.Split(list, ",") {
		p, err := url.Parse(strings.TrimSpace(u))
		if err != nil || p.Host == "" {
			return fmt.Errorf("--nats.url %q: not a broker URL like nats://host:4222", u)
		}
		switch p.Scheme {
		case "nats", "tls", "ws", "wss":
		default:
			return fmt.Errorf("--nats.url %q: scheme %q is not nats, tls, ws or wss", u, p.Scheme)
		}
	}
	return nil
}

// bench samples every configured source many times and prints the cost
// per sample and the CPU share it projects at the configured interval.
func bench(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	var reads int
	a, _, err := setup("agent bench", args, stderr, func(fs *flag.FlagSet) {
		fs.IntVar(&reads, "bench.reads", 2000, "reads of each source to time")
	})
	if err != nil {
		return err
	}
	if reads < 1 {
		return fmt.Errorf("--bench.reads must be at least 1")
	}
	res, err := a.Bench(ctx, reads)
	if err != nil {
		return err
	}
	iv := a.Interval()
	fmt.Fprintf(stdout, "%d reads per source, interval %s\n\n", reads, iv)
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "SOURCE\tINSTANCES\tWALL µs/SAMPLE\tCPU µs/SAMPLE\tCPU SHARE AT INTERVAL\t")
	for _, r := range res {
		share := float64(r.CPU) / float64(iv) * 100
		fmt.Fprintf(tw, "%s\t%d\t%.1f\t%.1f\t%.4f%%\t\n", r.Name, r.Instances, us(r.Wall), us(r.CPU), share)
	}
	tw.Flush()
	if rss, err := residentBytes(); err == nil {
		fmt.Fprintf(stdout, "\nresident memory now: %.1f MiB\n", float64(rss)/(1<<20))
	}
	return nil
}

func us(d interface{ Nanoseconds() int64 }) float64 { return float64(d.Nanoseconds()) / 1e3 }

// residentBytes reads this process's resident set size from
// /proc/self/statm (second field, in pages).
func residentBytes() (uint64, error) {
	b, err := os.ReadFile("/proc/self/statm")
	if err != nil {
		return 0, err
	}
	var size, rss uint64
	if _, err := fmt.Sscan(string(b), &size, &rss); err != nil {
		return 0, err
	}
	return rss * uint64(os.Getpagesize()), nil
}
