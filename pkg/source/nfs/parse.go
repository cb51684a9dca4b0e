package nfs

import (
	"bytes"
	"fmt"
	"io"

	"sluice/pkg/source/internal/fields"
)

// OpStats is one line of a mount's per-op section, "<NAME>: n1 .. n8[ n9]",
// printed by _print_rpc_iostats in net/sunrpc/stats.c for one RPC procedure.
type OpStats struct {
	// Ops is how many operations (RPC calls) of this kind completed.
	Ops uint64
	// Trans is how many times they were transmitted, retransmissions included.
	Trans uint64
	// MajorTimeouts is how many calls hit a major timeout.
	MajorTimeouts uint64
	// BytesSent is the bytes sent for these calls, RPC headers included.
	BytesSent uint64
	// BytesRecv is the bytes received in replies, RPC headers included.
	BytesRecv uint64
	// QueueMs is the cumulative time, in milliseconds, calls waited to be sent.
	QueueMs uint64
	// RTTMs is the cumulative round-trip time in milliseconds.
	RTTMs uint64
	// ExecMs is the cumulative time in milliseconds from call start to
	// completion.
	ExecMs uint64
	// Errors is how many calls ended with an error. Kernels that print 8
	// fields (before the errors column was added, around 5.x) leave it zero.
	Errors uint64
}

// Op is one per-op line: the RPC procedure name as printed ("READ",
// "GETATTR", ...) and its numbers.
type Op struct {
	Name string
	OpStats
}

// Mount is one NFS mount of a mountstats file: its header line, printed by
// show_vfsstat in fs/proc_namespace.c, and its tab-indented body, printed
// by nfs_show_stats in fs/nfs/super.c and rpc_clnt_show_stats in
// net/sunrpc/stats.c.
type Mount struct {
	// Device is the device field of the header, e.g. "fs01:/export/proj",
	// with octal escapes such as "\040" undone.
	Device string
	// MountPoint is where it is mounted, with octal escapes undone.
	MountPoint string
	// FSType is "nfs" (NFSv2 and v3) or "nfs4".
	FSType string
	// StatVersion is the header's "statvers=" value, e.g. "1.1"; empty when
	// the header has none.
	StatVersion string
	// Opts is the "opts:" line's value as printed (the superblock's mount
	// options, e.g. "rw,vers=4.2,rsize=1048576,..."); empty when absent.
	Opts string
	// Age is the "age:" value: seconds since the superblock was created.
	Age uint64
	// Bytes holds the "bytes:" fields, indexed by the Bytes* constants.
	Bytes [NumBytes]uint64
	// Events holds the "events:" fields, indexed by the Event* constants.
	// It is all zero when HasEvents is false.
	Events [NumEvents]uint64
	// HasEvents reports whether a usable "events:" line (27 numbers) was read.
	HasEvents bool
	// Ops holds the per-op lines in file order (the kernel's procedure
	// table order). A name that appears twice keeps the place of its first
	// line and the numbers of its last.
	Ops []Op
	// Transports counts the "xprt:" lines: one per transport, so several
	// with the nconnect mount option.
	Transports int
	// Partial reports that the mount lacks something a reading needs: the
	// "age:" or "bytes:" line was missing or unusable, or the
	// "per-op statistics" section never started (a truncated mount).
	// Such a mount is parsed as far as it goes, but the Source skips it.
	Partial bool
	// Malformed counts the lines of this mount that were skipped.
	Malformed int
}

// Op returns the per-op line of the procedure called name.
func (m *Mount) Op(name string) (OpStats, bool) {
	for i := range m.Ops {
		if m.Ops[i].Name == name {
			return m.Ops[i].OpStats, true
		}
	}
	return OpStats{}, false
}

// Stats is one parsed mountstats file (/proc/self/mountstats, or
// /proc/<pid>/mountstats for that process's mount namespace). Only NFS
// mounts are kept; see the package documentation for the format.
type Stats struct {
	// Mounts holds the NFS mounts in file order, which is mount order.
	Mounts []Mount
	// Malformed counts every line that was skipped: those counted in the
	// mounts' Malformed plus those outside any NFS mount (before the first
	// header, or a header line that does not parse).
	Malformed int
}

