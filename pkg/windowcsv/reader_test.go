package windowcsv_test

import (
	"bytes"
	"context"
	"errors"
	"io"
	"path/filepath"
	"strings"
	"testing"
	"testing/iotest"

	"github.com/stretchr/testify/require"

	"sluice/pkg/metric"
	"sluice/pkg/windowcsv"
)

func TestReadFixtures(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name     string
		input    string // file under testdata/windowcsv
		want     []windowcsv.Row
		wantErrs []string
		lines    int
	}{
		{
			name:  "example",
			input: "example.csv",
			want: []windowcsv.Row{
				row(t, "2024-03-01", metric.ReadBytes, 1.5e9, 3),
				row(t, "2024-03-01", metric.Creates, 120.25, 1),
				row(t, "2024-03-02", metric.WriteBytes, 0, 12),
				row(t, "2024-02-29", metric.MetaUpdates, 0.5, 4),
			},
			wantErrs: []string{
				`line 6: day "2024-02-30": no such day`,
				`line 8: metric "bogus_ops": unknown metric`,
				`line 9: rate "abc": not a number`,
				`line 12: rate "-3": negative`,
				`line 13: count "0": zero (a count is at least 1)`,
				`line 14: quote character (quoted fields are not part of the layout): "\"2024-03-02\",opens,1,1"`,
				`line 15: 3 fields, want 4: "2024-03-02,opens,1"`,
			},
			lines: 16,
		},
		{
			name:  "no count column, CRLF",
			input: "no_count.csv",
			want: []windowcsv.Row{
				row(t, "2024-03-01", metric.ReadBytes, 1000, 1),
				row(t, "2024-03-01", metric.ReadBytes, 1000, 1),
				row(t, "2024-03-02", metric.Opens, 3, 1),
			},
			wantErrs: []string{`line 5: 4 fields, want 3: "2024-03-01,opens,2.5,1"`},
			lines:    7,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			data := mustRead(t, filepath.Join(testdata, tt.input))
			got := readAll(t, bytes.NewReader(data))
			require.NoError(t, got.fatal)
			require.Equal(t, tt.want, got.rows)
			require.Equal(t, tt.wantErrs, got.errs)
			require.Equal(t, len(tt.want), got.stats.Rows)
			require.Equal(t, len(tt.wantErrs), got.stats.Malformed)
			require.Len(t, got.stats.Errors, len(tt.wantErrs))
			require.Equal(t, tt.lines, got.stats.Lines)
			require.Equal(t, int64(len(data)), got.offset)
		})
	}
}

