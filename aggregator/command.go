package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"

	"sluice/pkg/api"
	"sluice/pkg/options"
)

// errHelp says a command printed its help on request: the exit status is 0.
var errHelp = errors.New("help shown")

// usageError is a command line a command cannot take. main prints it once,
// with the command's synopsis, and exits with status 2.
type usageError struct {
	cmd      string // "flags silence"; empty for the binary itself
	err      error
	synopsis string
}

func (e *usageError) Error() string {
	if e.cmd == "" {
		return e.err.Error()
	}
	return e.cmd + ": " + e.err.Error()
}

// command is one operator command: its name ("flags silence"), what its
// positional arguments are ("FLAG"), one line about it, and its options.
type command struct {
	name, args, about string
	fs                *flag.FlagSet
	stdout            io.Writer
}

func newCommand(name, args, about string, stdout io.Writer) *command {
	fs := flag.NewFlagSet("aggregator "+name, flag.ContinueOnError)
	fs.SetOutput(io.Discard) // errors are ours to print, once
	return &command{name: name, args: args, about: about, fs: fs, stdout: stdout}
}

// synopsis is the command's one-line usage.
func (c *command) synopsis() string {
	s := "usage: aggregator " + c.name + " [options]"
	if c.args != "" {
		s += " " + c.args
	}
	return s
}

// help writes the synopsis, the line about the command and every option
// with its default.
func (c *command) help(w io.Writer) {
	fmt.Fprintf(w, "%s\n\n%s\n\noptions:\n", c.synopsis(), c.about)
	c.fs.SetOutput(w)
	c.fs.PrintDefaults()
	c.fs.SetOutput(io.Discard)
}

// parse reads options, from the command line (before, between or after
// the positional arguments) and from the environment
// (SLUICE_AGGREGATOR_<NAME>), and returns the positional arguments,
// which must number want (-1: any).
func (c *command) parse(args []string, want int) ([]string, error) {
	var pos []string
	for {
		if err := c.fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				c.help(c.stdout)
				return nil, errHelp
			}
			return nil, c.usage(err)
		}
		args = c.fs.Args()
		if len(args) == 0 {
			break
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
	if err := options.Apply(c.fs, envPrefix, os.LookupEnv, nil); err != nil {
		return nil, c.usage(err)
	}
	switch {
	case want >= 0 && len(pos) < want:
		return nil, c.usage(fmt.Errorf("give %s", c.args))
	case want >= 0 && len(pos) > want:
		return nil, c.usage(fmt.Errorf("unexpected arguments: %s", strings.Join(pos[want:], " ")))
	}
	return pos, nil
}

func (c *command) usage(err error) error {
	return &usageError{cmd: c.name, err: err, synopsis: c.synopsis() + "\nRun \"aggregator " + c.name + " -h\" for its options."}
}

// client adds --url to the command and returns the client it names once
// parsed.
func (c *command) client() func() *api.Client {
	url := c.fs.String("url", "http://127.0.0.1:9713", "base URL of the running aggregator (env SLUICE_AGGREGATOR_URL)")
	return func() *api.Client { return api.NewClient(*url) }
}

// jsonOption adds --json to the command.
func (c *command) jsonOption() *bool {
	return c.fs.Bool("json", false, "print the server's answer as JSON instead of a table")
}

// printJSON writes v indented, as the API gives it.
func printJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// group dispatches a command with subcommands ("flags ack", ...).
type group struct {
	name, usage string
	subs        map[string]func(args []string) error
	dflt        string // the subcommand run when none is named; "" requires one
}

func (g group) run(args []string, stdout io.Writer) error {
	sub := g.dflt
	if len(args) > 0 && (isHelp(args[0]) || !strings.HasPrefix(args[0], "-")) {
		sub, args = args[0], args[1:]
	}
	synopsis := strings.TrimRight(g.usage, "\n")
	switch {
	case isHelp(sub):
		fmt.Fprint(stdout, g.usage)
		return errHelp
	case sub == "":
		return &usageError{cmd: g.name, err: errors.New("give a subcommand"), synopsis: synopsis}
	}
	f, ok := g.subs[sub]
	if !ok {
		return &usageError{cmd: g.name, err: fmt.Errorf("unknown subcommand %q", sub), synopsis: synopsis}
	}
	return f(args)
}

func isHelp(s string) bool { return s == "-h" || s == "--help" || s == "-help" || s == "help" }
