// Package progress tells how far a long transfer has come. On a terminal
// it redraws one line in place (done, total, rate, time left) at most five
// times a second; anywhere else (a pipe, a log file) it writes a plain
// line at every tenth of the total or every ten seconds, whichever comes
// first, so that no carriage-return frames end up in a file.
//
// # Caveats
//
// The rate is the mean since the start, and is shown only once a second
// has passed: a rate over the first milliseconds (a buffer filled in one
// go) says nothing about the transfer.
package progress

import (
	"fmt"
	"io"
	"os"
	"sync"
	"time"
)

// Meter reports the progress of one transfer of a known size.
type Meter struct {
	w        io.Writer
	label    string
	total    int64
	terminal bool
	now      func() time.Time

	mu        sync.Mutex
	done      int64
	start     time.Time
	shown     time.Time // last line written
	shownPart int64     // tenths of the total reported in plain mode
	finished  bool
}

// New returns a meter writing to w. terminal says whether w is a
// terminal (see IsTerminal); now is the clock (nil: time.Now).
func New(w io.Writer, label string, total int64, terminal bool, now func() time.Time) *Meter {
	if now == nil {
		now = time.Now
	}
	t := now()
	return &Meter{w: w, label: label, total: total, terminal: terminal, now: now, start: t, shown: t}
}

// IsTerminal reports whether w is a character device, as a terminal is.
func IsTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// Reader returns r counting what is read from it into the meter.
func (m *Meter) Reader(r io.Reader) io.Reader { return &reader{r: r, m: m} }

type reader struct {
	r io.Reader
	m *Meter
}

func (r *reader) Read(p []byte) (int, error) {
	n, err := r.r.Read(p)
	r.m.Add(int64(n))
	return n, err
}

// Add counts n more bytes and writes a line if one is due.
func (m *Meter) Add(n int64) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.finished {
		return
	}
	m.done += n
	now := m.now()
	if m.terminal {
		if now.Sub(m.shown) >= 200*time.Millisecond {
			fmt.Fprintf(m.w, "\r%s\x1b[K", m.line(now))
			m.shown = now
		}
		return
	}
	part := int64(0)
	if m.total > 0 {
		part = 10 * m.done / m.total
	}
	if part > m.shownPart || now.Sub(m.shown) >= 10*time.Second {
		fmt.Fprintln(m.w, m.line(now))
		m.shown, m.shownPart = now, part
	}
}

// Done writes the final line: the whole transfer, its time and mean rate.
func (m *Meter) Done() {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.finished {
		return
	}
	m.finished = true
	now := m.now()
	el := now.Sub(m.start)
	line := fmt.Sprintf("%s: %s in %s", m.label, size(m.done), el.Round(100*time.Millisecond))
	if el > 0 {
		line += fmt.Sprintf(", %s/s", size(int64(float64(m.done)/el.Seconds())))
	}
	if m.terminal {
		fmt.Fprintf(m.w, "\r%s\x1b[K\n", line)
		return
	}
	fmt.Fprintln(m.w, line)
}

// line is the progress now: done of total (percent), rate and time left
// once a second has passed.
func (m *Meter) line(now time.Time) string {
	s := fmt.Sprintf("%s: %s", m.label, size(m.done))
	if m.total > 0 {
		s += fmt.Sprintf(" of %s (%d%%)", size(m.total), 100*m.done/m.total)
	}
	el := now.Sub(m.start)
	if el < time.Second || m.done == 0 {
		return s
	}
	rate := float64(m.done) / el.Seconds()
	s += fmt.Sprintf(", %s/s", size(int64(rate)))
	if m.total > m.done {
		left := time.Duration(float64(m.total-m.done) / rate * float64(time.Second))
		s += fmt.Sprintf(", %s left", max(left.Round(time.Second), time.Second))
	}
	return s
}

// size writes a byte count with a binary prefix: 512 B, 1.5 MiB.
func size(n int64) string {
	const unit = 1024
	if n < unit {
		return fmt.Sprintf("%d B", n)
	}
	v, p := float64(n)/unit, 0
	for v >= unit && p < 4 {
		v /= unit
		p++
	}
	return fmt.Sprintf("%.1f %ciB", v, "KMGTP"[p])
}
