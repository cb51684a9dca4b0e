package jobio

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"

	"sluice/pkg/source/internal/fields"
)

// maxLine is the longest line, newline included, that ParseProcIO and
// ParseIOStat read; a longer line is skipped and counted as malformed. Real
// lines are under 100 bytes (io) and a few hundred (io.stat with iocost
// keys), so the limit only bounds memory on garbage input.
const maxLine = 4096

// maxStat is the most of /proc/<pid>/stat that ParseProcStat reads. The
// kernel's line is under 1 KiB (52 numbers and a comm of at most 15 bytes,
// TASK_COMM_LEN in include/linux/sched.h).
const maxStat = 4096

// ErrMalformed means a /proc/<pid>/stat file did not have the layout
// do_task_stat prints (fs/proc/array.c): "<pid> (<comm>) <state> <ppid> ...".
var ErrMalformed = errors.New("malformed /proc/<pid>/stat")

// ProcIO is one /proc/<pid>/io file: the I/O of a process (its live threads,
// its exited threads and every child it has reaped), printed by
// do_io_accounting in fs/proc/base.c and described in
// Documentation/filesystems/proc.rst ("/proc/<pid>/io - Display the IO
// accounting fields").
type ProcIO struct {
	// RChar is the bytes passed to read(2) and similar calls, whether they
	// came from storage, the page cache, a pipe or a tty.
	RChar uint64
	// WChar is the bytes passed to write(2) and similar calls.
	WChar uint64
	// SyscR is the number of read-family system calls.
	SyscR uint64
	// SyscW is the number of write-family system calls.
	SyscW uint64
	// ReadBytes is the bytes the process caused to be fetched from storage.
	ReadBytes uint64
	// WriteBytes is the bytes the process caused to be sent to storage,
	// counted when pages are dirtied.
	WriteBytes uint64
	// CancelledWriteBytes is the dirty page cache the process truncated away
	// before it was written back.
	CancelledWriteBytes uint64
	// Malformed counts the lines that were skipped because they were not
	// "<key>: <unsigned number>".
	Malformed int
}

// procIO field indexes, in the order do_io_accounting prints them. The
// Source keeps per-process values as [nProcIO]uint64 in this order.
const (
	ioRChar = iota
	ioWChar
	ioSyscR
	ioSyscW
	ioReadBytes
	ioWriteBytes
	ioCancelled
	nProcIO
)

// allProcIO is the mask of a file in which all seven keys were seen.
const allProcIO = 1<<nProcIO - 1

// procIOKey returns the field index of a /proc/<pid>/io key, or -1.
func procIOKey(k []byte) int {
	switch string(k) {
	case "rchar":
		return ioRChar
	case "wchar":
		return ioWChar
	case "syscr":
		return ioSyscR
	case "syscw":
		return ioSyscW
	case "read_bytes":
		return ioReadBytes
	case "write_bytes":
		return ioWriteBytes
	case "cancelled_write_bytes":
		return ioCancelled
	}
	return -1
}

// ParseProcIO reads one /proc/<pid>/io file.
//
// Each line is "<key>: <value>". The seven keys of do_io_accounting are
// kept; lines with other keys are ignored, so a kernel that adds a key
// still parses. A line that is not "<key>: <unsigned number>" is skipped
// and counted in ProcIO.Malformed; blank lines are ignored. If a key
// repeats, the later line wins. The only error is a read error from r,
// returned with whatever was parsed before it.
func ParseProcIO(r io.Reader) (ProcIO, error) {
	var p procIOParser
	err := eachLine(r, p.line, func() { p.malformed++ })
	return p.result(), wrapRead("/proc/<pid>/io", err)
}

// procIOParser accumulates the lines of one /proc/<pid>/io file.
type procIOParser struct {
	v         [nProcIO]uint64
	seen      uint8
	malformed int
}

