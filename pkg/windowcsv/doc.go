// Package windowcsv reads and writes window-value files: the CSV layout in
// which "aggregator baseline import" seeds the per-metric distributions of
// window values and "aggregator baseline export" dumps them.
//
// A window value is one job's per-node rate of one metric in one closed
// 10-minute window, in the metric's unit per second (bytes/s for
// read_bytes and write_bytes, ops/s for the others; see [metric.ID.Unit]).
// The layout is this project's own; no outside tool defines it.
//
// # Basics
//
// [NewReader] streams rows out of an [io.Reader]: [Reader.Next] returns one
// [Row] at a time, and [Reader.Each] (or the shorthand [Read]) calls a
// function for every good row until the end of the input. A malformed row
// is not fatal: it comes back as a [*RowError] carrying its line number
// and reason, it is counted in [ReadTotals] (the first [MaxErrors] are kept),
// and reading goes on with the next line. Only a missing or wrong header
// ([ErrHeader]), a read error from the underlying reader, a cancelled
// context or an error from the caller's function stop the reader.
// [Reader.Offset] says how many bytes have been consumed, for a progress
// bar over a file of known size.
//
// [NewWriter] writes the same layout: a version comment, a comment saying
// what the values mean, the header, then one line per [Writer.Write].
// Rates are printed with strconv.FormatFloat(v, 'g', -1, 64), the shortest
// text that parses back to the same float64, so reading an export gives
// back exactly the rows (and so the sketch bins) that were written.
//
// # Layout
//
// The file is UTF-8 text, one record per line, fields separated by commas:
//
//	# sluice window values v1
//	# day: UTC day the window closed; metric: sluice metric name; ...
//	day,metric,rate,count
//	2024-03-01,read_bytes,1.5e+09,3
//	2024-03-01,creates,120.25,1
//	2024-03-02,write_bytes,0,12
//
// Lines:
//   - A line whose first byte is '#' is a comment, wherever it appears.
//     Empty lines and lines of only spaces and tabs are ignored. A line
//     may end in "\n" or "\r\n", and the last line needs no line end. A
//     UTF-8 byte order mark at the very start of the file is skipped.
//   - The first line that is not a comment or blank is the header, exactly
//     "day,metric,rate,count" or "day,metric,rate": the columns are fixed
//     and in this order, and only count may be left out. Without a count
//     column every row stands for one window. A file without that header
//     (empty, only comments, other names, other order) is refused with
//     [ErrHeader].
//   - Every other line is a row with as many fields as the header. Fields
//     are taken verbatim: no spaces around commas, no quoting. A '"'
//     anywhere in a row makes it malformed, since quoted fields are not
//     part of the layout; none of the four fields ever needs a comma.
//   - A line over 64 KiB is malformed (as a header, fatal).
//
// Fields:
//   - day: the UTC calendar day the window closed, exactly YYYY-MM-DD
//     (years 0000 to 9999). The day must exist: 2024-02-29 is a day,
//     2023-02-29 and 2024-04-31 are not.
//   - metric: a metric name as [metric.ID.String] prints it (read_bytes,
//     write_bytes, read_ops, write_ops, opens, closes, creates, removes,
//     stat_ops, meta_updates, syncs, other_ops); case matters. An unknown
//     name makes the row malformed.
//   - rate: a finite, non-negative number in strconv.ParseFloat syntax, so
//     "1500", "1.5e9", "0.25", ".5" and "0x1p-2" are all accepted; "NaN",
//     "Inf", "-1" and values beyond float64 are not. "-0" reads as 0.
//   - count: how many windows had that rate, a decimal integer from 1 to
//     2^64-1 with no sign.
//
// A malformed row's [RowError] prints as, for example,
//
//	line 17: rate "abc": not a number
//	line 18: day "2023-02-29": no such day
//	line 19: 3 fields, want 4: "2024-03-01,read_bytes,5"
//
// # Caveats
//
//   - Rows are returned in file order; the reader neither sorts nor merges
//     them, so the same (day, metric, rate) may come back more than once,
//     and whoever builds a distribution from them adds their counts.
//   - Line numbers count every line from 1, comments and blank lines
//     included, so they match what an editor shows.
//   - The "# sluice window values v1" line is a comment like any other: the
//     reader does not check it. A file from a newer Sluice with a metric
//     this build does not know gives one malformed row per such row, not a
//     fatal error.
//   - Files joined with cat keep every header but the first as a row, which
//     is reported malformed (day "day": not YYYY-MM-DD) and skipped.
//   - A row stands for Count windows with the same rate; it does not say
//     which jobs or nodes they came from.
//   - [Row.Day] is a [time.Time] at UTC midnight. The writer prints the UTC
//     calendar day of whatever time it is given and drops the time of day.
//   - [ReadTotals.Windows] stops at 2^64-1 instead of wrapping.
//   - Offset counts the bytes of the lines parsed so far, not the bytes the
//     reader has buffered ahead; it reaches the file size at the end.
package windowcsv
