// Package jobstate is the node-local record of the jobs running on a node,
// written by the scheduler hook commands (agent job start / agent job end)
// and read by the agent on every interval.
//
// # Basics
//
// Each job is one JSON file, <dir>/<job id>.json, written atomically
// (temporary file, then rename), so a hook and the agent never see half a
// record. A record says whether its start and end events were published;
// the agent publishes what a hook could not (broker away) and removes a
// record once its end is published and one more sample has covered it.
//
// # Caveats
//
// Job ids become file names, so ids with '/', white space, control
// characters or a leading '.' are refused; [ValidID] says which are
// accepted.
package jobstate

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"
	"unicode"
)

// Record is one job as the hooks recorded it.
type Record struct {
	ID        string    `json:"id"`
	User      string    `json:"user,omitempty"`
	Account   string    `json:"account,omitempty"`
	Name      string    `json:"name,omitempty"`
	Nodes     []string  `json:"nodes,omitempty"`
	Start     time.Time `json:"start"`
	End       time.Time `json:"end,omitzero"`
	ExitCode  int32     `json:"exit_code,omitempty"`
	StartSent bool      `json:"start_sent,omitempty"`
	EndSent   bool      `json:"end_sent,omitempty"`
}

// Running reports whether the job had not ended by t.
func (r Record) Running(t time.Time) bool { return r.End.IsZero() || r.End.After(t) }

// ValidID reports whether id can name a record: 1 to 128 bytes of
// printable characters other than '/' and white space, not starting with
// '.' (the directory's temporary files do).
func ValidID(id string) error {
	if id == "" || len(id) > 128 || strings.HasPrefix(id, ".") {
		return fmt.Errorf("job id %q: must be 1 to 128 bytes and not start with '.'", id)
	}
	if strings.ContainsFunc(id, func(r rune) bool { return r == '/' || unicode.IsSpace(r) || !unicode.IsPrint(r) }) {
		return fmt.Errorf("job id %q: must not contain '/', white space or control characters", id)
	}
	return nil
}

// Dir is a state directory.
type Dir struct {
	path string
}

// Open returns the state directory at path, creating it if needed.
func Open(path string) (*Dir, error) {
	if path == "" {
		return nil, errors.New("job state directory not set (--state.dir)")
	}
	if err := os.MkdirAll(path, 0o755); err != nil {
		return nil, fmt.Errorf("job state directory: %w", err)
	}
	return &Dir{path: path}, nil
}

// Path is the directory's path.
func (d *Dir) Path() string { return d.path }

func (d *Dir) file(id string) string { return filepath.Join(d.path, id+".json") }

// Put writes r atomically.
func (d *Dir) Put(r Record) error {
	if err := ValidID(r.ID); err != nil {
		return err
	}
	data, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return fmt.Errorf("encode job %s: %w", r.ID, err)
	}
	tmp, err := os.CreateTemp(d.path, ".tmp-*")
	if err != nil {
		return fmt.Errorf("write job %s: %w", r.ID, err)
	}
	defer os.Remove(tmp.Name())
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		return fmt.Errorf("write job %s: %w", r.ID, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write job %s: %w", r.ID, err)
	}
	if err := os.Rename(tmp.Name(), d.file(r.ID)); err != nil {
		return fmt.Errorf("write job %s: %w", r.ID, err)
	}
	return nil
}

// Get reads one record; a missing one wraps fs.ErrNotExist.
func (d *Dir) Get(id string) (Record, error) {
	if err := ValidID(id); err != nil {
		return Record{}, err
	}
	data, err := os.ReadFile(d.file(id))
	if err != nil {
		return Record{}, fmt.Errorf("read job %s: %w", id, err)
	}
	var r Record
	if err := json.Unmarshal(data, &r); err != nil {
		return Record{}, fmt.Errorf("read job %s: %s: %w", id, d.file(id), err)
	}
	return r, nil
}

// Remove deletes a record; a missing one is not an error.
func (d *Dir) Remove(id string) error {
	if err := ValidID(id); err != nil {
		return err
	}
	if err := os.Remove(d.file(id)); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("remove job %s: %w", id, err)
	}
	return nil
}

// List reads every record, sorted by id. Unreadable records are skipped
// and returned joined in the error, so one bad file does not hide the rest.
func (d *Dir) List() ([]Record, error) {
	entries, err := os.ReadDir(d.path)
	if err != nil {
		return nil, fmt.Errorf("list jobs in %s: %w", d.path, err)
	}
	var recs []Record
	var errs []error
	for _, e := range entries {
		name := e.Name()
		if e.IsDir() || !strings.HasSuffix(name, ".json") || strings.HasPrefix(name, ".") {
			continue
		}
		r, err := d.Get(strings.TrimSuffix(name, ".json"))
		if err != nil {
			if !errors.Is(err, fs.ErrNotExist) { // removed since the listing
				errs = append(errs, err)
			}
			continue
		}
		recs = append(recs, r)
	}
	slices.SortFunc(recs, func(a, b Record) int { return strings.Compare(a.ID, b.ID) })
	return recs, errors.Join(errs...)
}