// line parses one line (without its newline).
func (p *procIOParser) line(line []byte) {
	line = trimSpace(line)
	if len(line) == 0 {
		return
	}
	colon := bytes.IndexByte(line, ':')
	if colon <= 0 {
		p.malformed++
		return
	}
	v, ok := fields.ParseUint(trimSpace(line[colon+1:]))
	key := trimSpace(line[:colon])
	if !ok || len(key) == 0 {
		p.malformed++
		return
	}
	if i := procIOKey(key); i >= 0 {
		p.v[i] = v
		p.seen |= 1 << i
	}
}

// result returns the parsed file as a ProcIO.
func (p *procIOParser) result() ProcIO {
	return ProcIO{
		RChar: p.v[ioRChar], WChar: p.v[ioWChar],
		SyscR: p.v[ioSyscR], SyscW: p.v[ioSyscW],
		ReadBytes: p.v[ioReadBytes], WriteBytes: p.v[ioWriteBytes],
		CancelledWriteBytes: p.v[ioCancelled],
		Malformed:           p.malformed,
	}
}

// parseProcIOBytes parses a /proc/<pid>/io file held in b, without
// allocating. seen has bit i set for each field index i that was present.
func parseProcIOBytes(b []byte) (v [nProcIO]uint64, seen uint8, malformed int) {
	if v, ok := parseProcIOExact(b); ok {
		return v, allProcIO, 0
	}
	var p procIOParser
	eachLineBytes(b, p.line, func() { p.malformed++ })
	return p.v, p.seen, p.malformed
}

// procIOPrefixes are the starts of the lines of /proc/<pid>/io as
// do_io_accounting prints them (fs/proc/base.c), in its order.
var procIOPrefixes = [nProcIO]string{
	"rchar: ", "wchar: ", "syscr: ", "syscw: ",
	"read_bytes: ", "write_bytes: ", "cancelled_write_bytes: ",
}

// parseProcIOExact parses b if it is exactly what do_io_accounting prints:
// the seven lines in order, each "<key>: <decimal>\n" with at most 19
// digits, and nothing else. The general parser reads such a file to the
// same values, with every key seen and nothing malformed; ok is false for
// any other input, which the general parser then reads.
func parseProcIOExact(b []byte) (v [nProcIO]uint64, ok bool) {
	for i, prefix := range procIOPrefixes {
		if len(b) < len(prefix) || string(b[:len(prefix)]) != prefix {
			return v, false
		}
		b = b[len(prefix):]
		x, n := fields.Digits(b)
		if n == 0 || n == len(b) || b[n] != '\n' {
			return v, false
		}
		v[i] = x
		b = b[n+1:]
	}
	return v, len(b) == 0
}

// IOStatLine is one line of a cgroup v2 io.stat file: one block device's
// I/O by the cgroup and its descendants, printed by blkcg_print_one_stat in
// block/blk-cgroup.c and described in Documentation/admin-guide/cgroup-v2.rst
// ("io.stat").
//
// The line is "MAJ:MIN rbytes=.. wbytes=.. rios=.. wios=.. dbytes=.. dios=..",
// possibly followed by more key=value tokens (use_delay and delay_nsec when
// blkcg debug stats are on; the iolatency and iocost policies' keys). The
// six keys are printed only when rbytes, wbytes, rios or wios is nonzero, so
// a bare "MAJ:MIN " line means zeros.
type IOStatLine struct {
	// Device is the first token as printed, normally "MAJ:MIN".
	Device string
	// Major and Minor are the device numbers. They are zero when Device is
	// not "MAJ:MIN" or is "0:0" (major 0 has no block devices), which
	// counts as one malformed token.
	Major, Minor uint32
	// RBytes and WBytes are bytes read and written.
	RBytes, WBytes uint64
	// RIOs and WIOs are read and write requests.
	RIOs, WIOs uint64
	// DBytes and DIOs are bytes and requests discarded.
	DBytes, DIOs uint64
	// Extra holds the other key=value tokens with their values as printed
	// (some are not integers: iocost prints "cost.vrate=100.00"); nil when
	// there are none. If a key repeats, the later token wins.
	Extra map[string]string
	// Malformed counts the tokens that were skipped: a token without '=' or
	// with an empty key or value, one of the six keys with a value that is
	// not an unsigned number, and a device that is not "MAJ:MIN".
	Malformed int
}

