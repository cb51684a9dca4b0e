// Command aggregator is Sluice's aggregator: it ingests the agents'
// samples, tracks every running job's windows and flags, keeps its state in
// a bbolt file and serves /metrics and a JSON API. Its other commands talk
// to a running aggregator or run the demo.
//
//	aggregator run    serve (embedded NATS broker unless --nats.url is given)
//	aggregator jobs   print running jobs, their levels and flags
//	aggregator baseline import|show|export   seed, inspect or dump the baseline
//	aggregator demo   run the whole system on simulated nodes
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"sluice/pkg/aggregate"
	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/options"
	"sluice/pkg/tracker"
)

const usage = `usage: aggregator <command> [flags]

commands:
  run    ingest samples, track jobs, serve /metrics and the API
  jobs   print the running jobs of a running aggregator
  baseline import|show|export
         seed, inspect or dump the learned cut points
  patterns list|show|check|learn
         the problem patterns in force; validate a directory; learn from a job
  flags [ack|silence|unsilence]
         active and recent flags; acknowledge or silence them
  explain JOB
         a job's recent windows beside each pattern it matches
  demo   run aggregator, agents and simulated nodes on this machine
  eval   measure the pattern library on labelled simulated jobs

Run "aggregator <command> -h" for the flags of a command.
`

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if err := run(ctx, os.Args[1:], os.Stdout, os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "aggregator:", err)
		os.Exit(1)
	}
}

func run(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return errors.New("no command given")
	}
	switch args[0] {
	case "run":
		return serve(ctx, args[1:], stderr)
	case "jobs":
		return jobs(ctx, args[1:], stdout)
	case "demo":
		return demo(ctx, args[1:], stdout, stderr)
	case "baseline":
		return baselineCmd(ctx, args[1:], stdout, stderr)
	case "eval":
		return evalCmd(args[1:], stdout)
	case "patterns":
		return patternsCmd(ctx, args[1:], stdout, stderr)
	case "flags":
		return flagsCmd(ctx, args[1:], stdout, stderr)
	case "explain":
		return explain(ctx, args[1:], stdout)
	case "-h", "--help", "help":
		fmt.Fprint(stderr, usage)
		return nil
	}
	fmt.Fprint(stderr, usage)
	return fmt.Errorf("unknown command %q", args[0])
}

// serveFlags are the flags of "run", shared with the demo.
type serveFlags struct {
	natsURL, embedded, prefix, cluster   string
	storePath, listen, cutsFile, logLvl  string
	window, live, grace, tick            time.Duration
	raiseAfter, clearAfter, maxJobSeries int
	baseDays                             int
	baseMin                              uint64
	baseElevated, baseCritical           float64
	baseEvery                            time.Duration
	patternDir                           string
	noBuiltin                            bool
}

func (f *serveFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.natsURL, "nats.url", "", "NATS broker URL; empty starts an embedded broker")
	fs.StringVar(&f.embedded, "nats.embedded.listen", "127.0.0.1:4222", "host:port of the embedded broker (port 0: any free port)")
	fs.StringVar(&f.prefix, "nats.prefix", "sluice", "first subject token of every message")
	fs.StringVar(&f.cluster, "nats.cluster", "default", "cluster name, the second subject token")
	fs.StringVar(&f.storePath, "store.path", "/var/lib/sluice/aggregator.db", "bbolt state file")
	fs.StringVar(&f.listen, "web.listen", "127.0.0.1:9713", "HTTP address for /metrics, /healthz and /api/v1")
	fs.StringVar(&f.cutsFile, "cuts.file", "", "YAML file of per-node cut points overriding the defaults (metric: {elevated: N, critical: N})")
	fs.StringVar(&f.logLvl, "log.level", "info", "log level: debug, info, warn or error")
	fs.DurationVar(&f.window, "window.length", 10*time.Minute, "fixed window length")
	fs.DurationVar(&f.live, "window.live", time.Minute, "live window length, for flagging before a window closes")
	fs.DurationVar(&f.grace, "window.grace", 15*time.Second, "how long past its end a window still takes late samples")
	fs.DurationVar(&f.tick, "eval.every", 5*time.Second, "how often live windows are evaluated and windows closed")
	fs.IntVar(&f.raiseAfter, "flag.raise-after", 2, "consecutive live evaluations above a critical cut that raise a flag")
	fs.IntVar(&f.clearAfter, "flag.clear-after", 3, "consecutive live evaluations below the cut that clear it")
	fs.IntVar(&f.maxJobSeries, "metrics.max-job-series", 5000, "most per-job series on /metrics; jobs are taken most severe first while their series fit")
	fs.IntVar(&f.baseDays, "baseline.days", 30, "days of job-windows the cut points are learned from")
	fs.Uint64Var(&f.baseMin, "baseline.min-windows", 1000, "non-idle windows a metric needs before its learned cut points replace the seed ones")
	fs.Float64Var(&f.baseElevated, "baseline.elevated-quantile", 0.99, "quantile of the centre's windows above which a window is elevated")
	fs.Float64Var(&f.baseCritical, "baseline.critical-quantile", 0.999, "quantile of the centre's windows above which a window is critical")
	fs.StringVar(&f.patternDir, "patterns.dir", "", "directory of site pattern files (*.yaml), laid over the built-in library")
	fs.BoolVar(&f.noBuiltin, "patterns.no-builtin", false, "match only the site's patterns, not the built-in library")
	fs.DurationVar(&f.baseEvery, "baseline.recompute-every", 10*time.Minute, "how often the cut points are learned again (also at start-up and after an import)")
}

