package windowcsv_test

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/metric"
	"sluice/pkg/windowcsv"
)

// testdata is the fixture directory of this package.
var testdata = filepath.Join("..", "..", "testdata", "windowcsv")

func mustRead(tb testing.TB, path string) []byte {
	tb.Helper()
	b, err := os.ReadFile(path)
	require.NoError(tb, err)
	return b
}

// day returns UTC midnight of a YYYY-MM-DD day, the way the reader does.
func day(tb testing.TB, s string) time.Time {
	tb.Helper()
	t, err := time.Parse(time.DateOnly, s)
	require.NoError(tb, err)
	return t
}

// row builds a Row from a day string.
func row(tb testing.TB, d string, m metric.ID, rate float64, count uint64) windowcsv.Row {
	tb.Helper()
	return windowcsv.Row{Day: day(tb, d), Metric: m, Rate: rate, Count: count}
}

// result is everything Next returns for one input.
type result struct {
	rows   []windowcsv.Row
	errs   []string // RowError texts, in order
	lines  []int    // RowError line numbers, in order
	fatal  error    // the error that ended reading, nil for io.EOF
	stats  windowcsv.ReadTotals
	offset int64
}

// readAll calls Next until it returns a fatal error or io.EOF.
func readAll(tb testing.TB, r io.Reader) result {
	tb.Helper()
	rd := windowcsv.NewReader(r)
	var res result
	for {
		row, err := rd.Next()
		if err == nil {
			res.rows = append(res.rows, row)
			continue
		}
		var re *windowcsv.RowError
		if errors.As(err, &re) {
			require.ErrorIs(tb, err, windowcsv.ErrMalformed)
			require.Equal(tb, windowcsv.Row{}, row)
			res.errs = append(res.errs, re.Error())
			res.lines = append(res.lines, re.Line)
			continue
		}
		require.NotErrorIs(tb, err, windowcsv.ErrMalformed)
		if err != io.EOF {
			res.fatal = err
		}
		break
	}
	res.stats = rd.Stats()
	res.offset = rd.Offset()
	return res
}
