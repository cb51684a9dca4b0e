package windowcsv

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"
	"sync/atomic"
	"time"
)

// MaxErrors is how many row errors [ReadTotals.Errors] keeps; later ones are
// only counted in [ReadTotals.Malformed].
const MaxErrors = 100

// maxLine is the longest line the reader parses, line end included; it is
// also the size of the read buffer.
const maxLine = 64 << 10

// checkEvery is how many lines [Reader.Each] reads between looks at its
// context.
const checkEvery = 4096

// The header lines, with and without the count column.
const (
	headerCount   = "day,metric,rate,count"
	headerNoCount = "day,metric,rate"
)

// ErrHeader is wrapped by the fatal error a [Reader] returns when the input
// does not start (after comments and blank lines) with the header line
// "day,metric,rate,count" or "day,metric,rate".
var ErrHeader = errors.New("windowcsv: bad header")

// ErrMalformed matches every [*RowError] under [errors.Is], so that callers
// can tell a skipped row from a fatal error without a type assertion.
var ErrMalformed = errors.New("windowcsv: malformed row")

// RowError describes one malformed row. Reading goes on after it.
type RowError struct {
	// Line is the 1-based line number of the row in the input.
	Line int
	// Column is the column whose field is wrong: "day", "metric", "rate"
	// or "count". It is empty when the row as a whole is wrong (wrong
	// number of fields, a quote character, a line too long).
	Column string
	// Value is the offending field, or the whole line when Column is
	// empty, cut to its first 64 bytes.
	Value string
	// Reason says what is wrong, e.g. "not a number" or "no such day".
	Reason string
}

// maxValue is how much of a bad field or line a RowError keeps.
const maxValue = 64

// Error returns, for example, `line 17: rate "abc": not a number`, or for
// a whole-row error `line 19: 3 fields, want 4: "2024-03-01,read_bytes,5"`.
func (e *RowError) Error() string {
	if e.Column != "" {
		return fmt.Sprintf("line %d: %s %q: %s", e.Line, e.Column, e.Value, e.Reason)
	}
	return fmt.Sprintf("line %d: %s: %q", e.Line, e.Reason, e.Value)
}

// Is reports whether target is [ErrMalformed].
func (e *RowError) Is(target error) bool { return target == ErrMalformed }

// ReadTotals counts what a [Reader] has read so far.
type ReadTotals struct {
	// Lines is the number of lines read: comments, blank lines, the
	// header and rows, good or not.
	Lines int
	// Rows is the number of good rows returned.
	Rows int
	// Windows is the sum of the good rows' counts (stopping at 2^64-1).
	Windows uint64
	// Malformed is the number of malformed rows skipped.
	Malformed int
	// Errors holds the first MaxErrors malformed rows, in file order.
	Errors []*RowError
}

// Reader reads rows of a window-value file from an [io.Reader]. It reads
// ahead in blocks of 64 KiB, so the underlying reader is not left at the
// end of the last row returned.
//
// A Reader is not safe for concurrent use, except for [Reader.Offset],
// which may be called from any goroutine while another reads.
type Reader struct {
	br  *bufio.Reader
	off atomic.Int64 // bytes of the lines consumed so far
	err error        // sticky: io.EOF or a fatal error

	header  bool // header read
	columns int  // 3 or 4, from the header
	line    int  // number of the last line read
	stats   ReadTotals

	// The last day parsed, as text and as a time: rows come grouped by
	// day, so most days are a 10-byte compare.
	dayText [10]byte
	day     time.Time
	dayOK   bool
}

// NewReader returns a Reader over r. Nothing is read until the first call
// to [Reader.Next] or [Reader.Each].
func NewReader(r io.Reader) *Reader {
	return &Reader{br: bufio.NewReaderSize(r, maxLine)}
}

// Reset makes rd read from r as if it had just been returned by NewReader,
// keeping its buffer: reading many files with one Reader allocates nothing
// per file.
func (rd *Reader) Reset(r io.Reader) {
	rd.br.Reset(r)
	rd.off.Store(0) // not a struct copy: Offset may be running
	rd.err, rd.header, rd.columns, rd.line = nil, false, 0, 0
	rd.stats = ReadTotals{}
	rd.dayOK = false
}

