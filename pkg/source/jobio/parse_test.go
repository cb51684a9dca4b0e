package jobio_test

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"testing/iotest"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/jobio"
)

// openFixture opens testdata/jobio/<rel>.
func openFixture(t *testing.T, rel string) *os.File {
	t.Helper()
	f, err := os.Open(fixture.Path(t, "jobio", rel))
	require.NoError(t, err)
	t.Cleanup(func() { f.Close() })
	return f
}

func TestParseProcIO(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string // inline file, or "@<fixture>"
		want    jobio.ProcIO
		wantErr bool
	}{
		{
			// Modelled on the example in Documentation/filesystems/proc.rst (from memory).
			name:  "proc.rst example",
			input: "@proc_io/example",
			want: jobio.ProcIO{RChar: 323934931, WChar: 323929600, SyscR: 632687, SyscW: 632675,
				WriteBytes: 323932160},
		},
		{
			name:  "malformed lines skipped and counted",
			input: "@proc_io/malformed",
			want: jobio.ProcIO{RChar: 4096, SyscR: 9, ReadBytes: 8192, WriteBytes: 2048,
				CancelledWriteBytes: 1024, Malformed: 5},
		},
		{
			name:  "empty",
			input: "",
		},
		{
			name:  "unknown keys only",
			input: "rchar_future: 12\nfoo bar: 3\n",
		},
		{
			name:  "max uint64, tabs, CRLF",
			input: "rchar:\t18446744073709551615\r\nwchar: 1\r\n",
			want:  jobio.ProcIO{RChar: 18446744073709551615, WChar: 1},
		},
		{
			name:  "a line longer than 4 KiB is one malformed line",
			input: "rchar: 1\n" + strings.Repeat("x", 5000) + "\nwchar: 2\n",
			want:  jobio.ProcIO{RChar: 1, WChar: 2, Malformed: 1},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := jobio.ParseProcIO(input(t, tt.input))
			if tt.wantErr {
				require.Error(t, err)
				return
			}
			require.NoError(t, err)
			require.Equal(t, tt.want, got)
		})
	}
}

// input returns a reader over an inline test input, or over a fixture file
// for "@<fixture>".
func input(t *testing.T, s string) io.Reader {
	if rel, ok := strings.CutPrefix(s, "@"); ok {
		return openFixture(t, rel)
	}
	return strings.NewReader(s)
}

func TestParseProcIOReadError(t *testing.T) {
	t.Parallel()
	boom := errors.New("boom")
	// What was parsed before the error is returned with it.
	got, err := jobio.ParseProcIO(io.MultiReader(strings.NewReader("rchar: 5\n"), iotest.ErrReader(boom)))
	require.ErrorIs(t, err, boom)
	require.Equal(t, uint64(5), got.RChar)
}

func TestParseIOStat(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string
		want    []jobio.IOStatLine
		wantErr bool
	}{
		{
			// Modelled on the example in Documentation/admin-guide/cgroup-v2.rst (from memory).
			name:  "cgroup-v2.rst example",
			input: "@io_stat/example",
			want: []jobio.IOStatLine{
				{Device: "8:16", Major: 8, Minor: 16, RBytes: 1459200, WBytes: 314773504, RIOs: 192, WIOs: 353},
				{Device: "8:0", Major: 8, Minor: 0, RBytes: 90430464, WBytes: 299008000, RIOs: 8950, WIOs: 1252, DBytes: 50331648, DIOs: 3021},
			},
		},
		{
			// blkcg_print_one_stat: debug keys, then the policies' pd_stat
			// keys; a bare "MAJ:MIN " line when there was no I/O.
			name:  "extra keys and bare lines",
			input: "@io_stat/extra_keys",
			want: []jobio.IOStatLine{
				{Device: "259:0", Major: 259, RBytes: 4096, WBytes: 8192, RIOs: 1, WIOs: 2, Extra: map[string]string{
					"use_delay": "0", "delay_nsec": "0", "depth": "max", "avg_lat": "1834", "win": "100",
					"cost.vrate": "100.00", "cost.usage": "12",
				}},
				{Device: "8:0", Major: 8},
				{Device: "253:1", Major: 253, Minor: 1},
			},
		},
		{
			name:  "malformed tokens counted per line",
			input: "@io_stat/malformed",
			want: []jobio.IOStatLine{
				{Device: "8:0", Major: 8, RBytes: 10, RIOs: 3, Malformed: 5},
				{Device: "sda", RBytes: 5, Malformed: 1},
				{Device: "8:16", Major: 8, Minor: 16, RBytes: 2},
				{Device: "0:0", RBytes: 9, Malformed: 1},
			},
		},
		{
			name:  "empty",
			input: "",
		},
		{
			name:  "device number limits",
			input: "4294967295:4294967295 rios=1\n4294967296:0 rios=2\n",
			want: []jobio.IOStatLine{
				{Device: "4294967295:4294967295", Major: 4294967295, Minor: 4294967295, RIOs: 1},
				{Device: "4294967296:0", RIOs: 2, Malformed: 1},
			},
		},
		{
			name:  "a line longer than 4 KiB",
			input: "8:0 rios=1 " + strings.Repeat("k=v ", 1200) + "\n8:16 wios=2\n",
			want: []jobio.IOStatLine{
				{Malformed: 1},
				{Device: "8:16", Major: 8, Minor: 16, WIOs: 2},
			},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := jobio.ParseIOStat(input(t, tt.input))
			if tt.wantErr {
				require.Error(t, err)
				return
			}
			require.NoError(t, err)
			require.Equal(t, tt.want, got)
		})
	}
}