// Parse reads one mountstats file.
//
// Mounts of other filesystem types are skipped along with any lines under
// them. A line that does not parse is skipped and counted, and a mount that
// lacks a line it needs is kept with Partial set, so one odd line never
// loses the rest of the file. The only error is a read error from r,
// returned with whatever was parsed before it.
func Parse(r io.Reader) (Stats, error) {
	data, err := io.ReadAll(r)
	var st Stats
	var p parser
	p.parse(data, &st)
	if err != nil {
		return st, fmt.Errorf("nfs: reading mountstats: %w", err)
	}
	return st, nil
}

// maxTokens is the most whitespace-separated tokens a line this parser
// uses can have: "events:" and its 27 numbers.
const maxTokens = 1 + NumEvents

// parser holds the state of one pass over a file. The Source keeps one, and
// its Stats, between reads so that buffers, maps and unchanged strings are
// reused.
type parser struct {
	st  *Stats
	cur *Mount // the NFS mount being read; nil outside one

	hasAge, hasBytes, inOps bool // seen in cur so far
	inImplID                bool // after "impl_id:", whose value may span lines
	inOther                 bool // under a non-NFS (or unparsable) header

	tok     [maxTokens + 1][]byte
	unesc   []byte
	numbers [NumEvents]uint64

	// prev is cur's per-op lines from the parse before (the slot's), and
	// sameOps whether cur's lines so far have had prev's names in prev's
	// order: while they do, a line's name is unique in cur and interned
	// already. After the first difference, seen indexes cur's names.
	prev    []Op
	sameOps bool
	seen    map[string]int

	// memos are the mount slots' op lines from the parse before, memo
	// cur's (nil outside a mount): while sameOps holds, a line equal to
	// its place there takes prev's op unparsed.
	memos []opMemo
	memo  *opMemo
}

// parse fills st from data. It reuses st.Mounts' backing array, the Ops
// maps in it and any string that did not change since the last parse.
func (p *parser) parse(data []byte, st *Stats) {
	*p = parser{unesc: p.unesc[:0], seen: p.seen, memos: p.memos}
	p.st = st
	st.Mounts = st.Mounts[:0]
	st.Malformed = 0
	for len(data) > 0 {
		var line []byte
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			line, data = data[:i], data[i+1:]
		} else {
			line, data = data, nil
		}
		p.line(line)
	}
	p.endMount()
	p.st, p.cur = nil, nil
}

// line handles one line, newline removed.
func (p *parser) line(line []byte) {
	if p.inOps && p.opLine(line) {
		return
	}
	n := fields.Split(line, p.tok[:])
	if n == 0 {
		return // blank: the kernel ends every mount with one
	}
	t := p.tok[:min(n, maxTokens)]
	if string(t[0]) == "device" || (string(t[0]) == "no" && n > 1 && string(t[1]) == "device") {
		p.header(t)
		return
	}
	if p.cur == nil {
		if !p.inOther {
			p.bad() // before the first header
		}
		return
	}
	m := p.cur
	if p.inOps {
		p.bad() // not a per-op line: opLine would have taken it
		return
	}
	key := t[0]
	if string(key) != "impl_id:" && p.inImplID && !isKnownKey(key) {
		return // the rest of an implementation name that held a newline
	}
	p.inImplID = false
	switch string(key) {
	case "opts:":
		setString(&m.Opts, bytes.TrimSpace(line[bytes.Index(line, key)+len(key):]))
	case "age:":
		if v, ok := parseOne(t, n); ok {
			m.Age, p.hasAge = v, true
		} else {
			p.bad()
		}
	case "impl_id:":
		p.inImplID = true
	case "events:":
		if p.numbersInto(t, n, m.Events[:]) {
			m.HasEvents = true
		} else {
			p.bad()
		}
	case "bytes:":
		if p.numbersInto(t, n, m.Bytes[:]) {
			p.hasBytes = true
		} else {
			p.bad()
		}
	case "xprt:":
		m.Transports++
	case "per-op":
		p.inOps = true
	case "caps:", "nfsv4:", "sec:", "fsc:", "RPC":
		// Not counters.
	default:
		if key[len(key)-1] != ':' {
			p.bad()
		}
		// "<word>:" is a field this parser does not know, from a newer
		// kernel: ignore it.
	}
}

// isKnownKey reports whether key starts one of the body lines that
// nfs_show_stats and rpc_clnt_show_stats print before the per-op section.
func isKnownKey(key []byte) bool {
	switch string(key) {
	case "opts:", "age:", "impl_id:", "caps:", "nfsv4:", "sec:", "events:",
		"bytes:", "fsc:", "RPC", "xprt:", "per-op":
		return true
	}
	return false
}

