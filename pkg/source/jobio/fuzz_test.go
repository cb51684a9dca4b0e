package jobio_test

import (
	"bytes"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"testing/iotest"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/jobio"
)

// fuzzSeeds returns every fixture file under testdata/jobio whose name
// matches keep.
func fuzzSeeds(f *testing.F, keep func(path string) bool) [][]byte {
	f.Helper()
	var seeds [][]byte
	err := filepath.WalkDir(fixture.Path(f, "jobio"), func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || d.Name() == "README" || !keep(path) {
			return err
		}
		b, err := os.ReadFile(path)
		seeds = append(seeds, b)
		return err
	})
	require.NoError(f, err)
	require.NotEmpty(f, seeds)
	return seeds
}

// lines counts the lines of data, a last line without a newline included.
func lines(data []byte) int {
	n := bytes.Count(data, []byte("\n"))
	if len(data) > 0 && data[len(data)-1] != '\n' {
		n++
	}
	return n
}

func FuzzParseProcIO(f *testing.F) {
	for _, s := range fuzzSeeds(f, func(p string) bool {
		return filepath.Base(p) == "io" || filepath.Base(filepath.Dir(p)) == "proc_io"
	}) {
		f.Add(s)
	}
	f.Add([]byte("rchar: 1\nrchar: 2\nwchar:3\n:\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := jobio.ParseProcIO(bytes.NewReader(data))
		require.NoError(t, err, "a bytes.Reader never fails")
		require.LessOrEqual(t, got.Malformed, lines(data))

		// Reading a byte at a time gives the same result.
		slow, err := jobio.ParseProcIO(iotest.OneByteReader(bytes.NewReader(data)))
		require.NoError(t, err)
		require.Equal(t, got, slow)

		// The values printed back as do_io_accounting prints them parse
		// to the same values, with nothing malformed.
		back, err := jobio.ParseProcIO(strings.NewReader(ioFile(got)))
		require.NoError(t, err)
		want := got
		want.Malformed = 0
		require.Equal(t, want, back)
	})
}

// formatIOStat prints lines as blkcg_print_one_stat does: the device, the
// six keys, then the extra keys (sorted, for a stable output).
func formatIOStat(ls []jobio.IOStatLine) string {
	var b strings.Builder
	for _, l := range ls {
		fmt.Fprintf(&b, "%s rbytes=%d wbytes=%d rios=%d wios=%d dbytes=%d dios=%d", l.Device, l.RBytes, l.WBytes, l.RIOs, l.WIOs, l.DBytes, l.DIOs)
		keys := make([]string, 0, len(l.Extra))
		for k := range l.Extra {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		for _, k := range keys {
			fmt.Fprintf(&b, " %s=%s", k, l.Extra[k])
		}
		b.WriteByte('\n')
	}
	return b.String()
}

func FuzzParseIOStat(f *testing.F) {
	for _, s := range fuzzSeeds(f, func(p string) bool {
		return filepath.Base(p) == "io.stat" || filepath.Base(filepath.Dir(p)) == "io_stat"
	}) {
		f.Add(s)
	}
	f.Add([]byte("8:0 a=b=c ==\n8:0\t rbytes=1\r\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := jobio.ParseIOStat(bytes.NewReader(data))
		require.NoError(t, err)
		require.LessOrEqual(t, len(got), lines(data))
		var good []jobio.IOStatLine
		for _, l := range got {
			require.GreaterOrEqual(t, l.Malformed, 0)
			if l.Device == "" {
				require.Equal(t, jobio.IOStatLine{Malformed: 1}, l, "only a too-long line has no device")
				continue
			}
			require.False(t, strings.ContainsAny(l.Device, " \t\n\v\f\r"), "the device is one token")
			if l.Major == 0 && l.Minor == 0 {
				require.Positive(t, l.Malformed, "a device that is not MAJ:MIN is malformed")
				continue
			}
			good = append(good, l)
		}

		slow, err := jobio.ParseIOStat(iotest.OneByteReader(bytes.NewReader(data)))
		require.NoError(t, err)
		require.Equal(t, got, slow)

		// Lines with a device, printed back, parse to the same values
		// (unless printing all six keys makes one longer than 4 KiB).
		good = slices.DeleteFunc(good, func(l jobio.IOStatLine) bool {
			return len(formatIOStat([]jobio.IOStatLine{l})) > 4000
		})
		for i := range good {
			good[i].Malformed = 0
			good[i].Device = fmt.Sprintf("%d:%d", good[i].Major, good[i].Minor)
		}
		back, err := jobio.ParseIOStat(strings.NewReader(formatIOStat(good)))
		require.NoError(t, err)
		if len(good) == 0 {
			require.Empty(t, back)
			return
		}
		require.Equal(t, good, back)
	})
}

func FuzzParseProcStat(f *testing.F) {
	for _, s := range fuzzSeeds(f, func(p string) bool {
		return filepath.Base(p) == "stat" || filepath.Base(filepath.Dir(p)) == "proc_stat"
	}) {
		f.Add(s)
	}
	f.Add([]byte("1 ()) ) S 0 0 0 0 0 0 0 0 0 0 0 0 0 0 0 0 0 0 5\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := jobio.ParseProcStat(bytes.NewReader(data))
		if err != nil {
			require.ErrorIs(t, err, jobio.ErrMalformed)
			return
		}
		require.Positive(t, got.PID)
		require.GreaterOrEqual(t, got.PPID, 0)
		require.NotEqual(t, byte(')'), got.State, "the comm ends at the last ')'")

		slow, err := jobio.ParseProcStat(iotest.OneByteReader(bytes.NewReader(data)))
		require.NoError(t, err)
		require.Equal(t, got, slow)

		// Printed back as do_task_stat prints it, whatever the comm holds.
		if len(got.Comm) > 3000 {
			return // the line would be longer than ParseProcStat reads
		}
		back, err := jobio.ParseProcStat(strings.NewReader(statLine(got.PID, got.Comm, got.State, got.PPID, got.StartTime)))
		require.NoError(t, err)
		require.Equal(t, got, back)
	})
}
