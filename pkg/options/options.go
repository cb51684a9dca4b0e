// Package options gives a binary's command-line options (a flag.FlagSet)
// two more sources with the same names: environment variables and a YAML
// file. One documented set of names serves all three.
//
// # Basics
//
// [Apply] fills every option that was not given on the command line,
// first from the environment (the option's name upper-cased, with '.' and '-' turned
// into '_', behind a prefix: --source.lustre.root is
// SLUICE_AGENT_SOURCE_LUSTRE_ROOT), then from the file. The file holds the
// same names, either dotted or nested:
//
//	interval: 10s
//	source:
//	  lustre:
//	    root: /proc/fs/lustre/llite
//	nats.url: nats://broker.example:4222
//
// Precedence: command line, then environment, then file, then the
// option's default.
//
// # Caveats
//
// An unknown name in the file is an error (a misspelt option must not be
// silently ignored); unknown environment variables under the prefix are not
// checked, since the environment is shared.
package options

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"slices"
	"strings"

	"go.yaml.in/yaml/v3"
)

// EnvName is the environment variable for a flag name under prefix.
func EnvName(prefix, name string) string {
	r := strings.NewReplacer(".", "_", "-", "_")
	return prefix + strings.ToUpper(r.Replace(name))
}

// ParseFile reads a YAML options file into flat dotted names. Values must
// be scalars; lists and nulls are errors.
func ParseFile(r io.Reader) (map[string]string, error) {
	var root yaml.Node
	if err := yaml.NewDecoder(r).Decode(&root); err != nil {
		if errors.Is(err, io.EOF) {
			return map[string]string{}, nil
		}
		return nil, fmt.Errorf("options file: %w", err)
	}
	out := map[string]string{}
	if len(root.Content) == 0 {
		return out, nil
	}
	if err := flatten(root.Content[0], "", out); err != nil {
		return nil, err
	}
	return out, nil
}

func flatten(n *yaml.Node, prefix string, out map[string]string) error {
	switch n.Kind {
	case yaml.MappingNode:
		for i := 0; i+1 < len(n.Content); i += 2 {
			k, v := n.Content[i], n.Content[i+1]
			if k.Kind != yaml.ScalarNode || slices.Contains(strings.Split(k.Value, "."), "") {
				return fmt.Errorf("options file: line %d: %q is not an option name", k.Line, k.Value)
			}
			name := k.Value
			if prefix != "" {
				name = prefix + "." + k.Value
			}
			if err := flatten(v, name, out); err != nil {
				return err
			}
		}
		return nil
	case yaml.ScalarNode:
		if prefix == "" {
			return fmt.Errorf("options file: line %d: expected a map of option names", n.Line)
		}
		if n.Tag == "!!null" {
			return fmt.Errorf("options file: line %d: %s has no value", n.Line, prefix)
		}
		if _, dup := out[prefix]; dup {
			return fmt.Errorf("options file: line %d: %s given twice", n.Line, prefix)
		}
		out[prefix] = n.Value
		return nil
	case yaml.AliasNode:
		return fmt.Errorf("options file: line %d: aliases are not supported", n.Line)
	}
	return fmt.Errorf("options file: line %d: %s must be a single value, not a list", n.Line, cmpOr(prefix, "the top level"))
}

func cmpOr(a, b string) string {
	if a != "" {
		return a
	}
	return b
}

// Apply fills the options of fs that were not set on the command line from
// the environment (names under envPrefix; lookup nil means os.LookupEnv)
// and then from file (nil means no file). Call it after fs.Parse.
func Apply(fs *flag.FlagSet, envPrefix string, lookup func(string) (string, bool), file map[string]string) error {
	if lookup == nil {
		lookup = os.LookupEnv
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	for name := range file {
		if fs.Lookup(name) == nil {
			return fmt.Errorf("options file: unknown option %q (known: %s)", name, strings.Join(names(fs), ", "))
		}
	}
	var errs []error
	fs.VisitAll(func(f *flag.Flag) {
		if set[f.Name] {
			return
		}
		env := EnvName(envPrefix, f.Name)
		if v, ok := lookup(env); ok {
			if err := fs.Set(f.Name, v); err != nil {
				errs = append(errs, fmt.Errorf("%s: %w", env, err))
			}
			return
		}
		if v, ok := file[f.Name]; ok {
			if err := fs.Set(f.Name, v); err != nil {
				errs = append(errs, fmt.Errorf("options file: %s: %w", f.Name, err))
			}
		}
	})
	return errors.Join(errs...)
}

func names(fs *flag.FlagSet) []string {
	var ns []string
	fs.VisitAll(func(f *flag.Flag) { ns = append(ns, f.Name) })
	return slices.Sorted(slices.Values(ns))
}

// Parse parses args into fs, adding a --config flag (and its
// <envPrefix>CONFIG variable) naming an options file, then fills what the
// command line left unset from the environment and that file. Names in the
// file that fs lacks but also (a set of the binary's other commands'
// options, may be nil) has are skipped, so one file can serve several
// commands; any other unknown name is an error. Positional arguments are
// refused.
func Parse(fs *flag.FlagSet, args []string, envPrefix string, also *flag.FlagSet) error {
	config := fs.String("config", "", "YAML file of options, by the same names as on the command line (env "+envPrefix+"CONFIG)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return fmt.Errorf("unexpected arguments: %s", strings.Join(fs.Args(), " "))
	}
	path := *config
	if v, ok := os.LookupEnv(envPrefix + "CONFIG"); ok && path == "" {
		path = v
	}
	var file map[string]string
	if path != "" {
		fh, err := os.Open(path)
		if err != nil {
			return fmt.Errorf("--config: %w", err)
		}
		defer fh.Close()
		if file, err = ParseFile(fh); err != nil {
			return fmt.Errorf("--config %s: %w", path, err)
		}
		delete(file, "config")
		for name := range file {
			if fs.Lookup(name) == nil && also != nil && also.Lookup(name) != nil {
				delete(file, name)
			}
		}
	}
	return Apply(fs, envPrefix, nil, file)
}
