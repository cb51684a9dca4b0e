package lustre

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"time"

	"sluice/pkg/source/internal/fields"
)

// maxLine is the longest line, newline included, that Parse reads; a longer
// line is skipped and counted as malformed. Real lines are under 200 bytes,
// so the limit only bounds memory on garbage input.
const maxLine = 1024

// readSize is the read buffer. It holds a whole stats file (2.4 KB with
// every counter of 2.16), so that the Source reads a mount with one pread
// and the one that meets end of file, where a maxLine buffer took four.
const readSize = 16 << 10

// maxStampSec bounds the seconds of a timestamp so that time.Unix can
// represent it and give the same value back; real stamps are ~2^31.
const maxStampSec = 1 << 62

// maxTokens is the most whitespace-separated tokens a valid line has:
// name, count, "samples", [unit], min, max, sum, sumsq.
const maxTokens = 8

// Counter is one line of an llite stats file:
// "<name> <count> samples [<unit>] [<min> <max> <sum> [<sumsq>]]", printed by
// lprocfs_stats_seq_show in lustre/obdclass/lprocfs_status.c.
type Counter struct {
	// Name is the counter name as printed, e.g. "read_bytes" or "open".
	Name string
	// Samples is the number of events counted (calls, for most counters).
	Samples uint64
	// Unit is the unit as printed without its brackets, e.g. "bytes",
	// "usecs", "reqs" or "regs" (sic, Lustre 2.13 and older).
	Unit string
	// Fields is how many numbers followed the unit: 0 (count only),
	// 3 (min, max, sum) or 4 (min, max, sum, sumsq).
	Fields int
	// Min and Max are the smallest and largest sample; zero when Fields is 0.
	Min, Max uint64
	// Sum is the total of all samples (bytes for a bytes counter, µs for a
	// latency counter); zero when Fields is 0.
	Sum uint64
	// SumSq is the sum of squared samples; zero unless Fields is 4. It
	// overflows easily, so nothing should rely on it.
	SumSq uint64
}

// Stats is one parsed llite stats file
// (/sys/kernel/debug/lustre/llite/<inst>/stats, or /proc/fs/lustre/llite/<inst>/stats
// before Lustre 2.12).
type Stats struct {
	// SnapshotTime is when Lustre summed the counters. It is wall-clock time
	// except on 2.15.0 and 2.15.1, where it is time since boot. A missing
	// line, or one printed as 0, leaves it zero.
	SnapshotTime time.Time
	// StartTime is when the counters were created or last cleared (2.15+).
	// It is zero when the line is absent or printed as 0 (2.15.0, 2.15.1).
	StartTime time.Time
	// HasStartTime reports whether StartTime was read from the file.
	HasStartTime bool
	// Counters holds the counter lines in file order. Lustre omits counters
	// whose count is zero, so a counter that is absent is zero.
	Counters []Counter
	// Malformed counts lines that were skipped because they did not parse.
	Malformed int
}

// Lookup returns the first counter called name.
func (s Stats) Lookup(name string) (Counter, bool) {
	for _, c := range s.Counters {
		if c.Name == name {
			return c, true
		}
	}
	return Counter{}, false
}

// Raw returns the cumulative counters the agent consumes: "<name>" maps to
// Samples for every counter, and "<name>.sum" maps to Sum for counters with a
// sum (Fields >= 3) whose unit is a size ("bytes" or "pages"). Sums of
// latencies are left out because the agent counts operations and bytes, not
// time; min, max and sumsq are left out because they are not cumulative. If a
// name repeats, the later line wins.
func (s Stats) Raw() map[string]uint64 {
	m := make(map[string]uint64, len(s.Counters)+4)
	for i := range s.Counters {
		c := &s.Counters[i]
		m[c.Name] = c.Samples
		if c.Fields >= 3 && isSizeUnit(c.Unit) {
			m[sumKey(c.Name)] = c.Sum
		}
	}
	return m
}

