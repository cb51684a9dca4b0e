package nfs

import "bytes"

// opMemo keeps one mount slot's per-op lines from the last parse, so that
// a line that has not changed costs a compare instead of a parse: from one
// interval to the next a mount's client calls a few of its procedures, and
// every other line is printed as it was. Line i of the last parse is the
// line that added op i; a parse that replaced an earlier op's numbers (a
// name printed twice) is not kept, since its ops no longer match its lines
// one to one.
type opMemo struct {
	last, next opLines
}

// opLines is one parse's op lines in one buffer: line i is
// text[ends[i-1]:ends[i]].
type opLines struct {
	text  []byte
	ends  []int
	valid bool
}

// begin starts recording a parse of the slot.
func (m *opMemo) begin() {
	m.next.text, m.next.ends, m.next.valid = m.next.text[:0], m.next.ends[:0], true
}

// same reports whether line is line i of the last parse.
func (m *opMemo) same(i int, line []byte) bool {
	if !m.last.valid || i >= len(m.last.ends) {
		return false
	}
	start := 0
	if i > 0 {
		start = m.last.ends[i-1]
	}
	return bytes.Equal(m.last.text[start:m.last.ends[i]], line)
}

// record adds the line that added the next op.
func (m *opMemo) record(line []byte) {
	m.next.text = append(m.next.text, line...)
	m.next.ends = append(m.next.ends, len(m.next.text))
}

// spoil marks this parse as not to be kept.
func (m *opMemo) spoil() { m.next.valid = false }

// commit makes the recorded parse the one the next parse compares with.
func (m *opMemo) commit() { m.last, m.next = m.next, m.last }
