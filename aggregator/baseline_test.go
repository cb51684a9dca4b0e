package main

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/aggregate"
	"sluice/pkg/metric"
)

// startAggregator runs a service with an embedded broker on free ports.
func startAggregator(t *testing.T) string {
	return "http://" + startService(t, func(*aggregate.Options) {}).HTTPAddr()
}

// startService runs a service with an embedded broker on free ports,
// after edit has changed its options.
func startService(t *testing.T, edit func(*aggregate.Options)) *aggregate.Service {
	t.Helper()
	opts := aggregate.Options{
		EmbeddedListen: "127.0.0.1:0", Listen: "127.0.0.1:0",
		StorePath: filepath.Join(t.TempDir(), "a.db"),
		TickEvery: time.Hour, FlushEvery: time.Hour, RecomputeEvery: time.Hour,
	}
	edit(&opts)
	svc, err := aggregate.New(opts)
	require.NoError(t, err)
	stop, err := svc.Start()
	require.NoError(t, err, "aggregator did not start")
	t.Cleanup(func() { require.NoError(t, stop()) })
	return svc
}

// writeHistory writes rows rows of window values over ten days ending
// today, every metric log-normal, with a malformed row every 100,000 lines.
func writeHistory(t *testing.T, path string, rows int) (bad []int) {
	f, err := os.Create(path)
	require.NoError(t, err)
	w := bufio.NewWriter(f)
	fmt.Fprintln(w, "# window values of the invented Brackwater centre")
	fmt.Fprintln(w, "day,metric,rate,count")
	r := rand.New(rand.NewPCG(5, 8))
	today := time.Now().UTC()
	line := 2
	for i := range rows {
		line++
		if i > 0 && i%100000 == 0 {
			fmt.Fprintln(w, "2026-02-30,creates,1,1")
			bad = append(bad, line)
			continue
		}
		day := today.AddDate(0, 0, -(i % 10)).Format(time.DateOnly)
		id := metric.ID(i % int(metric.Count))
		fmt.Fprintf(w, "%s,%s,%.6g,%d\n", day, id, math.Exp(4+2*r.NormFloat64()), 1+r.IntN(3))
	}
	require.NoError(t, w.Flush())
	require.NoError(t, f.Close())
	return bad
}

// TestBaselineCommandsOnAMillionRows imports a 1,000,000-row file twice
// through the CLI, checks the malformed rows are named by line and the
// second import changes nothing, and exports the result.
func TestBaselineCommandsOnAMillionRows(t *testing.T) {
	url := startAggregator(t)
	dir := t.TempDir()
	file := filepath.Join(dir, "history.csv")
	bad := writeHistory(t, file, 1_000_000)
	require.Len(t, bad, 9)

	cli := func(args ...string) string {
		var out, errb bytes.Buffer
		require.NoError(t, run(context.Background(), args, &out, &errb), errb.String())
		return out.String()
	}
	out := cli("baseline", "import", file, "--url", url, "--quiet")
	assert.Contains(t, out, "999991 rows")
	assert.Contains(t, out, "into 10 days")
	assert.Contains(t, out, "9 malformed rows skipped:")
	for _, l := range bad {
		assert.Contains(t, out, fmt.Sprintf("line %d: day", l))
	}
	show := cli("baseline", "show", "--url", url)
	assert.Regexp(t, `(?m)^\s+creates\s+learned\s`, show)
	assert.Contains(t, show, "10 days stored")

	cli("baseline", "import", "--url", url, "--quiet", file) // flags before the file work too
	recomputed := regexp.MustCompile(`recomputed [^\n]*`)    // the time of the recompute each import makes
	assert.Equal(t, recomputed.ReplaceAllString(show, ""), recomputed.ReplaceAllString(cli("baseline", "show", "--url", url), ""),
		"a second import of the same file changes nothing")

	exported := filepath.Join(dir, "export.csv")
	cli("baseline", "export", "--url", url, "--out", exported)
	data, err := os.ReadFile(exported)
	require.NoError(t, err)
	assert.True(t, strings.HasPrefix(string(data), "# sluice window values v1\n"))
	assert.Contains(t, string(data), "\nday,metric,rate,count\n")
}

// TestImportProgressInAPipe: with standard error not a terminal, the
// progress report is plain lines, no carriage-return frames, and says no
// rate before a second has passed.
func TestImportProgressInAPipe(t *testing.T) {
	url := startAggregator(t)
	file := filepath.Join(t.TempDir(), "history.csv")
	writeHistory(t, file, 200_000)
	status, out, errs := invoke("baseline", "import", file, "--url", url)
	require.Zero(t, status, errs)
	assert.Contains(t, out, "rows")
	assert.NotContains(t, errs, "\r")
	lines := strings.Split(strings.TrimSpace(errs), "\n")
	require.NotEmpty(t, lines)
	assert.Regexp(t, `^importing .*history\.csv: [0-9.]+ [KM]?i?B of [0-9.]+ MiB \(\d+%\)`, lines[0])
	assert.Regexp(t, `^importing .*history\.csv: [0-9.]+ MiB in [0-9.]+m?s, [0-9.]+ [KM]?i?B/s$`, lines[len(lines)-1])
}