// header handles "device <dev> mounted on <path> with fstype <type>[ statvers=<v>]"
// or "no device mounted on ...". Only nfs and nfs4 mounts are kept.
func (p *parser) header(t [][]byte) {
	p.endMount()
	var dev []byte
	if string(t[0]) == "no" {
		t = t[2:]
	} else if len(t) > 1 {
		dev, t = t[1], t[2:]
	} else {
		t = nil
	}
	// Lines under a mount that is not NFS are skipped without counting
	// them: another filesystem's show_stats hook may print anything.
	p.inOther = true
	if len(t) < 6 || string(t[0]) != "mounted" || string(t[1]) != "on" ||
		string(t[3]) != "with" || string(t[4]) != "fstype" {
		p.bad()
		return
	}
	var fstype string
	switch string(t[5]) {
	case "nfs":
		fstype = "nfs"
	case "nfs4":
		fstype = "nfs4"
	default:
		return
	}
	p.inOther = false
	m := p.st.newMount()
	p.prev, p.sameOps = m.Ops, true
	m.Ops = m.Ops[:0]
	slot := len(p.st.Mounts) - 1
	for len(p.memos) <= slot {
		p.memos = append(p.memos, opMemo{})
	}
	p.memo = &p.memos[slot]
	p.memo.begin()
	m.FSType = fstype
	p.setEscaped(&m.Device, dev)
	p.setEscaped(&m.MountPoint, t[2])
	var vers []byte
	if len(t) > 6 {
		vers, _ = bytes.CutPrefix(t[6], []byte("statvers="))
	}
	setStatVersion(&m.StatVersion, vers)
	p.cur = m
}

// endMount finishes the current NFS mount, if any.
func (p *parser) endMount() {
	if p.cur != nil {
		p.cur.Partial = !p.hasAge || !p.hasBytes || !p.inOps
		p.memo.commit()
	}
	p.cur, p.memo = nil, nil
	p.hasAge, p.hasBytes, p.inOps, p.inImplID = false, false, false, false
}

// newMount appends a zeroed mount to st and returns it. A slot left from an
// earlier parse keeps its Ops (for header to compare with and reuse) and
// strings, which header overwrites only if they changed.
func (st *Stats) newMount() *Mount {
	n := len(st.Mounts)
	if n < cap(st.Mounts) {
		st.Mounts = st.Mounts[:n+1]
		m := &st.Mounts[n]
		*m = Mount{
			Device: m.Device, MountPoint: m.MountPoint, StatVersion: m.StatVersion,
			Opts: m.Opts, Ops: m.Ops,
		}
		return m
	}
	st.Mounts = append(st.Mounts, Mount{})
	return &st.Mounts[n]
}

// opLine handles a line of the per-op section, "<NAME>:" and 8 or 9
// numbers, splitting it only after its name. It returns false for a line
// that is not one, blank or a header, for line to handle.
func (p *parser) opLine(line []byte) bool {
	name, rest := fields.First(line)
	if name == nil || string(name) == "device" || string(name) == "no" {
		return false
	}
	if len(name) < 2 || name[len(name)-1] != ':' {
		p.bad()
		return true
	}
	if i := len(p.cur.Ops); p.sameOps && i < len(p.prev) && p.memo.same(i, line) {
		p.cur.Ops = append(p.cur.Ops, p.prev[i]) // the line it parsed from
		p.memo.record(line)
		return true
	}
	var v OpStats
	// Most procedures of a mount are never called: their lines are all
	// zeros, printed the same way every time.
	if string(rest) != zeroOps9 && string(rest) != zeroOps8 {
		var ok bool
		if v, ok = p.opStats(rest); !ok {
			p.bad()
			return true
		}
	}
	if p.addOp(name[:len(name)-1], v) {
		p.memo.record(line)
	} else {
		p.memo.spoil()
	}
	return true
}

// zeroOps9 and zeroOps8 are the numbers of a per-op line of a procedure not
// called yet, as _print_rpc_iostats prints them with and without errors.
const (
	zeroOps9 = " 0 0 0 0 0 0 0 0 0"
	zeroOps8 = " 0 0 0 0 0 0 0 0"
)

