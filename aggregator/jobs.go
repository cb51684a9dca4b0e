package main

import (
	"context"
	"fmt"
	"io"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

func jobsCmd(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("jobs", "", "The running jobs: live per-node rates of their hottest metrics, levels and active flags.", stdout)
	client := c.client()
	all := c.fs.Bool("all", false, "include recently ended jobs")
	wide := c.fs.Bool("wide", false, "one column per metric instead of the hottest metrics")
	asJSON := c.jsonOption()
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	list, err := client().Jobs(ctx, !*all)
	if err != nil {
		return err
	}
	if *asJSON {
		return printJSON(stdout, map[string]any{"jobs": list})
	}
	printJobs(stdout, list, *wide, time.Now())
	return nil
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
		row := []string{dash(j.ID), dash(j.User), dash(j.Name), fmt.Sprint(max(len(j.Nodes), j.NodesSeen)), j.State.String(), runtime(j, now)}
		if wide {
			for _, id := range metric.All() {
				row = append(row, cell(id, j.Live[id], j.LiveLevels[id]))
			}
		} else {
			row = append(row, hottest(j, 3))
		}
		fmt.Fprintln(tw, strings.Join(append(row, flagsOf(j)), "\t"))
	}
	tw.Flush()
	if len(list) == 0 {
		fmt.Fprintln(w, "(no jobs)")
	}
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

// flagsOf lists a job's active flags: reason, state when not active, and
// since when.
func flagsOf(j model.Summary) string {
	if len(j.ActiveFlags) == 0 {
		return "-"
	}
	var parts []string
	for _, f := range j.ActiveFlags {
		s := f.Reason.String()
		if f.State != model.FlagActive {
			s += " (" + f.State.String() + ")"
		}
		parts = append(parts, s+" since "+stamp(f.Since))
	}
	return strings.Join(parts, "; ")
}
