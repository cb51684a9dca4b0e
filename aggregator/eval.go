package main

import (
	"fmt"
	"io"
	"maps"
	"math"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"sluice/pkg/eval"
	"sluice/pkg/metric"
	"sluice/pkg/pattern"
)

// evalCmd runs the pattern library over labelled scenarios and prints
// each pattern's recall, precision, false flags and detection delay
// against the targets. It exits 0 whatever the figures: the test in
// pkg/eval is what fails.
func evalCmd(args []string, stdout io.Writer) error {
	c := newCommand("eval", "", "Measure the pattern library on labelled simulated jobs: recall, precision, false flags and detection delay per pattern.", stdout)
	jobs := c.fs.Int("jobs", 1000, "labelled jobs to generate")
	seed := c.fs.Uint64("seed", 1, "seed of the scenarios (the same seed gives the same jobs)")
	dir := c.fs.String("patterns", "", "directory of site patterns merged over the built-ins (default: built-ins only)")
	cuts := c.fs.Bool("cuts", false, "also print the cut points learned from the ordinary jobs")
	list := c.fs.Bool("list", false, "also list every job whose flags disagree with its label")
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	if *jobs < 1 {
		return c.usage(fmt.Errorf("--jobs %d: want at least 1", *jobs))
	}
	ps, err := pattern.Builtin()
	if err != nil {
		return err
	}
	if *dir != "" {
		site, err := pattern.LoadDir(*dir)
		if err != nil {
			return fmt.Errorf("eval: %w", err)
		}
		ps = pattern.Merge(ps, site)
	}
	began := time.Now()
	res, err := eval.Run(eval.Options{Jobs: *jobs, Seed: *seed, Patterns: ps})
	if err != nil {
		return err
	}
	printEval(stdout, res, time.Since(began), *cuts, *list)
	return nil
}

func printEval(w io.Writer, res *eval.Result, took time.Duration, cuts, list bool) {
	o := res.Options
	fmt.Fprintf(w, "labelled jobs: %d (seed %d), %d samples; baseline: %d windows of %d ordinary jobs; %.1fs\n",
		o.Jobs, o.Seed, res.Samples, res.BaselineWindows, o.BaselineJobs, took.Seconds())
	var classes []string
	for _, c := range sortedKeys(res.Jobs) {
		classes = append(classes, fmt.Sprintf("%s %d", c, res.Jobs[c]))
	}
	fmt.Fprintf(w, "classes: %s\n", strings.Join(classes, ", "))
	fmt.Fprintf(w, "targets: recall >= %.2f, precision >= %.2f, median delay <= %.0f windows, benign jobs flagged <= %.0f%%\n\n",
		eval.RecallTarget, eval.PrecisionTarget, eval.MedianDelayTarget, 100*eval.BenignFlaggedTarget)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "PATTERN\tPOS\tRECALL\tFLAGGED\tPRECISION\tFALSE/1000\tDELAY p50\tDELAY p90\tRESULT\tNOTES")
	for _, r := range res.Rows {
		verdict := "PASS"
		if m := r.Misses(); len(m) > 0 {
			verdict = "MISS"
		}
		if !r.Builtin {
			verdict = "(site) " + verdict
		}
		var notes []string
		for _, l := range sortedKeys(r.Others) {
			notes = append(notes, fmt.Sprintf("on %s: %d", l, r.Others[l]))
		}
		notes = append(notes, r.Misses()...)
		fmt.Fprintf(tw, "%s\t%d\t%s\t%d\t%s\t%.1f\t%s\t%s\t%s\t%s\n", r.Pattern, r.Positives, num(r.Recall(), 3),
			r.Flagged, num(r.Precision(), 3), r.FalsePer1000(), num(r.MedianDelay(), 2), num(r.P90Delay(), 2), verdict, strings.Join(notes, "; "))
	}
	tw.Flush()
	verdict := "PASS"
	if !(res.BenignFlaggedShare() <= eval.BenignFlaggedTarget) {
		verdict = "MISS"
	}
	var by []string
	for _, c := range sortedKeys(res.FlaggedByClass) {
		by = append(by, fmt.Sprintf("%s %d", c, res.FlaggedByClass[c]))
	}
	fmt.Fprintf(w, "\nbenign jobs flagged by a problem pattern: %d of %d (%.2f%%, target <= %.0f%%) %s", res.BenignFlagged, res.Benign,
		100*res.BenignFlaggedShare(), 100*eval.BenignFlaggedTarget, verdict)
	if len(by) > 0 {
		fmt.Fprintf(w, " [%s]", strings.Join(by, ", "))
	}
	fmt.Fprintln(w)
	if cuts {
		fmt.Fprintln(w, "\ncut points learned from the ordinary jobs (per node):")
		tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "METRIC\tBASIS\tp50\tp90\tELEVATED (p99)\tCRITICAL (p99.9)")
		for id := range metric.Count {
			src := res.Bases[id]
			g := res.Coding.Grades[id]
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\n", id, src, human(g[0], id.IsBytes()), human(g[2], id.IsBytes()),
				human(res.Coding.Levels[id].Elevated, id.IsBytes()), human(res.Coding.Levels[id].Critical, id.IsBytes()))
		}
		tw.Flush()
	}
	if list {
		fmt.Fprintln(w, "\njobs whose flags disagree with their label (times from the job's start):")
		tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "JOB\tCLASS\tVARIANT\tNODES\tWINDOWS\tINJECTED\tINTENSITY\tFLAGS")
		for _, o := range res.Outcomes {
			var fl []string
			for _, p := range slices.Sorted(maps.Keys(o.Flags)) {
				fl = append(fl, fmt.Sprintf("%s at %s", p, o.Flags[p]))
			}
			span := "-"
			if o.Until > 0 {
				span = fmt.Sprintf("%s..%s", o.Onset, o.Until)
			}
			fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%d\t%s\t%.2f\t%s\n", o.Job, o.Class, cmpOr(o.Variant, "-"), o.Nodes, o.Windows, span,
				o.Intensity, cmpOr(strings.Join(fl, ", "), "none"))
		}
		tw.Flush()
	}
}

func cmpOr(s, def string) string {
	if s == "" {
		return def
	}
	return s
}

func num(v float64, prec int) string {
	if math.IsNaN(v) {
		return "-"
	}
	return fmt.Sprintf("%.*f", prec, v)
}

func sortedKeys(m map[string]int) []string {
	return slices.Sorted(maps.Keys(m))
}
