package main

import (
	"context"
	"fmt"
	"io"
	"text/tabwriter"
	"time"

	"sluice/pkg/api"
	"sluice/pkg/model"
)

const flagsUsage = `usage: aggregator flags [list | ack FLAG | silence | unsilence ID | silences] [options]

  list         active flags and those cleared in the last day (the default;
               --all for every one; --job, --pattern, --state, --severity)
  ack FLAG     record that you have the flag in hand (--by, --why)
  silence      keep a job's or a pattern's flags out of Prometheus for a
               time (--job and/or --pattern, --for, --by, --why)
  unsilence ID end a silence early
  silences     the silences in force

Run "aggregator flags <subcommand> -h" for its options.
`

func flagsCmd(ctx context.Context, args []string, stdout io.Writer) error {
	return group{name: "flags", usage: flagsUsage, dflt: "list", subs: map[string]func([]string) error{
		"list":      func(a []string) error { return flagsList(ctx, a, stdout) },
		"ack":       func(a []string) error { return flagsAck(ctx, a, stdout) },
		"silence":   func(a []string) error { return flagsSilence(ctx, a, stdout) },
		"unsilence": func(a []string) error { return flagsUnsilence(ctx, a, stdout) },
		"silences":  func(a []string) error { return flagsSilences(ctx, a, stdout) },
	}}.run(args, stdout)
}

func flagsList(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("flags list", "", "Active flags, and those cleared in the last day, most recently raised first.", stdout)
	client := c.client()
	all := c.fs.Bool("all", false, "every stored flag, not only active ones and those cleared in the last day")
	job := c.fs.String("job", "", "only this job's flags")
	pat := c.fs.String("pattern", "", `only this pattern's flags, or this reason's ("high_rate:creates")`)
	state := c.fs.String("state", "", "only flags in this state: active, silenced or cleared")
	sev := c.fs.String("severity", "", "only flags of this severity: info, warning or critical")
	asJSON := c.jsonOption()
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	f := api.FlagFilter{Job: *job, Pattern: *pat}
	if *state != "" {
		st, err := model.ParseFlagState(*state)
		if err != nil {
			return c.usage(fmt.Errorf("--state: %w; want active, silenced or cleared", err))
		}
		f.State = &st
	}
	if *sev != "" {
		sv, err := model.ParseSeverity(*sev)
		if err != nil {
			return c.usage(fmt.Errorf("--severity: %w", err))
		}
		f.Severity = &sv
	}
	fs, err := client().Flags(ctx, f)
	if err != nil {
		return err
	}
	if !*all {
		fs = recent(fs, time.Now())
	}
	if *asJSON {
		return printJSON(stdout, map[string]any{"flags": fs})
	}
	printFlags(stdout, fs)
	return nil
}

// recent keeps the flags not cleared, and those cleared in the last day.
func recent(fs []model.Flag, now time.Time) []model.Flag {
	out := fs[:0]
	for _, f := range fs {
		if f.Active() || now.Sub(f.Cleared) <= 24*time.Hour {
			out = append(out, f)
		}
	}
	return out
}

// printFlags writes one row per flag, as the server ordered them.
func printFlags(w io.Writer, fs []model.Flag) {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "FLAG\tSTATE\tJOB\tREASON\tSEVERITY\tSCORE\tSINCE\tSUMMARY")
	for _, f := range fs {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%.2f\t%s\t%s\n", dash(f.ID), flagState(f), dash(f.Job), f.Reason, f.Severity, f.Score,
			stamp(f.Since), dash(f.Summary))
	}
	tw.Flush()
	if len(fs) == 0 {
		fmt.Fprintln(w, "(no flags)")
	}
}

func flagState(f model.Flag) string {
	s := f.State.String()
	if f.State == model.FlagCleared {
		s += " " + stamp(f.Cleared)
	}
	if f.Ack != nil {
		s += " (ack " + dash(f.Ack.By) + ")"
	}
	return s
}

func flagsAck(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("flags ack", "FLAG", "Record that you have a flag in hand (FLAG is the id aggregator flags lists). The flag stays exported.", stdout)
	client := c.client()
	var req api.AckRequest
	c.fs.StringVar(&req.By, "by", "", "who acknowledges (required)")
	c.fs.StringVar(&req.Why, "why", "", "what is being done about it")
	pos, err := c.parse(args, 1)
	if err != nil {
		return err
	}
	a, err := client().Acknowledge(ctx, pos[0], req)
	if err != nil {
		return fmt.Errorf("flags ack: %w", err)
	}
	fmt.Fprintf(stdout, "flag %s acknowledged by %s at %s\n", a.Flag, dash(a.By), stamp(a.At))
	return nil
}

func flagsSilence(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("flags silence", "", "Keep matching flags out of /metrics (so their alerts resolve) for a time; they stay listed as silenced.", stdout)
	client := c.client()
	var req api.SilenceRequest
	c.fs.StringVar(&req.Job, "job", "", "silence this job's flags")
	c.fs.StringVar(&req.Pattern, "pattern", "", `silence this pattern's flags (a name, or a reason such as "high_rate:creates")`)
	c.fs.StringVar(&req.For, "for", "2h", "how long: 30m, 2h, 3d, 1w, 1d12h (between 1m and 30d)")
	c.fs.StringVar(&req.By, "by", "", "who silences (required)")
	c.fs.StringVar(&req.Why, "why", "", "why (required)")
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	sl, err := client().Silence(ctx, req)
	if err != nil {
		return fmt.Errorf("flags silence: %w", err)
	}
	fmt.Fprintf(stdout, "silence %s until %s\n", sl.ID, stamp(sl.Until))
	return nil
}

func flagsUnsilence(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("flags unsilence", "ID", "End a silence early (ID as aggregator flags silences lists it).", stdout)
	client := c.client()
	pos, err := c.parse(args, 1)
	if err != nil {
		return err
	}
	if err := client().Unsilence(ctx, pos[0]); err != nil {
		return fmt.Errorf("flags unsilence: %w", err)
	}
	fmt.Fprintf(stdout, "silence %s ended\n", pos[0])
	return nil
}

func flagsSilences(ctx context.Context, args []string, stdout io.Writer) error {
	c := newCommand("flags silences", "", "The silences in force.", stdout)
	client := c.client()
	asJSON := c.jsonOption()
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	list, err := client().Silences(ctx)
	if err != nil {
		return fmt.Errorf("flags silences: %w", err)
	}
	if *asJSON {
		return printJSON(stdout, map[string]any{"silences": list})
	}
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tJOB\tPATTERN\tUNTIL\tBY\tWHY")
	for _, s := range list {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\n", dash(s.ID), dash(s.Job), dash(s.Pattern), stamp(s.Until), dash(s.By), dash(s.Why))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if len(list) == 0 {
		fmt.Fprintln(stdout, "(no silences)")
	}
	return nil
}