func TestParseIOStatReadError(t *testing.T) {
	t.Parallel()
	boom := errors.New("boom")
	_, err := jobio.ParseIOStat(iotest.ErrReader(boom))
	require.ErrorIs(t, err, boom)
}

func TestParseProcStat(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string
		want    jobio.ProcStat
		wantErr bool
	}{
		{
			name:  "plain",
			input: "@proc_stat/plain",
			want:  jobio.ProcStat{PID: 2110, Comm: "lmp_mpi", State: 'R', PPID: 2100, StartTime: 8610020},
		},
		{
			// The comm ends at the last ')', not the first.
			name:  "comm with parentheses and spaces",
			input: "@proc_stat/parens_and_spaces",
			want:  jobio.ProcStat{PID: 2211, Comm: "py ) (x y", State: 'S', PPID: 2210, StartTime: 8620300},
		},
		{
			name:  "comm with a newline",
			input: "@proc_stat/newline_comm",
			want:  jobio.ProcStat{PID: 77, Comm: "a\nb) 9 (", State: 'Z', PPID: 76, StartTime: 123},
		},
		{
			name:  "kthreadd",
			input: "@proc_stat/kthread",
			want:  jobio.ProcStat{PID: 2, Comm: "kthreadd", State: 'S', PPID: 0, StartTime: 2},
		},
		{
			name:    "21 fields: no start time",
			input:   "@proc_stat/short",
			wantErr: true,
		},
		{
			name:  "exactly 22 fields, no newline",
			input: "9 (x) S 1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 77",
			want:  jobio.ProcStat{PID: 9, Comm: "x", State: 'S', PPID: 1, StartTime: 77},
		},
		{
			name:  "empty comm",
			input: "9 () S 1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 77\n",
			want:  jobio.ProcStat{PID: 9, State: 'S', PPID: 1, StartTime: 77},
		},
		{name: "empty", input: "", wantErr: true},
		{name: "no parentheses", input: "9 x S 1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 77\n", wantErr: true},
		{name: "no closing parenthesis", input: "9 (x S 1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 77\n", wantErr: true},
		{name: "pid not a number", input: "x9 (x) S 1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 77\n", wantErr: true},
		{name: "pid zero", input: "0 (x) S 1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 77\n", wantErr: true},
		{name: "two-letter state", input: "9 (x) SS 1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 77\n", wantErr: true},
		{name: "negative ppid", input: "9 (x) S -1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 77\n", wantErr: true},
		{name: "bad start time", input: "9 (x) S 1 9 9 0 -1 0 0 0 0 0 0 0 0 0 20 0 1 0 7x\n", wantErr: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := jobio.ParseProcStat(input(t, tt.input))
			if tt.wantErr {
				require.ErrorIs(t, err, jobio.ErrMalformed)
				return
			}
			require.NoError(t, err)
			require.Equal(t, tt.want, got)
		})
	}
}

func TestParseProcStatReadError(t *testing.T) {
	t.Parallel()
	boom := errors.New("boom")
	_, err := jobio.ParseProcStat(iotest.ErrReader(boom))
	require.ErrorIs(t, err, boom)
	require.False(t, errors.Is(err, jobio.ErrMalformed))
}

func TestParseSharedNodeFiles(t *testing.T) {
	t.Parallel()
	// Every io and stat file of the shared_node fixture parses cleanly.
	root := fixture.Path(t, "jobio", "shared_node")
	n := 0
	err := filepath.WalkDir(root, func(path string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		f, err := os.Open(path)
		require.NoError(t, err)
		defer f.Close()
		switch d.Name() {
		case "io":
			got, err := jobio.ParseProcIO(f)
			require.NoError(t, err)
			require.Zero(t, got.Malformed, path)
			n++
		case "stat":
			got, err := jobio.ParseProcStat(f)
			require.NoError(t, err, path)
			require.Equal(t, filepath.Base(filepath.Dir(path)), strconv.Itoa(got.PID), path)
			n++
		case "io.stat":
			got, err := jobio.ParseIOStat(f)
			require.NoError(t, err)
			for _, l := range got {
				require.Zero(t, l.Malformed, path)
			}
			n++
		}
		return nil
	})
	require.NoError(t, err)
	require.Greater(t, n, 20)
}
