package windowcsv_test

import (
	"bytes"
	"errors"
	"flag"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
	"testing/iotest"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/metric"
	"sluice/pkg/windowcsv"
)

var update = flag.Bool("update", false, "rewrite testdata/windowcsv/export.golden")

func TestWriterGolden(t *testing.T) {
	t.Parallel()
	rows := []windowcsv.Row{
		row(t, "2024-03-01", metric.ReadBytes, 1.5e9, 3),
		row(t, "2024-03-01", metric.ReadBytes, 1.0201e9, 1),
		row(t, "2024-03-01", metric.Creates, 120.25, 1),
		row(t, "2024-03-02", metric.WriteBytes, 0, 12),
		row(t, "2024-03-02", metric.StatOps, 0.1, 7),
		row(t, "2024-03-02", metric.OtherOps, 1e21, 1),
		row(t, "2024-03-02", metric.Syncs, 1.0/3, 2),
		// The UTC day of a non-midnight time in another zone.
		{Day: time.Date(2024, 3, 3, 23, 30, 0, 0, time.FixedZone("UTC-5", -5*3600)), Metric: metric.Opens, Rate: 5, Count: 1},
	}
	var buf bytes.Buffer
	w := windowcsv.NewWriter(&buf)
	for _, r := range rows {
		require.NoError(t, w.Write(r))
	}
	require.NoError(t, w.Flush())

	path := filepath.Join(testdata, "export.golden")
	if *update {
		require.NoError(t, os.WriteFile(path, buf.Bytes(), 0o644))
	}
	require.Equal(t, string(mustRead(t, path)), buf.String())

	got := readAll(t, bytes.NewReader(buf.Bytes()))
	require.NoError(t, got.fatal)
	require.Empty(t, got.errs)
	rows[7].Day = day(t, "2024-03-04")
	require.Equal(t, rows, got.rows)
}

func TestWriterEmpty(t *testing.T) {
	t.Parallel()
	var buf bytes.Buffer
	w := windowcsv.NewWriter(&buf)
	require.NoError(t, w.Flush())
	require.NoError(t, w.Flush())
	require.Contains(t, buf.String(), "# sluice window values v1\n")
	require.Equal(t, 1, bytes.Count(buf.Bytes(), []byte("day,metric,rate,count\n")))

	got := readAll(t, &buf)
	require.NoError(t, got.fatal, "an empty export is a valid file")
	require.Empty(t, got.rows)
}

func TestWriterInvalidRow(t *testing.T) {
	t.Parallel()
	d := day(t, "2024-03-01")
	tests := []struct {
		name    string
		row     windowcsv.Row
		wantErr string
	}{
		{"unknown metric", windowcsv.Row{Day: d, Metric: metric.Count, Rate: 1, Count: 1}, "windowcsv: invalid row: unknown metric metric(12)"},
		{"negative rate", windowcsv.Row{Day: d, Metric: metric.Opens, Rate: -1, Count: 1}, "windowcsv: invalid row: opens rate -1: negative"},
		{"NaN", windowcsv.Row{Day: d, Metric: metric.Opens, Rate: math.NaN(), Count: 1}, "windowcsv: invalid row: opens rate NaN: not finite"},
		{"Inf", windowcsv.Row{Day: d, Metric: metric.Opens, Rate: math.Inf(1), Count: 1}, "windowcsv: invalid row: opens rate +Inf: not finite"},
		{"count 0", windowcsv.Row{Day: d, Metric: metric.Opens, Rate: 1}, "windowcsv: invalid row: opens count 0"},
		{"year 10000", windowcsv.Row{Day: time.Date(10000, 1, 1, 0, 0, 0, 0, time.UTC), Metric: metric.Opens, Rate: 1, Count: 1}, "windowcsv: invalid row: day 10000-01-01 00:00:00 +0000 UTC: year not in 0000-9999"},
		{"year -1", windowcsv.Row{Day: time.Date(-1, 1, 1, 0, 0, 0, 0, time.UTC), Metric: metric.Opens, Rate: 1, Count: 1}, "windowcsv: invalid row: day -0001-01-01 00:00:00 +0000 UTC: year not in 0000-9999"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			var buf bytes.Buffer
			w := windowcsv.NewWriter(&buf)
			err := w.Write(tt.row)
			require.ErrorIs(t, err, windowcsv.ErrInvalidRow)
			require.EqualError(t, err, tt.wantErr)
			// The writer stays usable and wrote nothing for the bad row.
			require.NoError(t, w.Write(row(t, "2024-03-01", metric.Opens, 2, 1)))
			require.NoError(t, w.Flush())
			got := readAll(t, &buf)
			require.Equal(t, []windowcsv.Row{row(t, "2024-03-01", metric.Opens, 2, 1)}, got.rows)
		})
	}
}

