// Command agent is Sluice's node agent: it samples the node's filesystem
// client counters and publishes them, and it provides the scheduler hook
// commands that record job starts and ends on the node.
//
//	agent run       sample and publish until SIGTERM or SIGINT
//	agent check     validate the options and list what every source finds
//	agent bench     measure each source's cost per sample
//	agent job start record a job start (from a prolog)
//	agent job end   record a job end (from an epilog)
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

	"sluice/pkg/bus"
	"sluice/pkg/jobstate"
	"sluice/pkg/mapping"
	"sluice/pkg/nodeagent"
	"sluice/pkg/options"
)

const usage = `usage: agent <command> [options]

commands:
  run         sample this node's counters and publish them (until SIGTERM)
  check       validate the options, list every source found and the metrics it gives
  bench       time every source and project the agent's CPU share at the interval
  job start   record that a job started on this node (call from a prolog)
  job end     record that a job ended on this node (call from an epilog)

Run "agent <command> -h" for the options of a command.
`

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if err := run(ctx, os.Args[1:], os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "agent:", err)
		os.Exit(1)
	}
}

func run(ctx context.Context, args []string, stderr io.Writer) error {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return errors.New("no command given")
	}
	switch {
	case args[0] == "run":
		return runAgent(ctx, args[1:], stderr)
	case args[0] == "check":
		return check(ctx, args[1:], os.Stdout, stderr)
	case args[0] == "bench":
		return bench(ctx, args[1:], os.Stdout, stderr)
	case args[0] == "job" && len(args) > 1 && args[1] == "start":
		return jobStart(ctx, args[2:], stderr)
	case args[0] == "job" && len(args) > 1 && args[1] == "end":
		return jobEnd(ctx, args[2:], stderr)
	case args[0] == "-h" || args[0] == "--help" || args[0] == "help":
		fmt.Fprint(stderr, usage)
		return nil
	}
	fmt.Fprint(stderr, usage)
	return fmt.Errorf("unknown command %q", strings.Join(args, " "))
}

// common holds the options every command shares.
type common struct {
	node, stateDir, natsURL, prefix, cluster, delivery, logLevel string
}

func (c *common) register(fs *flag.FlagSet) {
	host, _ := os.Hostname()
	fs.StringVar(&c.node, "node", strings.SplitN(host, ".", 2)[0], "this node's name as the scheduler knows it")
	fs.StringVar(&c.stateDir, "state.dir", "/var/lib/sluice/agent", "directory for job records written by the hooks and the sample sequence number")
	fs.StringVar(&c.natsURL, "nats.url", "nats://127.0.0.1:4222", "NATS broker URL (comma-separate several servers)")
	fs.StringVar(&c.prefix, "nats.prefix", "sluice", "first subject token of every message")
	fs.StringVar(&c.cluster, "nats.cluster", "default", "cluster name, the second subject token")
	fs.StringVar(&c.delivery, "nats.delivery", "stream", `"stream": a sample or job event leaves the agent only once the broker's stream has stored it (JetStream); "core": plain NATS, at most once`)
	fs.StringVar(&c.logLevel, "log.level", "info", "log level: debug, info, warn or error")
}

func (c *common) logger(w io.Writer) (*slog.Logger, error) {
	var lvl slog.Level
	if err := lvl.UnmarshalText([]byte(c.logLevel)); err != nil {
		return nil, fmt.Errorf("--log.level: %w", err)
	}
	return slog.New(slog.NewTextHandler(w, &slog.HandlerOptions{Level: lvl})), nil
}

func runAgent(ctx context.Context, args []string, stderr io.Writer) error {
	a, _, err := setup("agent run", args, stderr)
	if err != nil {
		return err
	}
	return a.Run(ctx)
}

// setup parses the options shared by run, check and bench (with the
// environment and the --config file) and builds the agent.
func setup(name string, args []string, stderr io.Writer, extra ...func(*flag.FlagSet)) (*nodeagent.Agent, *agentOptions, error) {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	var f agentOptions
	f.register(fs)
	for _, e := range extra {
		e(fs)
	}
	if err := parseWithOptions(fs, args); err != nil {
		return nil, nil, err
	}
	log, err := f.logger(stderr)
	if err != nil {
		return nil, nil, err
	}
	sources, err := f.sources.build()
	if err != nil {
		return nil, nil, err
	}
	table, err := loadMapping(f.mappingFile)
	if err != nil {
		return nil, nil, err
	}
	a, err := nodeagent.New(nodeagent.Config{
		Node: f.node, Interval: f.interval, Jitter: f.jitter, StateDir: f.stateDir,
		Sources: sources, Mapping: table, NATSURL: f.natsURL, Prefix: f.prefix, Cluster: f.cluster, Delivery: bus.Delivery(f.delivery),
		QueueLimit: f.queueLimit, JobsFrom: nodeagent.JobsFrom(f.jobsFrom), Logger: log,
	})
	return a, &f, err
}

