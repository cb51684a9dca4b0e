package windowcsv_test

import (
	"bytes"
	"errors"
	"io"
	"math"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/windowcsv"
)

func FuzzReader(f *testing.F) {
	files, err := filepath.Glob(filepath.Join(testdata, "*"))
	require.NoError(f, err)
	for _, p := range files {
		if filepath.Base(p) != "README" {
			f.Add(mustRead(f, p))
		}
	}
	require.GreaterOrEqual(f, len(files), 3)
	f.Add([]byte("day,metric,rate\r\n2024-02-29,opens,0x1p-2\r\n2023-02-29,opens,1\r\n"))
	f.Add([]byte("\uFEFF# c\n\nday,metric,rate,count\n9999-12-31,read_bytes,1.7976931348623157e308,18446744073709551615\n0000-01-01,syncs,-0,1\n"))
	f.Add([]byte("day,metric,rate,count\n2024-03-01,opens,\"1,5\",1\n2024-03-01,opens,1e400,1\n,,,\n"))
	f.Add([]byte("day,metric,rate,count"))
	f.Add([]byte(""))
	f.Fuzz(func(t *testing.T, data []byte) {
		rd := windowcsv.NewReader(bytes.NewReader(data))
		var rows []windowcsv.Row
		malformed := 0
		var fatal error
		for {
			row, err := rd.Next()
			if err == nil {
				require.False(t, math.IsNaN(row.Rate) || math.IsInf(row.Rate, 0), "rate %v", row.Rate)
				require.False(t, row.Rate < 0 || math.Signbit(row.Rate), "rate %v", row.Rate)
				require.GreaterOrEqual(t, row.Count, uint64(1))
				require.True(t, row.Metric.Valid(), "metric %d", row.Metric)
				require.Equal(t, row.Day, row.Day.UTC().Truncate(24*60*60*1e9), "UTC midnight")
				require.True(t, row.Day.Year() >= 0 && row.Day.Year() <= 9999)
				rows = append(rows, row)
				continue
			}
			var re *windowcsv.RowError
			if errors.As(err, &re) {
				require.Equal(t, windowcsv.Row{}, row)
				require.Positive(t, re.Line)
				require.NotEmpty(t, re.Reason)
				require.LessOrEqual(t, len(re.Value), 64)
				malformed++
				continue
			}
			if err != io.EOF {
				fatal = err
			}
			break
		}

		lines := bytes.Count(data, []byte("\n"))
		if len(data) > 0 && data[len(data)-1] != '\n' {
			lines++
		}
		st := rd.Stats()
		require.Equal(t, len(rows), st.Rows)
		require.Equal(t, malformed, st.Malformed)
		require.Len(t, st.Errors, min(malformed, windowcsv.MaxErrors))
		require.LessOrEqual(t, st.Lines, lines)
		if fatal != nil {
			require.ErrorIs(t, fatal, windowcsv.ErrHeader, "a bytes.Reader never fails")
			require.Empty(t, rows)
			require.Zero(t, malformed)
			return
		}
		require.Equal(t, lines, st.Lines)
		require.LessOrEqual(t, st.Rows+st.Malformed+1, st.Lines, "the header is a line")
		require.Equal(t, int64(len(data)), rd.Offset())
		var windows uint64 // saturating, as Stats.Windows
		for _, r := range rows {
			if windows+r.Count < windows {
				windows = math.MaxUint64
			} else {
				windows += r.Count
			}
		}
		require.Equal(t, windows, st.Windows)

		// Whatever was read writes back and reads back the same.
		var buf bytes.Buffer
		w := windowcsv.NewWriter(&buf)
		for _, r := range rows {
			require.NoError(t, w.Write(r))
		}
		require.NoError(t, w.Flush())
		back := windowcsv.NewReader(&buf)
		for _, want := range rows {
			got, err := back.Next()
			require.NoError(t, err)
			require.Equal(t, want, got)
		}
		_, err := back.Next()
		require.Equal(t, io.EOF, err)
		require.Equal(t, st.Windows, back.Stats().Windows)
	})
}
