package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"net/http"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

func jobs(ctx context.Context, args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator jobs", flag.ContinueOnError)
	url := urlFlag(fs)
	all := fs.Bool("all", false, "include recently ended jobs")
	wide := fs.Bool("wide", false, "one column per metric instead of the hottest metrics")
	if err := parse(fs, args); err != nil {
		return err
	}
	list, err := fetchJobs(ctx, *url)
	if err != nil {
		return err
	}
	if !*all {
		list = slices.DeleteFunc(list, func(j model.Summary) bool { return j.State != "running" })
	}
	printJobs(stdout, list, *wide, time.Now())
	return nil
}

func fetchJobs(ctx context.Context, base string) ([]model.Summary, error) {
	var out struct {
		Jobs []model.Summary `json:"jobs"`
	}
	if err := call(ctx, http.MethodGet, base, "/api/v1/jobs", nil, &out); err != nil {
		return nil, err
	}
	return out.Jobs, nil
}

// printJobs writes the jobs table: one row per job, the live per-node
// rates of its hottest metrics (or all metrics with wide) with their
// levels, and its active flags.
func printJobs(w io.Writer, list []model.Summary, wide bool, now time.Time) {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	head := []string{"JOB", "USER", "NAME", "NODES", "STATE", "RUNTIME"}
	if wide {
		for _, id := range metric.All() {
			head = append(head, strings.ToUpper(id.String()))
		}
	} else {
		head = append(head, "HOTTEST (live, per node)")
	}
	fmt.Fprintln(tw, strings.Join(append(head, "FLAGS"), "\t"))
	for _, j := range list {
		row := []string{j.ID, dash(j.User), dash(j.Name), fmt.Sprint(max(len(j.Nodes), j.NodesSeen)), j.State, runtime(j, now)}
		if wide {
			for _, id := range metric.All() {
				row = append(row, cell(id, j.Live[id], j.LiveLevels[id]))
			}
		} else {
			row = append(row, hottest(j, 3))
		}
		fmt.Fprintln(tw, strings.Join(append(row, flags(j)), "\t"))
	}
	tw.Flush()
	if len(list) == 0 {
		fmt.Fprintln(w, "(no jobs)")
	}
}

func dash(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

func runtime(j model.Summary, now time.Time) string {
	end := now
	if j.Ended() {
		end = j.End
	}
	return end.Sub(j.Start).Truncate(time.Second).String()
}

// hottest lists the n busiest non-idle metrics: highest level first, then
// highest rate.
func hottest(j model.Summary, n int) string {
	ids := slices.DeleteFunc(metric.All(), func(id metric.ID) bool { return coding.IsIdle(id, j.Live[id]) })
	slices.SortStableFunc(ids, func(a, b metric.ID) int {
		if la, lb := j.LiveLevels[a], j.LiveLevels[b]; la != lb {
			return int(lb) - int(la)
		}
		return compareDesc(j.Live[a]/scale(a), j.Live[b]/scale(b))
	})
	var parts []string
	for _, id := range ids[:min(n, len(ids))] {
		parts = append(parts, id.String()+" "+cell(id, j.Live[id], j.LiveLevels[id]))
	}
	if len(parts) == 0 {
		return "idle"
	}
	return strings.Join(parts, ", ")
}

// scale puts byte and op rates on one footing for ordering: 1 op ~ 1 MiB.
func scale(id metric.ID) float64 {
	if id.IsBytes() {
		return 1 << 20
	}
	return 1
}

func compareDesc(a, b float64) int {
	switch {
	case a > b:
		return -1
	case a < b:
		return 1
	}
	return 0
}

func cell(id metric.ID, rate float64, l coding.Level) string {
	s := human(rate, id.IsBytes())
	switch l {
	case coding.Critical:
		return s + " CRIT"
	case coding.Elevated:
		return s + " high"
	}
	return s
}

// human prints a rate with an SI prefix: 1.5k/s, 600MB/s.
func human(v float64, bytes bool) string {
	unit := "/s"
	if bytes {
		unit = "B/s"
	}
	for _, p := range []struct {
		f float64
		s string
	}{{1e9, "G"}, {1e6, "M"}, {1e3, "k"}} {
		if v >= p.f {
			return fmt.Sprintf("%.3g%s%s", v/p.f, p.s, unit)
		}
	}
	return fmt.Sprintf("%.3g%s", v, unit)
}

func flags(j model.Summary) string {
	if len(j.ActiveFlags) == 0 {
		return "-"
	}
	var parts []string
	for _, f := range j.ActiveFlags {
		parts = append(parts, fmt.Sprintf("%s since %s", f.Reason, f.Since.Local().Format("15:04:05")))
	}
	return strings.Join(parts, "; ")
}