// io.stat field indexes, in the order blkcg_print_one_stat prints them.
// The Source keeps per-cgroup sums as [nIOStat]uint64 in this order.
const (
	statRBytes = iota
	statWBytes
	statRIOs
	statWIOs
	statDBytes
	statDIOs
	nIOStat
)

// ioStatKey returns the field index of an io.stat key, or -1.
func ioStatKey(k []byte) int {
	switch string(k) {
	case "rbytes":
		return statRBytes
	case "wbytes":
		return statWBytes
	case "rios":
		return statRIOs
	case "wios":
		return statWIOs
	case "dbytes":
		return statDBytes
	case "dios":
		return statDIOs
	}
	return -1
}

// ParseIOStat reads one cgroup v2 io.stat file, one IOStatLine per
// non-blank line in file order (the kernel does not sort them).
//
// Tokens are split on blanks and read generically as key=value, so extra
// keys from debug stats or other I/O policies are kept in Extra rather than
// rejected. A bad token is skipped and counted in its line's Malformed; a
// line longer than 4 KiB yields an IOStatLine with only Malformed set. The
// only error is a read error from r, returned with the lines parsed before
// it.
func ParseIOStat(r io.Reader) ([]IOStatLine, error) {
	var lines []IOStatLine
	err := eachLine(r, func(line []byte) {
		if l, ok := parseIOStatLine(line, true); ok {
			lines = append(lines, l)
		}
	}, func() { lines = append(lines, IOStatLine{Malformed: 1}) })
	return lines, wrapRead("io.stat", err)
}

// parseIOStatLine parses one io.stat line. ok is false for a blank line.
// With extra false, unknown keys are not copied into Extra, so that nothing
// is allocated except Device, which is then left empty too.
func parseIOStatLine(line []byte, extra bool) (l IOStatLine, ok bool) {
	first := true
	var v [nIOStat]uint64
	for len(line) > 0 {
		var tok []byte
		tok, line = nextToken(line)
		if tok == nil {
			break
		}
		if first {
			first, ok = false, true
			if extra {
				l.Device = string(tok)
			}
			var good bool
			if l.Major, l.Minor, good = parseDevice(tok); !good {
				l.Malformed++
			}
			continue
		}
		eq := bytes.IndexByte(tok, '=')
		if eq <= 0 || eq == len(tok)-1 {
			l.Malformed++
			continue
		}
		key, val := tok[:eq], tok[eq+1:]
		if i := ioStatKey(key); i >= 0 {
			n, good := fields.ParseUint(val)
			if !good {
				l.Malformed++
				continue
			}
			v[i] = n
			continue
		}
		if extra {
			if l.Extra == nil {
				l.Extra = make(map[string]string)
			}
			l.Extra[string(key)] = string(val)
		}
	}
	l.RBytes, l.WBytes, l.RIOs, l.WIOs, l.DBytes, l.DIOs = v[0], v[1], v[2], v[3], v[4], v[5]
	return l, ok
}

// sumIOStatBytes adds the six counters of every line of an io.stat file
// held in b whose device parses, without allocating.
func sumIOStatBytes(b []byte) (sum [nIOStat]uint64, malformed int) {
	eachLineBytes(b, func(line []byte) {
		l, ok := parseIOStatLine(line, false)
		if !ok {
			return
		}
		malformed += l.Malformed
		if l.Major == 0 && l.Minor == 0 {
			return // not a device line (major 0 has no block devices)
		}
		for i, x := range [nIOStat]uint64{l.RBytes, l.WBytes, l.RIOs, l.WIOs, l.DBytes, l.DIOs} {
			sum[i] += x
		}
	}, func() { malformed++ })
	return sum, malformed
}