func (f *serveFlags) options(log *slog.Logger) (aggregate.Options, error) {
	cuts := coding.DefaultCuts()
	if f.cutsFile != "" {
		var err error
		if cuts, err = loadCuts(f.cutsFile, cuts); err != nil {
			return aggregate.Options{}, err
		}
	}
	lib, err := loadLibrary(f.patternDir, !f.noBuiltin)
	if err != nil {
		return aggregate.Options{}, err
	}
	return aggregate.Options{
		NATSURL: f.natsURL, EmbeddedListen: f.embedded, Prefix: f.prefix, Cluster: f.cluster,
		StorePath: f.storePath, Listen: f.listen, TickEvery: f.tick, MaxJobSeries: f.maxJobSeries,
		Logger: log, RecomputeEvery: f.baseEvery,
		Baseline: baseline.Options{
			Days: f.baseDays, MinWindows: f.baseMin,
			ElevatedQuantile: f.baseElevated, CriticalQuantile: f.baseCritical,
		},
		Tracker: tracker.Options{
			Window: f.window, Live: f.live, Grace: f.grace, Cuts: cuts,
			RaiseAfter: f.raiseAfter, ClearAfter: f.clearAfter, Patterns: lib,
		},
	}, nil
}

func loadCuts(path string, base coding.Cuts) (coding.Cuts, error) {
	f, err := os.Open(path)
	if err != nil {
		return base, fmt.Errorf("--cuts.file: %w", err)
	}
	defer f.Close()
	cuts, err := coding.LoadCuts(f, base)
	if err != nil {
		return base, fmt.Errorf("--cuts.file %s: %w", path, err)
	}
	return cuts, nil
}

func logger(w io.Writer, lvlName string) (*slog.Logger, error) {
	var lvl slog.Level
	if err := lvl.UnmarshalText([]byte(lvlName)); err != nil {
		return nil, fmt.Errorf("--log.level: %w", err)
	}
	return slog.New(slog.NewTextHandler(w, &slog.HandlerOptions{Level: lvl})), nil
}

func parse(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return fmt.Errorf("unexpected arguments: %s", strings.Join(fs.Args(), " "))
	}
	return nil
}

// envPrefix names the aggregator's environment variables: --store.path is
// SLUICE_AGGREGATOR_STORE_PATH.
const envPrefix = "SLUICE_AGGREGATOR_"

func serve(ctx context.Context, args []string, stderr io.Writer) error {
	fs := flag.NewFlagSet("aggregator run", flag.ContinueOnError)
	var f serveFlags
	f.register(fs)
	if err := options.Parse(fs, args, envPrefix, nil); err != nil {
		return err
	}
	log, err := logger(stderr, f.logLvl)
	if err != nil {
		return err
	}
	opts, err := f.options(log)
	if err != nil {
		return err
	}
	svc, err := aggregate.New(opts)
	if err != nil {
		return err
	}
	return svc.Run(ctx)
}
