package main

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"net/http"
	neturl "net/url"
	"strings"
	"text/tabwriter"
	"time"

	"sluice/pkg/aggregate"
	"sluice/pkg/model"
)

const flagsUsage = `usage: aggregator flags [list | ack FLAG | silence | unsilence ID | silences] [flags]

  list         active flags and those cleared in the last day (--all: every one)
  ack FLAG     record that you have the flag in hand (--by, --why)
  silence      keep a job's or a pattern's flags out of Prometheus for a time
               (--job and/or --pattern, --for, --by, --why)
  unsilence ID end a silence early
  silences     the silences in force
`

func flagsCmd(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	sub := "list"
	if len(args) > 0 && !strings.HasPrefix(args[0], "-") {
		sub, args = args[0], args[1:]
	}
	switch sub {
	case "list":
		return flagsList(ctx, args, stdout)
	case "ack":
		return flagsAck(ctx, args, stdout)
	case "silence":
		return flagsSilence(ctx, args, stdout)
	case "unsilence":
		return flagsUnsilence(ctx, args, stdout)
	case "silences":
		return flagsSilences(ctx, args, stdout)
	case "help":
		fmt.Fprint(stderr, flagsUsage)
		return nil
	}
	fmt.Fprint(stderr, flagsUsage)
	return fmt.Errorf("flags: unknown subcommand %q", sub)
}

func urlFlag(fs *flag.FlagSet) *string {
	return fs.String("url", "http://127.0.0.1:9713", "base URL of the running aggregator")
}

func flagsList(ctx context.Context, args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator flags", flag.ContinueOnError)
	url := urlFlag(fs)
	all := fs.Bool("all", false, "every stored flag, not only active and recent ones")
	if err := parse(fs, args); err != nil {
		return err
	}
	var out struct {
		Flags []model.Flag `json:"flags"`
	}
	if err := call(ctx, http.MethodGet, *url, "/api/v1/flags", nil, &out); err != nil {
		return fmt.Errorf("flags: %w", err)
	}
	printFlags(stdout, out.Flags, *all, time.Now())
	return nil
}

// printFlags writes one row per flag, active ones first.
func printFlags(w io.Writer, fs []model.Flag, all bool, now time.Time) {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "STATE\tJOB\tREASON\tSEVERITY\tSCORE\tSINCE\tSUMMARY\tFLAG")
	for _, active := range []bool{true, false} {
		for _, f := range fs {
			if f.Active() != active || (!active && !all && now.Sub(f.Cleared) > 24*time.Hour) {
				continue
			}
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%.2f\t%s\t%s\t%s\n", flagState(f), f.Job, f.Reason, f.Severity, f.Score,
				f.Since.Local().Format("01-02 15:04"), f.Summary, f.ID)
		}
	}
	tw.Flush()
}

func flagState(f model.Flag) string {
	s := "active"
	switch {
	case !f.Active():
		s = "cleared " + f.Cleared.Local().Format("15:04")
	case f.Silenced:
		s = "silenced"
	}
	if f.Ack != nil {
		s += " (ack " + f.Ack.By + ")"
	}
	return s
}

func flagsAck(ctx context.Context, args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator flags ack", flag.ContinueOnError)
	url := urlFlag(fs)
	by := fs.String("by", "", "who acknowledges (required)")
	why := fs.String("why", "", "what is being done about it")
	id, err := parseWithFile(fs, args)
	if err != nil {
		return fmt.Errorf("flags ack: %w (give the FLAG id from aggregator flags)", err)
	}
	var a model.Ack
	if err := call(ctx, http.MethodPost, *url, "/api/v1/flags/"+neturl.PathEscape(id)+"/ack", aggregate.AckRequest{By: *by, Why: *why}, &a); err != nil {
		return fmt.Errorf("flags ack: %w", err)
	}
	fmt.Fprintf(stdout, "%s acknowledged by %s\n", a.Flag, a.By)
	return nil
}

func flagsSilence(ctx context.Context, args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator flags silence", flag.ContinueOnError)
	url := urlFlag(fs)
	var req aggregate.SilenceRequest
	fs.StringVar(&req.Job, "job", "", "silence this job's flags")
	fs.StringVar(&req.Pattern, "pattern", "", `silence this pattern's flags (a name, or a reason such as "critical:creates")`)
	fs.StringVar(&req.For, "for", "2h", "how long, e.g. 30m, 2h, 3d... as a Go duration (72h)")
	fs.StringVar(&req.By, "by", "", "who silences (required)")
	fs.StringVar(&req.Why, "why", "", "why (required)")
	if err := parse(fs, args); err != nil {
		return err
	}
	var sl model.Silence
	if err := call(ctx, http.MethodPost, *url, "/api/v1/silences", req, &sl); err != nil {
		return fmt.Errorf("flags silence: %w", err)
	}
	fmt.Fprintf(stdout, "silence %s until %s\n", sl.ID, sl.Until.Local().Format(time.DateTime))
	return nil
}

func flagsUnsilence(ctx context.Context, args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator flags unsilence", flag.ContinueOnError)
	url := urlFlag(fs)
	id, err := parseWithFile(fs, args)
	if err != nil {
		return fmt.Errorf("flags unsilence: %w (give the silence id)", err)
	}
	if err := call(ctx, http.MethodDelete, *url, "/api/v1/silences/"+neturl.PathEscape(id), nil, &map[string]string{}); err != nil {
		return fmt.Errorf("flags unsilence: %w", err)
	}
	fmt.Fprintf(stdout, "silence %s ended\n", id)
	return nil
}

func flagsSilences(ctx context.Context, args []string, stdout io.Writer) error {
	fs := flag.NewFlagSet("aggregator flags silences", flag.ContinueOnError)
	url := urlFlag(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	var out struct {
		Silences []model.Silence `json:"silences"`
	}
	if err := call(ctx, http.MethodGet, *url, "/api/v1/silences", nil, &out); err != nil {
		return fmt.Errorf("flags silences: %w", err)
	}
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tJOB\tPATTERN\tUNTIL\tBY\tWHY")
	for _, s := range out.Silences {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\n", s.ID, dash(s.Job), dash(s.Pattern), s.Until.Local().Format(time.DateTime), s.By, s.Why)
	}
	return tw.Flush()
}

// call sends a JSON request (body nil for none) and decodes the answer.
func call(ctx context.Context, method, base, path string, body, v any) error {
	var rd io.Reader
	if body != nil {
		b, err := json.Marshal(body)
		if err != nil {
			return err
		}
		rd = bytes.NewReader(b)
	}
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, method, strings.TrimRight(base, "/")+path, rd)
	if err != nil {
		return err
	}
	if body != nil {
		req.Header.Set("Content-Type", "application/json")
	}
	return do(req, base, v)
}