// Offset returns how many bytes of the input the rows returned so far
// (with the comments, blank lines and malformed rows among them) took.
// It is safe to call from another goroutine while one reads, e.g. from a
// progress bar's ticker; at the end of the input it is the input's size.
func (rd *Reader) Offset() int64 { return rd.off.Load() }

// Stats returns the counts so far. The Errors slice is a copy.
func (rd *Reader) Stats() ReadTotals {
	s := rd.stats
	s.Lines = rd.line
	s.Errors = slices.Clone(s.Errors)
	return s
}

// HasCount reports whether the header has the count column; before the
// header has been read it reports false.
func (rd *Reader) HasCount() bool { return rd.columns == 4 }

// Next returns the next good row. At the end of the input it returns
// io.EOF. A malformed row gives a zero Row and a [*RowError] (matching
// [ErrMalformed]); the next call goes on with the line after it. A
// missing or wrong header (wrapping [ErrHeader]) and a read error of the
// underlying reader are fatal: Next returns the same error from then on.
func (rd *Reader) Next() (Row, error) {
	if rd.err != nil {
		return Row{}, rd.err
	}
	if !rd.header {
		if err := rd.readHeader(); err != nil {
			rd.err = err
			return Row{}, err
		}
	}
	for {
		line, err := rd.readLine()
		if err != nil {
			if err == errTooLong {
				return Row{}, rd.malformed(&RowError{Line: rd.line, Value: clip(line), Reason: reasonLineTooLong})
			}
			rd.err = err
			return Row{}, err
		}
		if skip(line) {
			continue
		}
		row, rerr := rd.parseRow(line)
		if rerr != nil {
			return Row{}, rd.malformed(rerr)
		}
		rd.stats.Rows++
		if w := rd.stats.Windows + row.Count; w >= row.Count {
			rd.stats.Windows = w
		} else {
			rd.stats.Windows = ^uint64(0)
		}
		return row, nil
	}
}

// Each calls fn for every good row until the end of the input and returns
// the counts. Malformed rows are skipped and counted; it stops at the
// first fatal error (see [Reader.Next]), the first error fn returns
// (returned as it is), or when ctx is done (its error is returned), which
// it checks every few thousand lines. The end of the input gives a nil
// error.
func (rd *Reader) Each(ctx context.Context, fn func(Row) error) (ReadTotals, error) {
	if err := ctx.Err(); err != nil {
		return rd.Stats(), err
	}
	next := rd.line + checkEvery
	for {
		if rd.line >= next {
			if err := ctx.Err(); err != nil {
				return rd.Stats(), err
			}
			next = rd.line + checkEvery
		}
		row, err := rd.Next()
		if err != nil {
			if errors.Is(err, ErrMalformed) {
				continue
			}
			if err == io.EOF {
				err = nil
			}
			return rd.Stats(), err
		}
		if err := fn(row); err != nil {
			return rd.Stats(), err
		}
	}
}

// Read reads a whole window-value file from r, calling fn for every good
// row; it is NewReader(r).Each(ctx, fn).
func Read(ctx context.Context, r io.Reader, fn func(Row) error) (ReadTotals, error) {
	return NewReader(r).Each(ctx, fn)
}

// errTooLong is readLine's report of a line over maxLine, which it has
// skipped; the line it returns with it is the line's start.
var errTooLong = errors.New("line too long")

// readLine returns the next line without its "\n" or "\r\n". The line
// aliases the read buffer and is valid until the next call. A line over
// maxLine is skipped to its end and returned cut, with errTooLong. At the
// end of the input it returns io.EOF; any other error is the underlying
// reader's.
func (rd *Reader) readLine() ([]byte, error) {
	line, err := rd.br.ReadSlice('\n')
	switch {
	case err == nil:
		rd.line++
		rd.off.Add(int64(len(line)))
		line = line[:len(line)-1]
		if n := len(line); n > 0 && line[n-1] == '\r' {
			line = line[:n-1]
		}
		return line, nil
	case err == io.EOF && len(line) > 0: // last line, no line end
		rd.line++
		rd.off.Add(int64(len(line)))
		if n := len(line); line[n-1] == '\r' {
			line = line[:n-1]
		}
		return line, nil
	case err == bufio.ErrBufferFull:
		rd.line++
		rd.off.Add(int64(len(line)))
		start := clip(line)
		for err == bufio.ErrBufferFull {
			line, err = rd.br.ReadSlice('\n')
			rd.off.Add(int64(len(line)))
		}
		if err != nil && err != io.EOF {
			return nil, fmt.Errorf("windowcsv: line %d: %w", rd.line, err)
		}
		return []byte(start), errTooLong
	case err == io.EOF:
		return nil, io.EOF
	default:
		// A partial line before a read error is dropped: it may be cut.
		return nil, fmt.Errorf("windowcsv: after line %d: %w", rd.line, err)
	}
}

