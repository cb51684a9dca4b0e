// Command aggregator is Sluice's aggregator: it ingests the agents'
// samples, tracks every running job's windows and flags, keeps its state in
// a bbolt file and serves /metrics and a JSON API. Its other commands are
// operator tools that talk to a running aggregator over that API, and the
// demo and the pattern evaluation.
//
//	aggregator run        serve (embedded NATS broker unless --nats.url is given)
//	aggregator jobs       the running jobs, their live rates, levels and flags
//	aggregator flags      flags; ack, silence, unsilence, silences
//	aggregator explain    how each pattern's latest verdict on a job came about
//	aggregator patterns   the patterns in force; check a directory; learn from a job
//	aggregator baseline   import, show or export the learned baseline
//	aggregator demo       the whole system on simulated nodes
//	aggregator eval       the pattern library's quality on labelled simulated jobs
//
// Client commands take --url, or SLUICE_AGGREGATOR_URL, and --json on
// every listing.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
	"syscall"
)

const usage = `usage: aggregator <command> [options]

commands:
  run        ingest samples, track jobs, serve /metrics and the API
  jobs       the running jobs of a running aggregator
  flags      active and recent flags; ack, silence, unsilence, silences
  explain    how each pattern's latest verdict on a job came about
  patterns   the patterns in force; check a directory; learn from a job
  baseline   import, show or export the learned baseline
  demo       run aggregator, agents and simulated nodes on this machine
  eval       measure the pattern library on labelled simulated jobs

Client commands talk to the aggregator at --url (default
http://127.0.0.1:9713, or SLUICE_AGGREGATOR_URL). Run
"aggregator <command> -h" for a command's options.
`

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	os.Exit(exitStatus(run(ctx, os.Args[1:], os.Stdout, os.Stderr), os.Stderr))
}

// exitStatus prints err once and gives the exit status: 0 when there is
// none or help was asked for, 2 for a command line that cannot be taken
// (with the command's synopsis), 1 for anything else.
func exitStatus(err error, stderr io.Writer) int {
	var ue *usageError
	switch {
	case err == nil || errors.Is(err, errHelp):
		return 0
	case errors.As(err, &ue):
		sep := " "
		if ue.cmd == "" {
			sep = ": "
		}
		fmt.Fprintf(stderr, "aggregator%s%s\n%s\n", sep, ue.Error(), strings.TrimRight(ue.synopsis, "\n"))
		return 2
	}
	fmt.Fprintf(stderr, "aggregator: %v\n", err)
	return 1
}

func run(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		return &usageError{err: errors.New("needs a command"), synopsis: usage}
	}
	cmd, rest := args[0], args[1:]
	switch cmd {
	case "run":
		return serve(ctx, rest, stdout, stderr)
	case "jobs":
		return jobsCmd(ctx, rest, stdout)
	case "flags":
		return flagsCmd(ctx, rest, stdout)
	case "explain":
		return explainCmd(ctx, rest, stdout)
	case "patterns":
		return patternsCmd(ctx, rest, stdout)
	case "baseline":
		return baselineCmd(ctx, rest, stdout, stderr)
	case "demo":
		return demo(ctx, rest, stdout, stderr)
	case "eval":
		return evalCmd(rest, stdout)
	case "-h", "--help", "-help", "help":
		fmt.Fprint(stdout, usage)
		return errHelp
	}
	return &usageError{err: fmt.Errorf("unknown command %q", cmd), synopsis: usage}
}
