package windowcsv

import (
	"bufio"
	"io"
	"strconv"
)

// preamble is what a Writer puts before the first row: the version line,
// what the values mean, and the header.
const preamble = "# sluice window values v1\n" +
	"# day: UTC day the 10-minute window closed; metric: sluice metric name;\n" +
	"# rate: one job's per-node rate in that window, bytes/s for read_bytes and\n" +
	"# write_bytes, ops/s for the others; count: how many windows had that rate.\n" +
	headerCount + "\n"

// Writer writes a window-value file. Output is buffered: call
// [Writer.Flush] at the end. A Writer is not safe for concurrent use.
type Writer struct {
	bw      *bufio.Writer
	buf     []byte // one row being formatted
	started bool   // preamble written
}

// NewWriter returns a Writer to w. The comment lines and the header
// "day,metric,rate,count" go out before the first row, or at Flush if
// there are no rows, so that an empty export is still a valid file.
func NewWriter(w io.Writer) *Writer {
	return &Writer{bw: bufio.NewWriterSize(w, 64<<10), buf: make([]byte, 0, 64)}
}

// Write writes one row: the UTC calendar day of row.Day, the metric name,
// the rate as strconv.FormatFloat(rate, 'g', -1, 64) prints it (the
// shortest text that reads back as the same float64) and the count. A row
// the layout cannot hold is refused with an error wrapping
// [ErrInvalidRow], and nothing is written; the Writer stays usable. Any
// other error is the underlying writer's, and it sticks.
func (w *Writer) Write(row Row) error {
	if err := row.check(); err != nil {
		return err
	}
	if !w.started {
		w.started = true
		if _, err := w.bw.WriteString(preamble); err != nil {
			return err
		}
	}
	if row.Rate == 0 {
		row.Rate = 0 // -0 prints as "0"
	}
	b := appendDay(w.buf[:0], row.Day)
	b = append(b, ',')
	b = append(b, metricNames[row.Metric]...)
	b = append(b, ',')
	b = strconv.AppendFloat(b, row.Rate, 'g', -1, 64)
	b = append(b, ',')
	b = strconv.AppendUint(b, row.Count, 10)
	b = append(b, '\n')
	w.buf = b
	_, err := w.bw.Write(b)
	return err
}

// Flush writes the comment lines and header if no row has been written,
// then writes any buffered data to the underlying writer.
func (w *Writer) Flush() error {
	if !w.started {
		w.started = true
		if _, err := w.bw.WriteString(preamble); err != nil {
			return err
		}
	}
	return w.bw.Flush()
}
