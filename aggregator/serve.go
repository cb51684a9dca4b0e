package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"time"

	"sluice/pkg/aggregate"
	"sluice/pkg/baseline"
	"sluice/pkg/bus"
	"sluice/pkg/coding"
	"sluice/pkg/options"
	"sluice/pkg/tracker"
)

// envPrefix names the aggregator's environment variables: --store.path is
// SLUICE_AGGREGATOR_STORE_PATH, --url SLUICE_AGGREGATOR_URL.
const envPrefix = "SLUICE_AGGREGATOR_"

// serveOptions are the options of "run", shared with the demo.
type serveOptions struct {
	natsURL, embedded, prefix, cluster   string
	delivery, storeDir                   string
	streamAge, streamDups                time.Duration
	streamBytes                          int64
	storePath, listen, cutsFile, logLvl  string
	window, live, grace, tick            time.Duration
	raiseAfter, clearAfter, maxJobSeries int
	baseDays, keepDays                   int
	baseMin                              uint64
	baseElevated, baseCritical           float64
	baseEvery                            time.Duration
	patternDir                           string
	noBuiltin                            bool
}

func (o *serveOptions) register(fs *flag.FlagSet) {
	fs.StringVar(&o.natsURL, "nats.url", "", "NATS broker URL; empty starts an embedded broker")
	fs.StringVar(&o.embedded, "nats.embedded.listen", "127.0.0.1:4222", "host:port of the embedded broker (port 0: any free port)")
	fs.StringVar(&o.prefix, "nats.prefix", "sluice", "first subject token of every message")
	fs.StringVar(&o.cluster, "nats.cluster", "default", "cluster name, the second subject token")
	fs.StringVar(&o.delivery, "nats.delivery", "stream", `"stream": read samples and job events from the broker's JetStream stream, acknowledged once saved; "core": plain NATS, at most once (what arrives while the aggregator is down, or what it had not saved when it died, is lost)`)
	fs.StringVar(&o.storeDir, "nats.embedded.store-dir", "", "directory where the embedded broker keeps the stream (default: --store.path with .stream appended)")
	fs.DurationVar(&o.streamAge, "stream.max-age", 24*time.Hour, "how long the stream keeps a message: the longest aggregator outage to ride out")
	fs.Int64Var(&o.streamBytes, "stream.max-bytes", 8<<30, "the stream's size bound in bytes; the oldest messages go first")
	fs.DurationVar(&o.streamDups, "stream.duplicates", 10*time.Minute, "how long the stream remembers a message id, so that a publish retried after a lost acknowledgement is stored once")
	fs.StringVar(&o.storePath, "store.path", "/var/lib/sluice/aggregator.db", "bbolt state file")
	fs.IntVar(&o.keepDays, "store.keep-days", 30, "days the state file keeps an ended job's windows, signature, flags and acknowledgements (deleted hourly after that)")
	fs.StringVar(&o.listen, "web.listen", "127.0.0.1:9713", "HTTP address for /metrics, /healthz and /api/v1")
	fs.StringVar(&o.cutsFile, "cuts.file", "", "YAML file of per-node cut points overriding the defaults (metric: {elevated: N, critical: N})")
	fs.StringVar(&o.logLvl, "log.level", "info", "log level: debug, info, warn or error")
	fs.DurationVar(&o.window, "window.length", 10*time.Minute, "fixed window length")
	fs.DurationVar(&o.live, "window.live", time.Minute, "live window length, for flagging before a window closes")
	fs.DurationVar(&o.grace, "window.grace", 15*time.Second, "how long past its end a window still takes late samples")
	fs.DurationVar(&o.tick, "window.tick", 5*time.Second, "how often windows are closed and live windows looked at")
	fs.IntVar(&o.raiseAfter, "flag.raise-after", 2, "consecutive live evaluations above a critical cut that raise a high-rate flag")
	fs.IntVar(&o.clearAfter, "flag.clear-after", 3, "consecutive live evaluations at or below the cut that clear it")
	fs.IntVar(&o.maxJobSeries, "metrics.max-job-series", 5000, "most per-job series on /metrics; jobs are taken most severe first while their series fit")
	fs.IntVar(&o.baseDays, "baseline.days", 30, "days of job-windows the cut points are learned from")
	fs.Uint64Var(&o.baseMin, "baseline.min-windows", 1000, "non-idle windows a metric needs before its learned cut points replace the seed ones")
	fs.Float64Var(&o.baseElevated, "baseline.elevated-quantile", 0.99, "quantile of the centre's windows above which a window is elevated")
	fs.Float64Var(&o.baseCritical, "baseline.critical-quantile", 0.999, "quantile of the centre's windows above which a window is critical")
	fs.StringVar(&o.patternDir, "patterns.dir", "", "directory of site pattern files (*.yaml), laid over the built-in library")
	fs.BoolVar(&o.noBuiltin, "patterns.no-builtin", false, "match only the site's patterns, not the built-in library")
	fs.DurationVar(&o.baseEvery, "baseline.recompute-every", 10*time.Minute, "how often the cut points are learned again (also at start-up and after an import)")
}

func (o *serveOptions) service(log *slog.Logger) (aggregate.Options, error) {
	cuts := coding.DefaultCuts()
	if o.cutsFile != "" {
		var err error
		if cuts, err = loadCuts(o.cutsFile, cuts); err != nil {
			return aggregate.Options{}, err
		}
	}
	lib, err := loadLibrary(o.patternDir, !o.noBuiltin)
	if err != nil {
		return aggregate.Options{}, err
	}
	return aggregate.Options{
		NATSURL: o.natsURL, EmbeddedListen: o.embedded, Prefix: o.prefix, Cluster: o.cluster,
		Delivery: bus.Delivery(o.delivery), EmbeddedStoreDir: o.storeDir,
		Stream:    bus.StreamOptions{MaxAge: o.streamAge, MaxBytes: o.streamBytes, Duplicates: o.streamDups},
		StorePath: o.storePath, Listen: o.listen, TickEvery: o.tick, MaxJobSeries: o.maxJobSeries,
		Logger: log, RecomputeEvery: o.baseEvery, KeepEnded: time.Duration(o.keepDays) * 24 * time.Hour,
		Baseline: baseline.Options{
			Days: o.baseDays, MinWindows: o.baseMin,
			ElevatedQuantile: o.baseElevated, CriticalQuantile: o.baseCritical,
		},
		Tracker: tracker.Options{
			Window: o.window, Live: o.live, Grace: o.grace, Cuts: cuts,
			RaiseAfter: o.raiseAfter, ClearAfter: o.clearAfter, Patterns: lib,
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

// serve is "aggregator run": options from the command line, the
// environment and --config, then the service until ctx ends.
func serve(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	c := newCommand("run", "", "Ingest the agents' samples, track every job's windows and flags, keep the state file, serve /metrics and the API.", stdout)
	var o serveOptions
	o.register(c.fs)
	if err := options.Parse(c.fs, args, envPrefix, nil); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			c.help(stdout)
			return errHelp
		}
		return c.usage(err)
	}
	log, err := logger(stderr, o.logLvl)
	if err != nil {
		return c.usage(err)
	}
	opts, err := o.service(log)
	if err != nil {
		return err
	}
	svc, err := aggregate.New(opts)
	if err != nil {
		return err
	}
	return svc.Run(ctx)
}
