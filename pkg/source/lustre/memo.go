package lustre

import "bytes"

// memo keeps one mount's lines from its last read with the counter each
// parsed to, so that a line that has not changed costs a compare instead
// of a parse. From one interval to the next most lines do not change: a job
// uses a few of a client's counters, and a mount that no job is using
// changes only in its time stamps. Parsing a line depends on nothing but
// its bytes, so a line equal to the one at its place last time parses to
// the same counter.
type memo struct {
	last, next memoRead
}

// memoRead is one read's lines, copied into one buffer, by line number.
type memoRead struct {
	text  []byte
	lines []memoLine
}

// memoLine is where one line is in its read's text, and its counter if it
// was a counter line (stamps change at every read and are parsed anyway;
// malformed lines are rare).
type memoLine struct {
	start, end int
	isCounter  bool
	c          Counter
}

// begin starts recording a read.
func (m *memo) begin() {
	m.next.text = m.next.text[:0]
	m.next.lines = m.next.lines[:0]
}

// lookup returns the counter of line number i of the last read if line is
// that line, byte for byte, and the line was a counter.
func (m *memo) lookup(i int, line []byte) (*Counter, bool) {
	if i >= len(m.last.lines) {
		return nil, false
	}
	l := &m.last.lines[i]
	if !l.isCounter || !bytes.Equal(m.last.text[l.start:l.end], line) {
		return nil, false
	}
	return &l.c, true
}

// name returns the counter name at line number i of the last read if it
// is name, so that a changed line of an unchanged counter reuses the
// string instead of interning it again. A nil memo has no names.
func (m *memo) name(i int, name []byte) (string, bool) {
	if m == nil || i >= len(m.last.lines) || !m.last.lines[i].isCounter || m.last.lines[i].c.Name != string(name) {
		return "", false
	}
	return m.last.lines[i].c.Name, true
}

// maxMemo bounds the text a memo keeps: a stats file is a few KB, but a
// Source can be pointed at any directory, and the lines past the bound are
// only parsed, not remembered.
const maxMemo = 256 << 10

// record adds line number len(next.lines) with what it parsed to: c, or
// nil for a line that was not a counter.
func (m *memo) record(line []byte, c *Counter) {
	if len(m.next.text)+len(line) > maxMemo {
		line, c = nil, nil // kept as a line that never matches
	}
	start := len(m.next.text)
	m.next.text = append(m.next.text, line...)
	l := memoLine{start: start, end: len(m.next.text), isCounter: c != nil}
	if c != nil {
		l.c = *c
	}
	m.next.lines = append(m.next.lines, l)
}

// commit makes the recorded read the one the next read compares with.
func (m *memo) commit() { m.last, m.next = m.next, m.last }