// Parse reads one llite stats file in any layout from Lustre 2.5 to 2.17.
//
// Lines that do not parse are skipped and counted in Stats.Malformed, so one
// bad line does not lose the rest of the file. The only error is a read
// error from r, returned with whatever was parsed before it.
func Parse(r io.Reader) (Stats, error) {
	st, err := parse(bufio.NewReaderSize(r, readSize), make([]Counter, 0, 40), nil)
	if err != nil {
		return st, fmt.Errorf("lustre: reading stats: %w", err)
	}
	return st, nil
}

// parse reads lines from br and appends counters to counters[:0], so that
// the Source can reuse both the reader's buffer and the slice. memo, when
// not nil, holds the mount's last read: lines equal to their place there
// are not parsed again, and the read is recorded in it when it succeeds.
// The error is br's, unwrapped.
func parse(br *bufio.Reader, counters []Counter, m *memo) (Stats, error) {
	st := Stats{Counters: counters[:0]}
	if m != nil {
		m.begin()
	}
	for i := 0; ; i++ {
		line, err := br.ReadSlice('\n')
		switch {
		case err == bufio.ErrBufferFull || len(line) > maxLine:
			st.Malformed++
			for err == bufio.ErrBufferFull {
				_, err = br.ReadSlice('\n')
			}
			if m != nil {
				m.record(nil, nil)
			}
		case len(line) > 0 && m != nil:
			st.parseRemembered(i, line, m)
		case len(line) > 0:
			st.parseLine(line, nil, 0)
		}
		switch err {
		case nil:
		case io.EOF:
			if m != nil {
				m.commit()
			}
			return st, nil
		default:
			return st, err
		}
	}
}

// parseRemembered adds line number i to st as parseLine does, taking the
// counter from the memo when the line has not changed, and records it.
func (st *Stats) parseRemembered(i int, line []byte, m *memo) {
	if c, ok := m.lookup(i, line); ok {
		st.Counters = append(st.Counters, *c)
		m.record(line, c)
		return
	}
	n := len(st.Counters)
	st.parseLine(line, m, i)
	if len(st.Counters) > n {
		m.record(line, &st.Counters[n])
	} else {
		m.record(line, nil)
	}
}

// parseLine adds one line to st. Blank lines are ignored. A counter whose
// name is the one at line i of the memo's last read (if m is not nil)
// takes that string instead of interning it again.
func (st *Stats) parseLine(line []byte, m *memo, i int) {
	if name, rest := fields.First(line); name != nil && !isStamp(name) {
		var c Counter
		if counterAsPrinted(rest, &c) {
			st.addCounter(c, name, m, i)
			return
		}
	}
	st.parseLineSplit(line, m, i)
}

// isStamp reports whether a line's first token names a time stamp line.
func isStamp(name []byte) bool {
	switch string(name) {
	case "snapshot_time", "start_time", "elapsed_time":
		return true
	}
	return false
}

// addCounter appends c, named name, to st.
func (st *Stats) addCounter(c Counter, name []byte, m *memo, i int) {
	if s, ok := m.name(i, name); ok {
		c.Name = s
	} else {
		c.Name = internName(name)
	}
	st.Counters = append(st.Counters, c)
}

// samplesUnit is what lprocfs_stats_seq_show prints between a counter's
// count and its unit.
const samplesUnit = " samples ["

// counterAsPrinted parses what follows a counter's name if it is exactly
// as lprocfs_stats_seq_show prints it: spaces, "<count> samples [<unit>]",
// and " <min> <max> <sum>[ <sumsq>]" or nothing, each number at most 19
// digits, then '\n' or the end. For any other text it reports false and
// parseLineSplit decides; for this text both give the same counter, in
// half the time.
func counterAsPrinted(rest []byte, c *Counter) bool {
	i := 0
	for i < len(rest) && rest[i] == ' ' {
		i++
	}
	rest = rest[i:]
	j := bytes.IndexByte(rest, ' ')
	if i == 0 || j <= 0 {
		return false
	}
	var ok bool
	if c.Samples, ok = fields.ParseUint(rest[:j]); !ok {
		return false
	}
	rest, ok = bytes.CutPrefix(rest[j:], []byte(samplesUnit))
	k := bytes.IndexByte(rest, ']')
	if !ok || k <= 0 || hasSpace(rest[:k]) {
		return false
	}
	var v [4]uint64
	n, ok := fields.Uints(rest[k+1:], v[:])
	if !ok || (n != 0 && n != 3 && n != 4) {
		return false
	}
	c.Unit = internUnit(rest[:k])
	c.Fields = n
	c.Min, c.Max, c.Sum, c.SumSq = v[0], v[1], v[2], v[3]
	return true
}