// parseDevice parses "MAJ:MIN" with two decimal 32-bit numbers; "0:0" is
// refused, since major 0 is UNNAMED_MAJOR and has no block devices.
func parseDevice(b []byte) (maj, mnr uint32, ok bool) {
	colon := bytes.IndexByte(b, ':')
	if colon <= 0 {
		return 0, 0, false
	}
	a, ok1 := fields.ParseUint(b[:colon])
	c, ok2 := fields.ParseUint(b[colon+1:])
	if !ok1 || !ok2 || a > math.MaxUint32 || c > math.MaxUint32 || a == 0 && c == 0 {
		return 0, 0, false
	}
	return uint32(a), uint32(c), true
}

// ProcStat holds the fields of /proc/<pid>/stat that the Source uses, out
// of the 52 that do_task_stat prints (fs/proc/array.c; field numbers as in
// proc_pid_stat(5) and the table in Documentation/filesystems/proc.rst).
type ProcStat struct {
	// PID is field 1, the process id.
	PID int
	// Comm is field 2 without its parentheses: the command name, at most
	// 15 bytes, which may contain spaces, parentheses and any other byte.
	Comm string
	// State is field 3, one letter such as 'R', 'S' or 'Z'.
	State byte
	// PPID is field 4, the parent's process id (0 for init and kthreadd).
	PPID int
	// StartTime is field 22, when the process started, in clock ticks
	// (USER_HZ, 100 per second) since boot.
	StartTime uint64
}

// ParseProcStat reads one /proc/<pid>/stat file.
//
// The comm field is printed raw between parentheses and may itself contain
// ") (", so the parser takes the text between the first '(' and the LAST
// ')' as the comm; every later field is a number or the state letter. A
// file without a pid, a comm, the state, the ppid and the starttime gives
// an error wrapping ErrMalformed; a read error from r is returned wrapped.
func ParseProcStat(r io.Reader) (ProcStat, error) {
	buf, err := io.ReadAll(io.LimitReader(r, maxStat))
	if err != nil {
		return ProcStat{}, wrapRead("/proc/<pid>/stat", err)
	}
	st, comm, err := parseProcStatBytes(buf)
	if err != nil {
		return ProcStat{}, err
	}
	st.Comm = string(comm)
	return st, nil
}

// parseProcStatBytes parses a /proc/<pid>/stat file held in b. The comm is
// returned as a slice of b and ProcStat.Comm is left empty, so that nothing
// is allocated.
func parseProcStatBytes(b []byte) (ProcStat, []byte, error) {
	var st ProcStat
	open := bytes.IndexByte(b, '(')
	closing := bytes.LastIndexByte(b, ')')
	if open < 2 || closing < open || b[open-1] != ' ' {
		return st, nil, fmt.Errorf("jobio: no \"<pid> (<comm>)\": %w", ErrMalformed)
	}
	pid, ok := fields.ParseUint(b[:open-1])
	if !ok || pid == 0 || pid > math.MaxInt32 {
		return st, nil, fmt.Errorf("jobio: bad pid %q: %w", b[:open-1], ErrMalformed)
	}
	st.PID = int(pid)
	comm := b[open+1 : closing]
	rest := b[closing+1:]
	// Fields 3 onwards: state, ppid, ..., starttime (field 22) is the 20th.
	for field := 3; field <= 22; field++ {
		var tok []byte
		tok, rest = nextToken(rest)
		if tok == nil {
			return st, nil, fmt.Errorf("jobio: stat of pid %d has %d fields, want at least 22: %w", st.PID, field-1, ErrMalformed)
		}
		switch field {
		case 3:
			if len(tok) != 1 {
				return st, nil, fmt.Errorf("jobio: stat of pid %d: bad state %q: %w", st.PID, tok, ErrMalformed)
			}
			st.State = tok[0]
		case 4:
			ppid, ok := fields.ParseUint(tok)
			if !ok || ppid > math.MaxInt32 {
				return st, nil, fmt.Errorf("jobio: stat of pid %d: bad ppid %q: %w", st.PID, tok, ErrMalformed)
			}
			st.PPID = int(ppid)
		case 22:
			if st.StartTime, ok = fields.ParseUint(tok); !ok {
				return st, nil, fmt.Errorf("jobio: stat of pid %d: bad starttime %q: %w", st.PID, tok, ErrMalformed)
			}
		}
	}
	return st, comm, nil
}

