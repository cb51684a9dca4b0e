package pattern

import (
	"bytes"
	"embed"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"strings"

	"go.yaml.in/yaml/v3"
)

// ErrInvalid is wrapped by every validation error (each an [*Error]).
var ErrInvalid = errors.New("invalid pattern")

// Error is one validation error: a file, a line in it, the field at fault
// (a path such as "rule.all[1].metric"; empty for the document) and what
// is wrong. It wraps ErrInvalid.
type Error struct {
	// File is the file's name as given to Parse (a path for LoadDir).
	File string
	// Line is the 1-based line of the field at fault, or of the mapping
	// missing a required field.
	Line int
	// Field is the field's path, e.g. "rule.all[1].metric"; empty when
	// the whole document is at fault.
	Field string
	// Msg says what is wrong.
	Msg string
}

// Error returns "file:line: field: message".
func (e *Error) Error() string {
	if e.Field == "" {
		return fmt.Sprintf("%s:%d: %s", e.File, e.Line, e.Msg)
	}
	return fmt.Sprintf("%s:%d: %s: %s", e.File, e.Line, e.Field, e.Msg)
}

// Unwrap returns ErrInvalid.
func (e *Error) Unwrap() error { return ErrInvalid }

// builtinFS holds the built-in pattern files.
//
//go:embed builtin/*.yaml
var builtinFS embed.FS

// Builtin returns the built-in pattern library, parsed afresh on each call
// (the caller may change the result), sorted by file name.
func Builtin() ([]*Pattern, error) {
	ps, err := loadFS(builtinFS, "builtin", "builtin")
	if err != nil {
		return nil, fmt.Errorf("built-in patterns: %w", err)
	}
	return ps, nil
}

// LoadDir reads every *.yaml file of dir (not its subdirectories), sorted
// by file name. It reads all files and returns every error, joined;
// besides each file's own errors, a name used by two files is an error
// naming both. An empty directory gives no patterns and no error.
func LoadDir(dir string) ([]*Pattern, error) {
	return loadFS(os.DirFS(dir), ".", dir)
}

// loadFS loads the *.yaml files of fsys's directory sub, naming them
// below prefix in messages.
func loadFS(fsys fs.FS, sub, prefix string) ([]*Pattern, error) {
	entries, err := fs.ReadDir(fsys, sub)
	if err != nil {
		return nil, fmt.Errorf("read pattern directory %s: %w", prefix, err)
	}
	var (
		out  []*Pattern
		errs []error
		seen = map[string]*Pattern{}
		line = map[*Pattern]int{}
	)
	for _, e := range entries { // ReadDir sorts by name
		if e.IsDir() || !strings.HasSuffix(e.Name(), ".yaml") {
			continue
		}
		name := filepath.Join(prefix, e.Name())
		b, err := fs.ReadFile(fsys, path.Join(sub, e.Name()))
		if err != nil {
			errs = append(errs, fmt.Errorf("read pattern %s: %w", name, err))
			continue
		}
		p, nameLine, err := parse(name, b)
		if err != nil {
			errs = append(errs, err)
			continue
		}
		if q, ok := seen[p.Name]; ok {
			errs = append(errs, &Error{File: name, Line: nameLine, Field: "name",
				Msg: fmt.Sprintf("%q is already the name of the pattern in %s:%d", p.Name, q.Source, line[q])})
			continue
		}
		seen[p.Name], line[p] = p, nameLine
		out = append(out, p)
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return out, nil
}

// Parse reads one pattern file; name is used as its Source and in error
// messages. Every problem found is reported (joined), each as an [*Error]
// naming name, the line and the field.
func Parse(name string, r io.Reader) (*Pattern, error) {
	b, err := io.ReadAll(io.LimitReader(r, MaxFileSize+1))
	if err != nil {
		return nil, fmt.Errorf("read pattern %s: %w", name, err)
	}
	if len(b) > MaxFileSize {
		return nil, &Error{File: name, Line: 1, Msg: fmt.Sprintf("file is larger than %d bytes", MaxFileSize)}
	}
	p, _, err := parse(name, b)
	return p, err
}

// parse decodes and validates one file; it also returns the line of the
// name field, for duplicate-name messages.
func parse(name string, b []byte) (*Pattern, int, error) {
	d := &decoder{file: name}
	dec := yaml.NewDecoder(bytes.NewReader(b))
	var doc yaml.Node
	if err := dec.Decode(&doc); err != nil {
		if errors.Is(err, io.EOF) {
			return nil, 0, &Error{File: name, Line: 1, Msg: "empty file; want a pattern (a mapping with schema: 1)"}
		}
		return nil, 0, fmt.Errorf("%s: %w", name, err)
	}
	var next yaml.Node
	switch err := dec.Decode(&next); {
	case err == nil:
		return nil, 0, &Error{File: name, Line: next.Line, Msg: "a second YAML document; put one pattern per file"}
	case !errors.Is(err, io.EOF):
		return nil, 0, fmt.Errorf("%s: %w", name, err)
	}
	if n := findAlias(&doc); n != nil {
		return nil, 0, &Error{File: name, Line: n.Line, Msg: "YAML anchors and aliases are not supported in pattern files"}
	}
	root := &doc
	if root.Kind == yaml.DocumentNode && len(root.Content) == 1 {
		root = root.Content[0]
	}
	p, nameLine := d.pattern(root)
	if len(d.errs) > 0 {
		return nil, 0, errors.Join(d.errs...)
	}
	p.Source = name
	return p, nameLine, nil
}

// findAlias returns the first node that is an alias or carries an anchor.
func findAlias(n *yaml.Node) *yaml.Node {
	if n.Kind == yaml.AliasNode || n.Anchor != "" {
		return n
	}
	for _, c := range n.Content {
		if a := findAlias(c); a != nil {
			return a
		}
	}
	return nil
}
