package jobstate_test

import (
	"encoding/json"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/jobstate"
)

// openDir returns a fresh state directory in t.TempDir().
func openDir(t *testing.T) *jobstate.Dir {
	t.Helper()
	d, err := jobstate.Open(filepath.Join(t.TempDir(), "state"))
	require.NoError(t, err)
	return d
}

// files lists the names in dir, sorted.
func files(t *testing.T, dir string) []string {
	t.Helper()
	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	sort.Strings(names)
	return names
}

func TestValidID(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		wantErr bool
	}{
		{name: "numeric", input: "81234"},
		{name: "array task", input: "4242.1"},
		{name: "colon", input: "a:b"},
		{name: "dots inside", input: "1234.pbs.example.org"},
		{name: "brackets and underscore", input: "81234_[1-5]"},
		{name: "non-ASCII", input: "jöb"},
		{name: "128 bytes", input: strings.Repeat("a", 128)},
		{name: "128 bytes of two-byte runes", input: strings.Repeat("é", 64)},

		{name: "empty", input: "", wantErr: true},
		{name: "dot", input: ".", wantErr: true},
		{name: "dot dot", input: "..", wantErr: true},
		{name: "slash", input: "a/b", wantErr: true},
		{name: "leading slash", input: "/etc", wantErr: true},
		{name: "parent path", input: "../x", wantErr: true},
		{name: "space", input: "a b", wantErr: true},
		{name: "tab", input: "a\tb", wantErr: true},
		{name: "newline", input: "a\n", wantErr: true},
		{name: "NUL", input: "a\x00b", wantErr: true},
		{name: "DEL", input: "a\x7fb", wantErr: true},
		{name: "129 bytes", input: strings.Repeat("a", 129), wantErr: true},
		{name: "130 bytes of two-byte runes", input: strings.Repeat("é", 65), wantErr: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := jobstate.ValidID(tt.input)
			if tt.wantErr {
				require.Error(t, err)
				assert.Contains(t, err.Error(), "job id")
				return
			}
			require.NoError(t, err)
		})
	}
}

func TestValidIDUnicodeSpace(t *testing.T) {
	// White space and control as Go's unicode package defines them
	// (unicode.IsSpace: U+00A0 NO-BREAK SPACE, U+0085 NEL, U+2028 LINE
	// SEPARATOR).
	for _, id := range []string{"a\u00a0b", "a\u0085b", "a\u2028b"} {
		assert.Error(t, jobstate.ValidID(id), "%q", id)
	}
}

func TestOpen(t *testing.T) {
	_, err := jobstate.Open("")
	require.Error(t, err)
	assert.Contains(t, err.Error(), "--state.dir")

	path := filepath.Join(t.TempDir(), "a", "b")
	d, err := jobstate.Open(path)
	require.NoError(t, err)
	assert.Equal(t, path, d.Path())
	info, err := os.Stat(path)
	require.NoError(t, err)
	assert.True(t, info.IsDir(), "Open creates missing parents")

	_, err = jobstate.Open(path)
	require.NoError(t, err, "opening an existing directory")

	file := filepath.Join(t.TempDir(), "file")
	require.NoError(t, os.WriteFile(file, nil, 0o644))
	_, err = jobstate.Open(file)
	require.Error(t, err, "a regular file is not a directory")
}

func sampleRecord(id string) jobstate.Record {
	return jobstate.Record{
		ID:        id,
		User:      "alice",
		Account:   "proj7",
		Name:      "cfd run",
		Nodes:     []string{"cn001", "cn002"},
		Start:     time.Date(2024, 6, 10, 6, 15, 23, 0, time.UTC),
		End:       time.Date(2024, 6, 10, 8, 0, 0, 5e8, time.UTC),
		ExitCode:  1,
		StartSent: true,
	}
}

func TestGetReadsTheFileFormat(t *testing.T) {
	// testdata/jobstate/records/4242.1.json is a record as Put writes it.
	d := openDir(t)
	data := fixture.Read(t, "jobstate", "records", "4242.1.json")
	require.NoError(t, os.WriteFile(filepath.Join(d.Path(), "4242.1.json"), data, 0o644))

	got, err := d.Get("4242.1")
	require.NoError(t, err)
	assert.Equal(t, sampleRecord("4242.1"), got)
}

func TestPutGet(t *testing.T) {
	tests := []struct {
		name  string
		input jobstate.Record
	}{
		{name: "full", input: sampleRecord("4242.1")},
		{name: "running, nothing sent", input: jobstate.Record{ID: "81234", Start: time.Date(2024, 1, 2, 3, 4, 5, 6, time.UTC)}},
		{name: "ended, both sent", input: jobstate.Record{ID: "a:b", Start: time.Unix(100, 0).UTC(), End: time.Unix(200, 0).UTC(), ExitCode: -9, StartSent: true, EndSent: true}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d := openDir(t)
			require.NoError(t, d.Put(tt.input))
			got, err := d.Get(tt.input.ID)
			require.NoError(t, err)
			assert.Equal(t, tt.input, got)
			assert.Equal(t, []string{tt.input.ID + ".json"}, files(t, d.Path()), "one file per job and no temporary left behind")
		})
	}
}

func TestPutFileFormat(t *testing.T) {
	d := openDir(t)
	require.NoError(t, d.Put(jobstate.Record{ID: "7", Start: time.Unix(0, 0).UTC()}))
	data, err := os.ReadFile(filepath.Join(d.Path(), "7.json"))
	require.NoError(t, err)
	var keys map[string]any
	require.NoError(t, json.Unmarshal(data, &keys))
	// A running job's record has no end; zero and empty fields are left out.
	assert.Equal(t, map[string]any{"id": "7", "start": "1970-01-01T00:00:00Z"}, keys)
}