// parseUptime parses the first field of /proc/uptime, "%lu.%02lu" seconds
// since boot (uptime_proc_show in fs/proc/uptime.c), into clock ticks at
// USER_HZ, the unit of /proc/<pid>/stat's starttime.
func parseUptime(b []byte) (uint64, bool) {
	tok, _ := nextToken(b)
	dot := bytes.IndexByte(tok, '.')
	if dot <= 0 {
		return 0, false
	}
	sec, ok := fields.ParseUint(tok[:dot])
	if !ok || sec > math.MaxUint64/userHZ-1 {
		return 0, false
	}
	frac := tok[dot+1:]
	if len(frac) == 0 {
		return 0, false
	}
	var cs uint64
	for i, c := range frac {
		if c < '0' || c > '9' {
			return 0, false
		}
		switch i {
		case 0:
			cs += uint64(c-'0') * 10
		case 1:
			cs += uint64(c - '0')
		}
	}
	return sec*userHZ + cs, true
}

// userHZ is USER_HZ, the clock-tick rate of /proc/<pid>/stat times; it is
// 100 on every architecture the agent runs on (include/asm-generic/param.h).
const userHZ = 100

// eachLine calls fn for every line of r, without its newline. A line longer
// than maxLine is not passed to fn; long is called for it instead. The error
// is r's, unwrapped, or nil at EOF.
func eachLine(r io.Reader, fn func([]byte), long func()) error {
	br := bufio.NewReaderSize(r, maxLine)
	for {
		line, err := br.ReadSlice('\n')
		if err == bufio.ErrBufferFull {
			long()
			for err == bufio.ErrBufferFull {
				_, err = br.ReadSlice('\n')
			}
		} else if len(line) > 0 {
			fn(line)
		}
		switch err {
		case nil:
		case io.EOF:
			return nil
		default:
			return err
		}
	}
}

// eachLineBytes is eachLine over a file held in memory.
func eachLineBytes(b []byte, fn func([]byte), long func()) {
	for len(b) > 0 {
		i := bytes.IndexByte(b, '\n')
		var line []byte
		if i < 0 {
			line, b = b, nil
		} else {
			line, b = b[:i+1], b[i+1:]
		}
		if len(line) > maxLine {
			long()
			continue
		}
		fn(line)
	}
}

// wrapRead wraps a read error with the file's kind; nil stays nil.
func wrapRead(what string, err error) error {
	if err == nil {
		return nil
	}
	return fmt.Errorf("jobio: reading %s: %w", what, err)
}

// nextToken returns the first blank-separated token of b and the rest of b
// after it; tok is nil when b holds only blanks.
func nextToken(b []byte) (tok, rest []byte) {
	i := 0
	for i < len(b) && fields.IsSpace(b[i]) {
		i++
	}
	if i == len(b) {
		return nil, nil
	}
	j := i
	for j < len(b) && !fields.IsSpace(b[j]) {
		j++
	}
	return b[i:j], b[j:]
}

// trimSpace returns b without leading and trailing blanks.
func trimSpace(b []byte) []byte {
	for len(b) > 0 && fields.IsSpace(b[0]) {
		b = b[1:]
	}
	for len(b) > 0 && fields.IsSpace(b[len(b)-1]) {
		b = b[:len(b)-1]
	}
	return b
}