// agentOptions are the options of run, check and bench.
type agentOptions struct {
	common
	interval, jitter time.Duration
	mappingFile      string
	queueLimit       int
	jobsFrom         string
	sources          sourceOptions
}

func (f *agentOptions) register(fs *flag.FlagSet) {
	f.common.register(fs)
	fs.DurationVar(&f.interval, "interval", 5*time.Second, "sampling interval (at least 100ms)")
	fs.DurationVar(&f.jitter, "jitter", 0, "width of the window holding this node's sampling phase, a stable offset derived from its name (0: the whole interval; negative: sample on interval boundaries)")
	fs.StringVar(&f.mappingFile, "mapping.file", "", "YAML file of counter-to-metric overrides laid over the default mapping")
	fs.IntVar(&f.queueLimit, "queue.limit", 720, "samples held while the broker is unreachable, oldest dropped first (720 is one hour at 5s)")
	fs.StringVar(&f.jobsFrom, "jobs.from", "both", "where running jobs are learnt: hooks (the prolog/epilog records), cgroups (job cgroups found by the jobio source) or both (the union; disagreements are logged)")
	f.sources.register(fs)
}

func loadMapping(path string) (mapping.Table, error) {
	table := mapping.Default()
	if path == "" {
		return table, nil
	}
	file, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("--mapping.file: %w", err)
	}
	defer file.Close()
	table, err = mapping.Load(file, table)
	if err != nil {
		return nil, fmt.Errorf("--mapping.file %s: %w", path, err)
	}
	return table, nil
}

// envPrefix names the agent's environment variables: --nats.url is
// SLUICE_AGENT_NATS_URL.
const envPrefix = "SLUICE_AGENT_"

// parseWithOptions parses the command line, then fills what it left unset
// from the environment and the --config file, which may also hold the
// options of the agent's other commands.
func parseWithOptions(fs *flag.FlagSet, args []string) error {
	all := flag.NewFlagSet("all", flag.ContinueOnError)
	var f agentOptions
	f.register(all)
	return options.Parse(fs, args, envPrefix, all)
}

func hookOptions(name string, c *common) (*flag.FlagSet, *string, *string) {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	c.register(fs)
	id := fs.String("id", "", "job id (required)")
	at := fs.String("time", "", "when it happened, RFC 3339 (default: now)")
	return fs, id, at
}

func hookTime(at string) (time.Time, error) {
	if at == "" {
		return time.Now(), nil
	}
	t, err := time.Parse(time.RFC3339, at)
	if err != nil {
		return time.Time{}, fmt.Errorf("--time: %w", err)
	}
	return t, nil
}

func (c *common) hook(log *slog.Logger) nodeagent.HookConfig {
	return nodeagent.HookConfig{StateDir: c.stateDir, Node: c.node, NATSURL: c.natsURL, Prefix: c.prefix, Cluster: c.cluster,
		Delivery: bus.Delivery(c.delivery), Logger: log}
}

// hook is a parsed hook command: its common options, job id and time.
type hook struct {
	cfg nodeagent.HookConfig
	id  string
	at  time.Time
}

// parseHook parses a hook command's options (after extra ones are added to
// fs) and checks the id and time.
func parseHook(cmd string, fs *flag.FlagSet, c *common, id, at *string, args []string, stderr io.Writer) (hook, error) {
	if err := parseWithOptions(fs, args); err != nil {
		return hook{}, err
	}
	log, err := c.logger(stderr)
	if err != nil {
		return hook{}, err
	}
	if *id == "" {
		return hook{}, fmt.Errorf("%s: --id is required", cmd)
	}
	t, err := hookTime(*at)
	if err != nil {
		return hook{}, err
	}
	return hook{cfg: c.hook(log), id: *id, at: t}, nil
}

func jobStart(ctx context.Context, args []string, stderr io.Writer) error {
	var c common
	fs, id, at := hookOptions("agent job start", &c)
	user := fs.String("user", "", "job owner")
	account := fs.String("account", "", "accounting project")
	name := fs.String("name", "", "job name")
	nodes := fs.String("nodes", "", "the job's node list, compact form allowed: bw[001-004],bw010")
	h, err := parseHook("job start", fs, &c, id, at, args, stderr)
	if err != nil {
		return err
	}
	list, err := jobstate.ExpandHosts(*nodes)
	if err != nil {
		return fmt.Errorf("--nodes: %w", err)
	}
	rec := jobstate.Record{ID: h.id, User: *user, Account: *account, Name: *name, Nodes: list, Start: h.at}
	return nodeagent.JobStart(ctx, h.cfg, rec)
}

func jobEnd(ctx context.Context, args []string, stderr io.Writer) error {
	var c common
	fs, id, at := hookOptions("agent job end", &c)
	exit := fs.Int("exit-code", 0, "the job's exit code")
	h, err := parseHook("job end", fs, &c, id, at, args, stderr)
	if err != nil {
		return err
	}
	return nodeagent.JobEnd(ctx, h.cfg, h.id, h.at, int32(*exit))
}