func TestMalformedRows(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string // the bad row, written at line 3 between two good rows
		wantErr string
	}{
		{"day with slashes", "2024/03/01,opens,1,1", `line 3: day "2024/03/01": not YYYY-MM-DD`},
		{"day too short", "2024-3-01,opens,1,1", `line 3: day "2024-3-01": not YYYY-MM-DD`},
		{"two-digit year", "24-03-01,opens,1,1", `line 3: day "24-03-01": not YYYY-MM-DD`},
		{"day with time", "2024-03-01T00:00:00Z,opens,1,1", `line 3: day "2024-03-01T00:00:00Z": not YYYY-MM-DD`},
		{"day letters", "2024-0a-01,opens,1,1", `line 3: day "2024-0a-01": not YYYY-MM-DD`},
		{"month 13", "2024-13-01,opens,1,1", `line 3: day "2024-13-01": month not 01-12`},
		{"month 00", "2024-00-10,opens,1,1", `line 3: day "2024-00-10": month not 01-12`},
		{"day 00", "2024-03-00,opens,1,1", `line 3: day "2024-03-00": no such day`},
		{"day 32", "2024-01-32,opens,1,1", `line 3: day "2024-01-32": no such day`},
		{"Feb 30", "2024-02-30,opens,1,1", `line 3: day "2024-02-30": no such day`},
		{"Feb 29 not leap", "2023-02-29,opens,1,1", `line 3: day "2023-02-29": no such day`},
		{"Feb 29 1900", "1900-02-29,opens,1,1", `line 3: day "1900-02-29": no such day`},
		{"Apr 31", "2024-04-31,opens,1,1", `line 3: day "2024-04-31": no such day`},
		{"unknown metric", "2024-03-01,reads,1,1", `line 3: metric "reads": unknown metric`},
		{"metric upper case", "2024-03-01,OPENS,1,1", `line 3: metric "OPENS": unknown metric`},
		{"metric with space", "2024-03-01, opens,1,1", `line 3: metric " opens": unknown metric`},
		{"negative rate", "2024-03-01,opens,-0.5,1", `line 3: rate "-0.5": negative`},
		{"NaN", "2024-03-01,opens,NaN,1", `line 3: rate "NaN": not finite`},
		{"Inf", "2024-03-01,opens,Inf,1", `line 3: rate "Inf": not finite`},
		{"-Inf", "2024-03-01,opens,-Inf,1", `line 3: rate "-Inf": not finite`},
		{"rate overflow", "2024-03-01,opens,1e400,1", `line 3: rate "1e400": out of range`},
		{"rate not a number", "2024-03-01,opens,abc,1", `line 3: rate "abc": not a number`},
		{"rate with unit", "2024-03-01,opens,5/s,1", `line 3: rate "5/s": not a number`},
		{"rate decimal comma", "2024-03-01,opens,1.5e,1", `line 3: rate "1.5e": not a number`},
		{"empty day", ",opens,1,1", `line 3: day "": empty`},
		{"empty metric", "2024-03-01,,1,1", `line 3: metric "": empty`},
		{"empty rate", "2024-03-01,opens,,1", `line 3: rate "": empty`},
		{"empty count", "2024-03-01,opens,1,", `line 3: count "": empty`},
		{"too many fields", "2024-03-01,opens,1,1,1", `line 3: 5 fields, want 4: "2024-03-01,opens,1,1,1"`},
		{"too few fields", "2024-03-01,opens,1", `line 3: 3 fields, want 4: "2024-03-01,opens,1"`},
		{"one field", "2024-03-01", `line 3: 1 fields, want 4: "2024-03-01"`},
		{"count 0", "2024-03-01,opens,1,0", `line 3: count "0": zero (a count is at least 1)`},
		{"count 000", "2024-03-01,opens,1,000", `line 3: count "000": zero (a count is at least 1)`},
		{"count fraction", "2024-03-01,opens,1,1.5", `line 3: count "1.5": not a positive integer`},
		{"count exponent", "2024-03-01,opens,1,1e3", `line 3: count "1e3": not a positive integer`},
		{"count negative", "2024-03-01,opens,1,-2", `line 3: count "-2": not a positive integer`},
		{"count plus", "2024-03-01,opens,1,+2", `line 3: count "+2": not a positive integer`},
		{"count overflow", "2024-03-01,opens,1,18446744073709551616", `line 3: count "18446744073709551616": over 2^64-1`},
		{"trailing space", "2024-03-01,opens,1,1 ", `line 3: count "1 ": not a positive integer`},
		{"quoted field", `2024-03-01,"opens",1,1`, `line 3: quote character (quoted fields are not part of the layout): "2024-03-01,\"opens\",1,1"`},
		{"quoted comma", `2024-03-01,opens,"1,5",1`, `line 3: quote character (quoted fields are not part of the layout): "2024-03-01,opens,\"1,5\",1"`},
		{"indented comment", " # note", `line 3: 1 fields, want 4: " # note"`},
		{
			"long value cut", "2024-03-01,opens,1," + strings.Repeat("9", 100),
			`line 3: count "` + strings.Repeat("9", 64) + `": over 2^64-1`,
		},
		{"line too long", strings.Repeat("x", 70000), `line 3: line over 64 KiB: "` + strings.Repeat("x", 64) + `"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			input := "day,metric,rate,count\n2024-03-01,read_ops,5,2\n" + tt.input + "\n2024-03-02,syncs,0.25,1\n"
			got := readAll(t, strings.NewReader(input))
			require.NoError(t, got.fatal)
			require.Equal(t, []windowcsv.Row{
				row(t, "2024-03-01", metric.ReadOps, 5, 2),
				row(t, "2024-03-02", metric.Syncs, 0.25, 1),
			}, got.rows, "the good rows around the bad one")
			require.Equal(t, []string{tt.wantErr}, got.errs)
			require.Equal(t, []int{3}, got.lines)
			require.Equal(t, 1, got.stats.Malformed)
			require.Equal(t, uint64(3), got.stats.Windows)
			require.Equal(t, int64(len(input)), got.offset)
		})
	}
}

func TestGoodFields(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name  string
		input string // one row
		want  windowcsv.Row
	}{
		{"leap day", "2024-02-29,opens,1,1", row(t, "2024-02-29", metric.Opens, 1, 1)},
		{"leap day 2000", "2000-02-29,opens,1,1", row(t, "2000-02-29", metric.Opens, 1, 1)},
		{"year 0000", "0000-01-01,opens,1,1", row(t, "0000-01-01", metric.Opens, 1, 1)},
		{"year 9999", "9999-12-31,opens,1,1", row(t, "9999-12-31", metric.Opens, 1, 1)},
		{"exponent", "2024-03-01,read_bytes,1.5e9,1", row(t, "2024-03-01", metric.ReadBytes, 1.5e9, 1)},
		{"exponent sign", "2024-03-01,read_bytes,2E+3,1", row(t, "2024-03-01", metric.ReadBytes, 2000, 1)},
		{"leading dot", "2024-03-01,read_bytes,.5,1", row(t, "2024-03-01", metric.ReadBytes, 0.5, 1)},
		{"plus sign", "2024-03-01,read_bytes,+7,1", row(t, "2024-03-01", metric.ReadBytes, 7, 1)},
		{"hex float", "2024-03-01,read_bytes,0x1p-2,1", row(t, "2024-03-01", metric.ReadBytes, 0.25, 1)},
		{"negative zero", "2024-03-01,read_bytes,-0,1", row(t, "2024-03-01", metric.ReadBytes, 0, 1)},
		{"underflow to zero", "2024-03-01,read_bytes,1e-400,1", row(t, "2024-03-01", metric.ReadBytes, 0, 1)},
		{"smallest float", "2024-03-01,read_bytes,5e-324,1", row(t, "2024-03-01", metric.ReadBytes, 5e-324, 1)},
		{"count max", "2024-03-01,other_ops,1,18446744073709551615", row(t, "2024-03-01", metric.OtherOps, 1, 1<<64-1)},
		{"count leading zeros", "2024-03-01,other_ops,1,007", row(t, "2024-03-01", metric.OtherOps, 1, 7)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got := readAll(t, strings.NewReader("day,metric,rate,count\n"+tt.input+"\n"))
			require.NoError(t, got.fatal)
			require.Empty(t, got.errs)
			require.Equal(t, []windowcsv.Row{tt.want}, got.rows)
			require.False(t, got.rows[0].Rate < 0 || 1/got.rows[0].Rate < 0, "never -0")
		})
	}
	for _, id := range metric.All() {
		got := readAll(t, strings.NewReader("day,metric,rate,count\n2024-03-01,"+id.String()+",1,1\n"))
		require.Equal(t, []windowcsv.Row{row(t, "2024-03-01", id, 1, 1)}, got.rows, id.String())
	}
}

func TestHeader(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   string
		want    []windowcsv.Row
		wantErr string // "" for no fatal error
	}{
		{"empty input", "", nil, `windowcsv: bad header: no header line "day,metric,rate,count" (empty input or only comments)`},
		{"only comments and blanks", "# sluice window values v1\n\n  \n# x\n", nil, `windowcsv: bad header: no header line "day,metric,rate,count" (empty input or only comments)`},
		{"rows without header", "2024-03-01,opens,1,1\n", nil, `windowcsv: bad header: line 1 is "2024-03-01,opens,1,1", want "day,metric,rate,count" or "day,metric,rate"`},
		{"wrong order", "# c\nmetric,day,rate,count\n2024-03-01,opens,1,1\n", nil, `windowcsv: bad header: line 2 is "metric,day,rate,count", want "day,metric,rate,count" or "day,metric,rate"`},
		{"count first", "count,day,metric,rate\n", nil, `windowcsv: bad header: line 1 is "count,day,metric,rate", want "day,metric,rate,count" or "day,metric,rate"`},
		{"extra column", "day,metric,rate,count,job\n", nil, `windowcsv: bad header: line 1 is "day,metric,rate,count,job", want "day,metric,rate,count" or "day,metric,rate"`},
		{"no rate", "day,metric\n", nil, `windowcsv: bad header: line 1 is "day,metric", want "day,metric,rate,count" or "day,metric,rate"`},
		{"upper case", "Day,Metric,Rate,Count\n", nil, `windowcsv: bad header: line 1 is "Day,Metric,Rate,Count", want "day,metric,rate,count" or "day,metric,rate"`},
		{"spaces", "day, metric, rate, count\n", nil, `windowcsv: bad header: line 1 is "day, metric, rate, count", want "day,metric,rate,count" or "day,metric,rate"`},
		{"quoted", `"day","metric","rate","count"` + "\n", nil, `windowcsv: bad header: line 1 is "\"day\",\"metric\",\"rate\",\"count\"", want "day,metric,rate,count" or "day,metric,rate"`},
		{"too long", strings.Repeat("d", 70000) + "\n", nil, `windowcsv: bad header: line 1: line over 64 KiB, want "day,metric,rate,count"`},
		{"header only", "day,metric,rate,count\n", nil, ""},
		{"header only, no line end", "day,metric,rate,count", nil, ""},
		{
			"without count", "day,metric,rate\n2024-03-01,opens,1.5\n2024-03-01,opens,2\n", []windowcsv.Row{
				row(t, "2024-03-01", metric.Opens, 1.5, 1),
				row(t, "2024-03-01", metric.Opens, 2, 1),
			}, "",
		},
		{"byte order mark", "\uFEFFday,metric,rate,count\n2024-03-01,opens,1,2\n", []windowcsv.Row{row(t, "2024-03-01", metric.Opens, 1, 2)}, ""},
		{"byte order mark before comment", "\uFEFF# c\nday,metric,rate,count\n2024-03-01,opens,1,2\n", []windowcsv.Row{row(t, "2024-03-01", metric.Opens, 1, 2)}, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got := readAll(t, strings.NewReader(tt.input))
			if tt.wantErr != "" {
				require.ErrorIs(t, got.fatal, windowcsv.ErrHeader)
				require.EqualError(t, got.fatal, tt.wantErr)
			} else {
				require.NoError(t, got.fatal)
			}
			require.Equal(t, tt.want, got.rows)
			require.Empty(t, got.errs)
		})
	}
}

func TestHasCount(t *testing.T) {
	t.Parallel()
	rd := windowcsv.NewReader(strings.NewReader("day,metric,rate\n"))
	require.False(t, rd.HasCount())
	_, err := rd.Next()
	require.Equal(t, io.EOF, err)
	require.False(t, rd.HasCount())

	rd = windowcsv.NewReader(strings.NewReader("day,metric,rate,count\n"))
	_, err = rd.Next()
	require.Equal(t, io.EOF, err)
	require.True(t, rd.HasCount())
}

func TestLineEndingsCommentsBlanks(t *testing.T) {
	t.Parallel()
	want := []windowcsv.Row{
		row(t, "2024-03-01", metric.ReadBytes, 100, 2),
		row(t, "2024-03-02", metric.WriteOps, 3.5, 1),
	}
	tests := []struct {
		name  string
		input string
		lines int
	}{
		{"LF", "day,metric,rate,count\n2024-03-01,read_bytes,100,2\n2024-03-02,write_ops,3.5,1\n", 3},
		{"CRLF", "day,metric,rate,count\r\n2024-03-01,read_bytes,100,2\r\n2024-03-02,write_ops,3.5,1\r\n", 3},
		{"no final line end", "day,metric,rate,count\n2024-03-01,read_bytes,100,2\n2024-03-02,write_ops,3.5,1", 3},
		{"CR at the very end", "day,metric,rate,count\r\n2024-03-01,read_bytes,100,2\r\n2024-03-02,write_ops,3.5,1\r", 3},
		{"mixed", "day,metric,rate,count\r\n2024-03-01,read_bytes,100,2\n2024-03-02,write_ops,3.5,1\r\n", 3},
		{
			"comments and blanks everywhere",
			"\n# sluice window values v1\r\n\r\n#\n   \n\t\nday,metric,rate,count\n# between\n\n2024-03-01,read_bytes,100,2\n#,x,y,z\n \r\n2024-03-02,write_ops,3.5,1\n\n# end",
			15,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got := readAll(t, strings.NewReader(tt.input))
			require.NoError(t, got.fatal)
			require.Empty(t, got.errs)
			require.Equal(t, want, got.rows)
			require.Equal(t, tt.lines, got.stats.Lines)
			require.Equal(t, 2, got.stats.Rows)
			require.Equal(t, uint64(3), got.stats.Windows)
			require.Equal(t, int64(len(tt.input)), got.offset)
		})
	}
}

func TestOffset(t *testing.T) {
	t.Parallel()
	lines := []string{"# c\n", "day,metric,rate,count\n", "2024-03-01,opens,1,1\n", "\n", "bad\n", "2024-03-01,opens,2,1\r\n", "2024-03-01,opens,3,1"}
	input := strings.Join(lines, "")
	rd := windowcsv.NewReader(strings.NewReader(input))
	require.Zero(t, rd.Offset())

	_, err := rd.Next()
	require.NoError(t, err)
	require.Equal(t, int64(len(strings.Join(lines[:3], ""))), rd.Offset())
	_, err = rd.Next()
	require.ErrorIs(t, err, windowcsv.ErrMalformed)
	require.Equal(t, int64(len(strings.Join(lines[:5], ""))), rd.Offset())
	_, err = rd.Next()
	require.NoError(t, err)
	require.Equal(t, int64(len(strings.Join(lines[:6], ""))), rd.Offset())
	_, err = rd.Next()
	require.NoError(t, err)
	require.Equal(t, int64(len(input)), rd.Offset())
	_, err = rd.Next()
	require.Equal(t, io.EOF, err)
	require.Equal(t, int64(len(input)), rd.Offset())
}

func TestFatalErrorsStick(t *testing.T) {
	t.Parallel()
	rd := windowcsv.NewReader(strings.NewReader("nope\n2024-03-01,opens,1,1\n"))
	_, err := rd.Next()
	require.ErrorIs(t, err, windowcsv.ErrHeader)
	_, err2 := rd.Next()
	require.Equal(t, err, err2)

	rd = windowcsv.NewReader(strings.NewReader("day,metric,rate,count\n"))
	for range 3 {
		_, err = rd.Next()
		require.Equal(t, io.EOF, err)
	}
}

func TestReadErrorIsFatal(t *testing.T) {
	t.Parallel()
	boom := errors.New("disk on fire")
	r := io.MultiReader(strings.NewReader("day,metric,rate,count\n2024-03-01,opens,1,1\n2024-03-01,op"), iotest.ErrReader(boom))
	var rows []windowcsv.Row
	st, err := windowcsv.Read(t.Context(), r, func(r windowcsv.Row) error { rows = append(rows, r); return nil })
	require.ErrorIs(t, err, boom)
	require.EqualError(t, err, "windowcsv: after line 2: disk on fire")
	require.Equal(t, []windowcsv.Row{row(t, "2024-03-01", metric.Opens, 1, 1)}, rows)
	require.Equal(t, 1, st.Rows)
	require.Zero(t, st.Malformed, "the cut line is dropped, not reported")

	// A read error while skipping an over-long line is fatal too.
	r = io.MultiReader(strings.NewReader("day,metric,rate,count\n"+strings.Repeat("x", 100000)), iotest.ErrReader(boom))
	_, err = windowcsv.Read(t.Context(), r, func(windowcsv.Row) error { return nil })
	require.ErrorIs(t, err, boom)
}

func TestReadSmallReads(t *testing.T) {
	t.Parallel()
	data := mustRead(t, filepath.Join(testdata, "example.csv"))
	want := readAll(t, bytes.NewReader(data))
	got := readAll(t, iotest.OneByteReader(bytes.NewReader(data)))
	require.Equal(t, want, got)
}

func TestEach(t *testing.T) {
	t.Parallel()
	data := mustRead(t, filepath.Join(testdata, "example.csv"))

	t.Run("all rows", func(t *testing.T) {
		t.Parallel()
		var rows []windowcsv.Row
		st, err := windowcsv.Read(context.Background(), bytes.NewReader(data), func(r windowcsv.Row) error {
			rows = append(rows, r)
			return nil
		})
		require.NoError(t, err)
		require.Equal(t, readAll(t, bytes.NewReader(data)).rows, rows)
		require.Equal(t, 4, st.Rows)
		require.Equal(t, 7, st.Malformed)
		require.Equal(t, uint64(20), st.Windows)
		require.Equal(t, 16, st.Lines)
		lines := make([]int, 0, len(st.Errors))
		for _, e := range st.Errors {
			lines = append(lines, e.Line)
		}
		require.Equal(t, []int{6, 8, 9, 12, 13, 14, 15}, lines)
	})
	t.Run("fn error stops", func(t *testing.T) {
		t.Parallel()
		stop := errors.New("stop")
		n := 0
		st, err := windowcsv.Read(context.Background(), bytes.NewReader(data), func(windowcsv.Row) error {
			n++
			if n == 2 {
				return stop
			}
			return nil
		})
		require.Equal(t, stop, err)
		require.Equal(t, 2, n)
		require.Equal(t, 2, st.Rows)
	})
	t.Run("header error", func(t *testing.T) {
		t.Parallel()
		_, err := windowcsv.Read(context.Background(), strings.NewReader("x\n"), func(windowcsv.Row) error { return nil })
		require.ErrorIs(t, err, windowcsv.ErrHeader)
	})
	t.Run("cancelled before", func(t *testing.T) {
		t.Parallel()
		ctx, cancel := context.WithCancel(context.Background())
		cancel()
		st, err := windowcsv.Read(ctx, bytes.NewReader(data), func(windowcsv.Row) error { return nil })
		require.ErrorIs(t, err, context.Canceled)
		require.Zero(t, st.Lines)
	})
	t.Run("cancelled while reading", func(t *testing.T) {
		t.Parallel()
		var b strings.Builder
		b.WriteString("day,metric,rate,count\n")
		for range 100000 {
			b.WriteString("2024-03-01,opens,1,1\n")
		}
		ctx, cancel := context.WithCancel(context.Background())
		defer cancel()
		n := 0
		st, err := windowcsv.Read(ctx, strings.NewReader(b.String()), func(windowcsv.Row) error {
			n++
			if n == 10 {
				cancel()
			}
			return nil
		})
		require.ErrorIs(t, err, context.Canceled)
		require.Less(t, st.Rows, 10000, "checked every few thousand lines")
		require.GreaterOrEqual(t, st.Rows, 10)
	})
}

func TestMaxErrors(t *testing.T) {
	t.Parallel()
	var b strings.Builder
	b.WriteString("day,metric,rate,count\n")
	for range 250 {
		b.WriteString("2024-03-01,opens,x,1\n2024-03-01,opens,1,1\n")
	}
	got := readAll(t, strings.NewReader(b.String()))
	require.NoError(t, got.fatal)
	require.Len(t, got.rows, 250)
	require.Len(t, got.errs, 250, "Next reports every malformed row")
	require.Equal(t, 250, got.stats.Malformed)
	require.Len(t, got.stats.Errors, windowcsv.MaxErrors)
	for i, e := range got.stats.Errors {
		require.Equal(t, 2+2*i, e.Line)
	}
}

func TestWindowsSaturate(t *testing.T) {
	t.Parallel()
	got := readAll(t, strings.NewReader("day,metric,rate,count\n2024-03-01,opens,1,18446744073709551615\n2024-03-01,opens,1,2\n"))
	require.Len(t, got.rows, 2)
	require.Equal(t, ^uint64(0), got.stats.Windows)
}

func TestStatsErrorsIsCopy(t *testing.T) {
	t.Parallel()
	rd := windowcsv.NewReader(strings.NewReader("day,metric,rate,count\nbad\n"))
	_, err := rd.Next()
	require.ErrorIs(t, err, windowcsv.ErrMalformed)
	st := rd.Stats()
	st.Errors[0] = nil
	require.NotNil(t, rd.Stats().Errors[0])
}

func TestReset(t *testing.T) {
	t.Parallel()
	rd := windowcsv.NewReader(strings.NewReader("day,metric,rate\nbad\n2024-03-01,opens,1\n"))
	_, err := rd.Next()
	require.Error(t, err)
	rd.Reset(strings.NewReader("day,metric,rate,count\n2024-03-02,opens,1,5\n"))
	require.Zero(t, rd.Offset())
	require.Equal(t, windowcsv.ReadTotals{}, rd.Stats())
	r, err := rd.Next()
	require.NoError(t, err)
	require.Equal(t, row(t, "2024-03-02", metric.Opens, 1, 5), r)
	_, err = rd.Next()
	require.Equal(t, io.EOF, err)
	require.Equal(t, 1, rd.Stats().Rows)
}

func TestOffsetConcurrent(t *testing.T) {
	t.Parallel()
	var b strings.Builder
	b.WriteString("day,metric,rate,count\n")
	for range 20000 {
		b.WriteString("2024-03-01,opens,1,1\n")
	}
	rd := windowcsv.NewReader(strings.NewReader(b.String()))
	done := make(chan struct{})
	go func() {
		defer close(done)
		var last int64
		for range 1000 {
			off := rd.Offset()
			if off < last {
				panic("offset went back")
			}
			last = off
		}
	}()
	st, err := rd.Each(t.Context(), func(windowcsv.Row) error { return nil })
	<-done
	require.NoError(t, err)
	require.Equal(t, 20000, st.Rows)
	require.Equal(t, int64(b.Len()), rd.Offset())
}

func TestConcatenatedFiles(t *testing.T) {
	t.Parallel()
	one := "# sluice window values v1\nday,metric,rate,count\n2024-03-01,opens,1,1\n"
	got := readAll(t, strings.NewReader(one+one))
	require.NoError(t, got.fatal)
	require.Len(t, got.rows, 2)
	require.Equal(t, []string{`line 5: day "day": not YYYY-MM-DD`}, got.errs)
}