// skip reports whether line is a comment or blank.
func skip(line []byte) bool {
	if len(line) == 0 || line[0] == '#' {
		return true
	}
	for _, c := range line {
		if c != ' ' && c != '\t' {
			return false
		}
	}
	return true
}

// readHeader reads up to and including the header line.
func (rd *Reader) readHeader() error {
	for {
		line, err := rd.readLine()
		if err == errTooLong {
			return fmt.Errorf("%w: line %d: %s, want %q", ErrHeader, rd.line, reasonLineTooLong, headerCount)
		}
		if err == io.EOF {
			return fmt.Errorf("%w: no header line %q (empty input or only comments)", ErrHeader, headerCount)
		}
		if err != nil {
			return err
		}
		if rd.line == 1 {
			line = bytes.TrimPrefix(line, []byte("\uFEFF"))
		}
		if skip(line) {
			continue
		}
		switch string(line) {
		case headerCount:
			rd.columns = 4
		case headerNoCount:
			rd.columns = 3
		default:
			return fmt.Errorf("%w: line %d is %q, want %q or %q", ErrHeader, rd.line, clip(line), headerCount, headerNoCount)
		}
		rd.header = true
		return nil
	}
}

// parseRow parses one row that is neither blank nor a comment.
func (rd *Reader) parseRow(line []byte) (Row, *RowError) {
	if bytes.IndexByte(line, '"') >= 0 {
		return Row{}, &RowError{Line: rd.line, Value: clip(line), Reason: reasonQuote}
	}
	var f [4][]byte
	n := 0
	for rest := line; ; {
		i := bytes.IndexByte(rest, ',')
		if n < len(f) {
			if i < 0 {
				f[n] = rest
			} else {
				f[n] = rest[:i]
			}
		}
		n++
		if i < 0 {
			break
		}
		rest = rest[i+1:]
	}
	if n != rd.columns {
		return Row{}, &RowError{Line: rd.line, Value: clip(line),
			Reason: strconv.Itoa(n) + " fields, want " + strconv.Itoa(rd.columns)}
	}
	for i := range n {
		if len(f[i]) == 0 {
			return Row{}, rd.fieldError(i, f[i], reasonEmpty)
		}
	}

	var row Row
	if rd.dayOK && string(f[0]) == string(rd.dayText[:]) {
		row.Day = rd.day
	} else {
		d, why := parseDay(f[0])
		if why != "" {
			return Row{}, rd.fieldError(0, f[0], why)
		}
		copy(rd.dayText[:], f[0])
		rd.day, rd.dayOK = d, true
		row.Day = d
	}
	var ok bool
	if row.Metric, ok = parseMetric(f[1]); !ok {
		return Row{}, rd.fieldError(1, f[1], reasonMetric)
	}
	var why string
	if row.Rate, why = parseRate(f[2]); why != "" {
		return Row{}, rd.fieldError(2, f[2], why)
	}
	row.Count = 1
	if n == 4 {
		if row.Count, why = parseCount(f[3]); why != "" {
			return Row{}, rd.fieldError(3, f[3], why)
		}
	}
	return row, nil
}

// columnNames names the columns in their fixed order.
var columnNames = [4]string{"day", "metric", "rate", "count"}

func (rd *Reader) fieldError(col int, value []byte, why string) *RowError {
	return &RowError{Line: rd.line, Column: columnNames[col], Value: clip(value), Reason: why}
}

// malformed counts e, keeps it if there is room, and returns it.
func (rd *Reader) malformed(e *RowError) error {
	rd.stats.Malformed++
	if len(rd.stats.Errors) < MaxErrors {
		rd.stats.Errors = append(rd.stats.Errors, e)
	}
	return e
}

// clip copies at most maxValue bytes of b into a string.
func clip(b []byte) string {
	if len(b) > maxValue {
		b = b[:maxValue]
	}
	return string(b)
}