// hasSpace reports whether b holds a byte fields.IsSpace accepts.
func hasSpace(b []byte) bool {
	for _, c := range b {
		if fields.IsSpace(c) {
			return true
		}
	}
	return false
}

// parseLineSplit is parseLine for any line: split into tokens first.
func (st *Stats) parseLineSplit(line []byte, m *memo, i int) {
	var tok [maxTokens + 1][]byte // one more, to tell a line that has too many
	n := fields.Split(line, tok[:])
	if n == 0 {
		return
	}
	if isStamp(tok[0]) {
		t, ok := parseStamp(tok[:n])
		if !ok {
			st.Malformed++
			return
		}
		switch string(tok[0]) {
		case "snapshot_time":
			st.SnapshotTime = t
		case "start_time":
			st.StartTime, st.HasStartTime = t, !t.IsZero()
		}
		return
	}
	c, ok := parseCounter(tok[:n])
	if !ok {
		st.Malformed++
		return
	}
	st.addCounter(c, tok[0], m, i)
}

// parseCounter parses the tokens of one counter line, all but the name.
func parseCounter(tok [][]byte) (Counter, bool) {
	var c Counter
	if len(tok) != 4 && len(tok) != 7 && len(tok) != 8 {
		return c, false
	}
	if string(tok[2]) != "samples" {
		return c, false
	}
	unit := tok[3]
	if len(unit) < 3 || unit[0] != '[' || unit[len(unit)-1] != ']' {
		return c, false
	}
	var ok bool
	if c.Samples, ok = fields.ParseUint(tok[1]); !ok {
		return c, false
	}
	c.Fields = len(tok) - 4
	if c.Fields >= 3 {
		// Lustre prints these with %lld: a '-' sign fails parseUint, which
		// is what we want, since a negative count or sum is corrupt.
		if c.Min, ok = fields.ParseUint(tok[4]); !ok {
			return c, false
		}
		if c.Max, ok = fields.ParseUint(tok[5]); !ok {
			return c, false
		}
		if c.Sum, ok = fields.ParseUint(tok[6]); !ok {
			return c, false
		}
	}
	if c.Fields == 4 {
		if c.SumSq, ok = fields.ParseUint(tok[7]); !ok {
			return c, false
		}
	}
	c.Unit = internUnit(unit[1 : len(unit)-1])
	return c, true
}

// parseStamp parses "<name> <sec>.<frac> secs.nsecs|secs.usecs". Before 2.10
// the fraction is microseconds printed with %lu, not zero-padded, so ".5" is
// 5 µs; from 2.10 it is nanoseconds printed with %09lu. Both are read as an
// integer count of the unit the line names. A stamp of 0 gives the zero Time.
func parseStamp(tok [][]byte) (time.Time, bool) {
	if len(tok) != 3 {
		return time.Time{}, false
	}
	var scale, limit uint64
	switch string(tok[2]) {
	case "secs.nsecs":
		scale, limit = 1, 1e9
	case "secs.usecs":
		scale, limit = 1e3, 1e6
	default:
		return time.Time{}, false
	}
	v := tok[1]
	dot := -1
	for i, b := range v {
		if b == '.' {
			dot = i
			break
		}
	}
	if dot < 0 {
		return time.Time{}, false
	}
	sec, ok := fields.ParseUint(v[:dot])
	if !ok || sec > maxStampSec {
		return time.Time{}, false
	}
	frac, ok := fields.ParseUint(v[dot+1:])
	if !ok || frac >= limit {
		return time.Time{}, false
	}
	if sec == 0 && frac == 0 {
		return time.Time{}, true
	}
	return time.Unix(int64(sec), int64(frac*scale)), true
}