func TestWriterNegativeZero(t *testing.T) {
	t.Parallel()
	var buf bytes.Buffer
	w := windowcsv.NewWriter(&buf)
	require.NoError(t, w.Write(windowcsv.Row{Day: day(t, "2024-03-01"), Metric: metric.Opens, Rate: math.Copysign(0, -1), Count: 1}))
	require.NoError(t, w.Flush())
	require.Contains(t, buf.String(), "2024-03-01,opens,0,1\n")
}

func TestWriterErrorSticks(t *testing.T) {
	t.Parallel()
	boom := errors.New("full")
	w := windowcsv.NewWriter(errWriter{boom})
	var err error
	for i := 0; err == nil && i < 100000; i++ {
		err = w.Write(row(t, "2024-03-01", metric.Opens, float64(i), 1))
	}
	require.ErrorIs(t, err, boom)
	require.ErrorIs(t, w.Write(row(t, "2024-03-01", metric.Opens, 1, 1)), boom)
	require.ErrorIs(t, w.Flush(), boom)

	w = windowcsv.NewWriter(errWriter{boom})
	require.ErrorIs(t, w.Flush(), boom)
}

type errWriter struct{ err error }

func (w errWriter) Write([]byte) (int, error) { return 0, w.err }

// randomRow returns a valid row with a rate drawn from all of float64's
// finite non-negative range: random bit patterns, small integers and
// short decimals.
func randomRow(rng *rand.Rand) windowcsv.Row {
	r := windowcsv.Row{
		Day:    time.Date(rng.IntN(10000), time.January, 1+rng.IntN(366), 0, 0, 0, 0, time.UTC),
		Metric: metric.ID(rng.IntN(int(metric.Count))),
		Count:  1 + rng.Uint64N(1<<20),
	}
	if r.Day.Year() > 9999 {
		r.Day = r.Day.AddDate(0, 0, -1)
	}
	switch rng.IntN(5) {
	case 0:
		for {
			r.Rate = math.Float64frombits(rng.Uint64() &^ (1 << 63))
			if !math.IsNaN(r.Rate) && !math.IsInf(r.Rate, 0) {
				break
			}
		}
	case 1:
		r.Rate = float64(rng.IntN(100000))
	case 2:
		r.Rate = float64(rng.IntN(1000000)) / 100
	case 3:
		r.Rate = math.Exp(rng.NormFloat64()*3 + 15) // log-normal around 3 MB/s
	case 4:
		r.Count = ^uint64(0) - rng.Uint64N(10)
		r.Rate = []float64{0, math.SmallestNonzeroFloat64, math.MaxFloat64, 2.2250738585072014e-308}[rng.IntN(4)]
	}
	return r
}

func TestRoundTripRandom(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	want := make([]windowcsv.Row, 20000)
	for i := range want {
		want[i] = randomRow(rng)
	}
	var buf bytes.Buffer
	w := windowcsv.NewWriter(&buf)
	for _, r := range want {
		require.NoError(t, w.Write(r))
	}
	require.NoError(t, w.Flush())

	got := readAll(t, iotest.HalfReader(&buf))
	require.NoError(t, got.fatal)
	require.Empty(t, got.errs)
	require.Len(t, got.rows, len(want))
	for i := range want {
		require.Equal(t, math.Float64bits(want[i].Rate), math.Float64bits(got.rows[i].Rate), "row %d: %v", i, want[i].Rate)
	}
	require.Equal(t, want, got.rows)
}