func TestPutReplaces(t *testing.T) {
	d := openDir(t)
	r := sampleRecord("81234")
	require.NoError(t, d.Put(r))
	r.EndSent, r.Nodes = true, []string{"cn009"}
	require.NoError(t, d.Put(r))
	got, err := d.Get("81234")
	require.NoError(t, err)
	assert.Equal(t, r, got)
	assert.Equal(t, []string{"81234.json"}, files(t, d.Path()))
}

func TestPutGetInvalidID(t *testing.T) {
	d := openDir(t)
	for _, id := range []string{"", "..", "a/b", "../escape", "a b"} {
		assert.Error(t, d.Put(jobstate.Record{ID: id}), "Put %q", id)
		_, err := d.Get(id)
		assert.Error(t, err, "Get %q", id)
		assert.NotErrorIs(t, err, fs.ErrNotExist, "an invalid id is not a missing record")
	}
	assert.Empty(t, files(t, d.Path()))
	assert.NoFileExists(t, filepath.Join(filepath.Dir(d.Path()), "escape.json"))
}

func TestGetMissing(t *testing.T) {
	d := openDir(t)
	_, err := d.Get("81234")
	require.Error(t, err)
	assert.ErrorIs(t, err, fs.ErrNotExist)
}

func TestGetCorrupt(t *testing.T) {
	d := openDir(t)
	require.NoError(t, os.WriteFile(filepath.Join(d.Path(), "81234.json"), []byte(`{"id": "81234", "start": `), 0o644))
	_, err := d.Get("81234")
	require.Error(t, err)
	assert.NotErrorIs(t, err, fs.ErrNotExist)
	assert.Contains(t, err.Error(), "81234.json", "the error names the file")
}

func TestRemove(t *testing.T) {
	d := openDir(t)
	require.NoError(t, d.Put(sampleRecord("1")))
	require.NoError(t, d.Put(sampleRecord("2")))
	require.NoError(t, d.Remove("1"))
	_, err := d.Get("1")
	assert.ErrorIs(t, err, fs.ErrNotExist)
	assert.Equal(t, []string{"2.json"}, files(t, d.Path()))
	require.NoError(t, d.Remove("1"), "removing a missing record is not an error")
}

func TestRemoveInvalidID(t *testing.T) {
	parent := t.TempDir()
	d, err := jobstate.Open(filepath.Join(parent, "state"))
	require.NoError(t, err)
	victim := filepath.Join(parent, "victim.json")
	require.NoError(t, os.WriteFile(victim, []byte("{}"), 0o644))

	assert.Error(t, d.Remove("../victim"))
	assert.FileExists(t, victim)
}

func TestList(t *testing.T) {
	d := openDir(t)
	for _, id := range []string{"b", "81234", "a:b", "4242.1"} {
		require.NoError(t, d.Put(sampleRecord(id)))
	}
	write := func(name, content string) {
		require.NoError(t, os.WriteFile(filepath.Join(d.Path(), name), []byte(content), 0o644))
	}
	valid, err := json.Marshal(sampleRecord("ghost"))
	require.NoError(t, err)
	write(".tmp-123456", string(valid))     // a Put in progress
	write(".tmp-999.json", string(valid))   // a dot-file, even with the suffix
	write("notes.txt", "not a record")      // not a .json file
	write("ghost.json.bak", string(valid))  // wrong suffix
	write("bad.json", `{"id": "bad", "sta`) // truncated
	write("bad id.json", string(valid))     // name is not a valid id
	require.NoError(t, os.Mkdir(filepath.Join(d.Path(), "dir.json"), 0o755))

	got, err := d.List()
	var ids []string
	for _, r := range got {
		ids = append(ids, r.ID)
	}
	assert.Equal(t, []string{"4242.1", "81234", "a:b", "b"}, ids, "valid records, sorted by id")
	require.Error(t, err, "unreadable records are reported")
	assert.Contains(t, err.Error(), "read job bad:")
	assert.Contains(t, err.Error(), `job id "bad id"`)
	assert.NotContains(t, err.Error(), ".tmp-")
	assert.NotContains(t, err.Error(), "notes")
	assert.NotContains(t, err.Error(), "dir.json")
	assert.Equal(t, sampleRecord("4242.1"), got[0], "records are read in full")
}

func TestListEmptyAndGone(t *testing.T) {
	d := openDir(t)
	got, err := d.List()
	require.NoError(t, err)
	assert.Empty(t, got)

	require.NoError(t, os.Remove(d.Path()))
	_, err = d.List()
	require.Error(t, err)
	assert.ErrorIs(t, err, fs.ErrNotExist)
}

func TestDotIDRefused(t *testing.T) {
	// Records starting with '.' would be hidden among the temporary files
	// that List skips, so they are refused outright.
	d := openDir(t)
	require.Error(t, d.Put(sampleRecord(".5")))
	got, err := d.List()
	require.NoError(t, err)
	assert.Empty(t, got)
}

func TestRunning(t *testing.T) {
	now := time.Date(2024, 6, 10, 12, 0, 0, 0, time.UTC)
	tests := []struct {
		name  string
		input time.Time // end
		want  bool
	}{
		{name: "no end", input: time.Time{}, want: true},
		{name: "ends later", input: now.Add(time.Nanosecond), want: true},
		{name: "ends now", input: now, want: false},
		{name: "ended", input: now.Add(-time.Hour), want: false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := jobstate.Record{ID: "1", Start: now.Add(-2 * time.Hour), End: tt.input}
			assert.Equal(t, tt.want, r.Running(now))
		})
	}
}