// opStats parses the 8 or 9 numbers of a per-op line: as the kernel
// prints them (fields.Uints) or, failing that, split the general way.
func (p *parser) opStats(rest []byte) (OpStats, bool) {
	var v [9]uint64
	n, ok := fields.Uints(rest, v[:])
	if !ok {
		t := p.tok[:10] // one more than 9, to tell a line that has too many
		n = fields.Split(rest, t)
		if n > 9 {
			return OpStats{}, false
		}
		for i, b := range t[:n] {
			if v[i], ok = fields.ParseUint(b); !ok {
				return OpStats{}, false
			}
		}
	}
	if n != 8 && n != 9 {
		return OpStats{}, false
	}
	return OpStats{
		Ops: v[0], Trans: v[1], MajorTimeouts: v[2], BytesSent: v[3], BytesRecv: v[4],
		QueueMs: v[5], RTTMs: v[6], ExecMs: v[7], Errors: v[8],
	}, true
}

// addOp adds a per-op line to cur and reports true, or replaces the
// numbers of an earlier line of the same name and reports false.
func (p *parser) addOp(name []byte, v OpStats) bool {
	m := p.cur
	i := len(m.Ops)
	if p.sameOps && i < len(p.prev) && p.prev[i].Name == string(name) {
		m.Ops = append(m.Ops, Op{Name: p.prev[i].Name, OpStats: v})
		return true
	}
	if p.sameOps { // the first difference: index what came before it
		p.sameOps = false
		if p.seen == nil {
			p.seen = make(map[string]int, 64)
		}
		clear(p.seen)
		for j := range m.Ops {
			p.seen[m.Ops[j].Name] = j
		}
	}
	if j, ok := p.seen[string(name)]; ok {
		m.Ops[j].OpStats = v
		return false
	}
	s := internOp(name)
	p.seen[s] = i
	m.Ops = append(m.Ops, Op{Name: s, OpStats: v})
	return true
}

// numbersInto parses the n-1 numbers after t[0] into dst, which they must
// fill exactly. dst is left unchanged if they do not.
func (p *parser) numbersInto(t [][]byte, n int, dst []uint64) bool {
	if n != len(dst)+1 {
		return false
	}
	v := p.numbers[:len(dst)]
	for i, b := range t[1:n] {
		var ok bool
		if v[i], ok = fields.ParseUint(b); !ok {
			return false
		}
	}
	copy(dst, v)
	return true
}

// parseOne parses a "<key> <number>" line.
func parseOne(t [][]byte, n int) (uint64, bool) {
	if n != 2 {
		return 0, false
	}
	return fields.ParseUint(t[1])
}

// bad counts a skipped line.
func (p *parser) bad() {
	p.st.Malformed++
	if p.cur != nil {
		p.cur.Malformed++
	}
}

// setString sets *dst to b, allocating only if the value changed.
func setString(dst *string, b []byte) {
	if *dst != string(b) {
		*dst = string(b)
	}
}

// setStatVersion is setString without allocating for the versions the
// kernel prints (NFS_IOSTAT_VERS in include/linux/nfs_iostat.h).
func setStatVersion(dst *string, b []byte) {
	switch string(b) {
	case "1.1":
		*dst = "1.1"
	case "1.0":
		*dst = "1.0"
	default:
		setString(dst, b)
	}
}

// setEscaped sets *dst to b with the octal escapes of seq_escape ("\040"
// for space, "\011" tab, "\012" newline, "\134" backslash) undone.
func (p *parser) setEscaped(dst *string, b []byte) {
	if bytes.IndexByte(b, '\\') < 0 {
		setString(dst, b)
		return
	}
	p.unesc = unescape(p.unesc[:0], b)
	setString(dst, p.unesc)
}

// unescape appends b to dst with every "\ooo" (three octal digits, at most
// \377) replaced by its byte. Other backslashes are kept as they are.
func unescape(dst, b []byte) []byte {
	for i := 0; i < len(b); i++ {
		c := b[i]
		if c == '\\' && i+3 < len(b) && isOctal(b[i+1]) && isOctal(b[i+2]) && isOctal(b[i+3]) && b[i+1] <= '3' {
			dst = append(dst, (b[i+1]-'0')<<6|(b[i+2]-'0')<<3|(b[i+3]-'0'))
			i += 3
			continue
		}
		dst = append(dst, c)
	}
	return dst
}

func isOctal(c byte) bool { return c >= '0' && c <= '7' }
