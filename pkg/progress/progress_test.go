package progress_test

import (
	"bytes"
	"io"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/progress"
)

// clock is a fake clock the test moves by hand.
type clock struct{ t time.Time }

func (c *clock) now() time.Time         { return c.t }
func (c *clock) step(d time.Duration)   { c.t = c.t.Add(d) }
func newClock() *clock                  { return &clock{t: time.Date(2026, 12, 3, 10, 0, 0, 0, time.UTC)} }
func chunk(n int) io.Reader             { return bytes.NewReader(make([]byte, n)) }
func readAll(t *testing.T, r io.Reader) { _, err := io.Copy(io.Discard, r); require.NoError(t, err) }

// In a pipe: plain lines only, one per tenth of the total, no carriage
// returns or escape sequences, and a rate only once a second has passed.
func TestPipeWritesPlainLines(t *testing.T) {
	var out bytes.Buffer
	c := newClock()
	m := progress.New(&out, "importing w.csv", 1000, false, c.now)
	for range 20 {
		c.step(100 * time.Millisecond)
		readAll(t, m.Reader(chunk(50)))
	}
	m.Done()
	text := out.String()
	assert.NotContains(t, text, "\r")
	assert.NotContains(t, text, "\x1b")
	lines := strings.Split(strings.TrimSpace(text), "\n")
	require.Len(t, lines, 11, "ten tenths and the final line:\n%s", text)
	assert.Equal(t, "importing w.csv: 100 B of 1000 B (10%)", lines[0], "no rate before a second has passed")
	assert.Equal(t, "importing w.csv: 500 B of 1000 B (50%), 500 B/s, 1s left", lines[4])
	assert.Equal(t, "importing w.csv: 1000 B in 2s, 500 B/s", lines[10])
}

// In a pipe, a slow transfer still says something every ten seconds.
func TestPipeReportsSlowTransfers(t *testing.T) {
	var out bytes.Buffer
	c := newClock()
	m := progress.New(&out, "x", 1<<30, false, c.now)
	for range 30 {
		c.step(time.Second)
		m.Add(1024)
	}
	assert.Equal(t, 3, strings.Count(out.String(), "\n"), out.String())
}

// On a terminal: one line redrawn in place, at most five times a second,
// ending with a newline.
func TestTerminalRedrawsOneLine(t *testing.T) {
	var out bytes.Buffer
	c := newClock()
	m := progress.New(&out, "x", 1000, true, c.now)
	for range 100 {
		c.step(10 * time.Millisecond)
		m.Add(10)
	}
	m.Done()
	text := out.String()
	assert.Equal(t, 1, strings.Count(text, "\n"))
	assert.True(t, strings.HasSuffix(text, "\n"))
	frames := strings.Count(text, "\r")
	assert.LessOrEqual(t, frames, 1+5+1, "one second of 10 ms steps draws at most 5 frames and the last")
	assert.Contains(t, text, "x: 1000 B in 1s, 1000 B/s")
}

func TestSizes(t *testing.T) {
	var out bytes.Buffer
	c := newClock()
	m := progress.New(&out, "x", 0, false, c.now)
	c.step(2 * time.Second)
	m.Add(3 << 20)
	m.Done()
	assert.Contains(t, out.String(), "x: 3.0 MiB in 2s, 1.5 MiB/s")
}
