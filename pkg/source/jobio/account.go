package jobio

import (
	"os"
	"slices"
	"time"

	"sluice/pkg/source"
)

// job is the state kept for one job between reads.
type job struct {
	id, key    string
	rel        string   // job directory relative to the cgroup root
	root       *dirNode // the job directory and its subtree, as last listed
	relist     bool     // list the subtree afresh at the next read
	counts     bool     // its last listing was trusted and saw subdirectories counted
	ioStat     string   // path of the job directory's io.stat
	ioStatFile keptFile // its io.stat, kept open

	procs  map[int]*proc // by pid: live and departed processes
	list   []*proc       // the values of procs, for quick iteration
	reaped []*proc       // scratch: processes found reaped at this read

	totals  [nCounters]uint64
	ioLast  [nIOStat]uint64 // io.stat sums at the last read
	ioHave  bool            // ioLast is a valid base
	mark    uint64          // uptime in ticks at the start of the last read
	hasMark bool            // mark is valid: the job was read before

	lost bool // not found by the last walk
	gone bool // its cgroup was gone at the last read: drop at the next
	errs jobErrors
}

// setDir points the job at a (new) directory, to be listed at the next
// read. Processes keep their state, since they are keyed by pid; io.stat
// starts from a new base.
func (j *job) setDir(rel, path string) {
	j.rel = rel
	if j.root != nil {
		j.root.closeTree()
	}
	j.ioStatFile.close()
	j.root = newDirNode(path, "", 0)
	j.relist, j.counts = true, false
	j.ioStat = path + "/io.stat"
	j.ioHave = false
}

// close closes the job's kept descriptors: its processes' io files and its
// cgroup directories and their cgroup.procs.
func (j *job) close() {
	for pid, p := range j.procs {
		p.close()
		delete(j.procs, pid)
	}
	clear(j.list)
	j.list = j.list[:0]
	if j.root != nil {
		j.root.closeTree()
		j.relist, j.counts = true, false
	}
	j.ioStatFile.close()
}

// reading returns the job's totals as a reading stamped t: summed by p
// when the source has a plan, else as a counter map that is new on every
// call, so that earlier readings stay intact.
func (j *job) reading(t time.Time, p *plan) source.Reading {
	r := source.Reading{Key: j.key, Job: j.id, Time: t, Malformed: j.errs.malformed}
	if p != nil {
		p.sum(j.totals, &r)
		return r
	}
	r.Counters = make(map[string]uint64, nCounters)
	for i, name := range counterNames {
		r.Counters[name] = j.totals[i]
	}
	return r
}

// procKey identifies a process across pid reuse: its pid and its start
// time in clock ticks since boot.
type procKey struct {
	pid   int
	start uint64
}

// proc is the state kept for one process of a job.
type proc struct {
	key    procKey
	ppid   int     // parent pid from /proc/<pid>/stat
	parent procKey // the parent's key if the parent is tracked; pid 0 if not
	f      *os.File

	last    [nProcIO]uint64 // values at the last counted read
	hasLast bool            // last is a valid base
	cur     [nProcIO]uint64 // values read now, valid if sampled
	debt    [nProcIO]uint64 // reaped descendants' counts not yet seen in our values

	departed bool   // no longer in the job's cgroup.procs but still readable
	listed   uint64 // read generation that last listed it
	dropped  bool   // removed from the job's procs: to go from its list

	// Per-read flags.
	sampled bool // cur was read now
	created bool // first seen now
	leaving bool // departed now: its last growth still counts
	revived bool // departed before, listed again now: set a new base
}

// close closes the process's kept descriptor.
func (p *proc) close() {
	if p.f != nil {
		p.f.Close()
		p.f = nil
	}
}

// sampleResult is what reading one process's io file gave.
type sampleResult int

const (
	sampleOK     sampleResult = iota // p.cur holds the values
	sampleGone                       // the process was reaped
	sampleFailed                     // unreadable or incomplete; keep the last values
)

// sample reads p's io file through its kept descriptor into p.cur.
//
// An ESRCH or ENOENT, or a read of zero bytes, means the process has been
// reaped: procfs never serves an empty io file for a live or zombie
// process (do_io_accounting prints all seven lines or fails), and a fixture
// tree emulates a reaped process by truncating its io file.
func (s *Source) sample(j *job, p *proc) sampleResult {
	buf := s.buf[:cap(s.buf)]
	var n int
	for {
		var err error
		n, err = readAt0(p.f, buf)
		if err != nil {
			if vanished(err) {
				return sampleGone
			}
			j.errs.add(err)
			return sampleFailed
		}
		if n < len(buf) {
			break
		}
		buf = make([]byte, 2*len(buf))
		s.buf = buf
	}
	if n == 0 {
		return sampleGone
	}
	v, seen, malformed := parseProcIOBytes(buf[:n])
	j.errs.malformed += malformed
	if seen != allProcIO {
		if malformed == 0 {
			j.errs.malformed++
		}
		return sampleFailed
	}
	p.cur, p.sampled = v, true
	return sampleOK
}

// newProc starts tracking pid: it opens /proc/<pid>/io, reads
// /proc/<pid>/stat for the start time and the parent, and samples the io
// file. It returns nil for a process that exited meanwhile, or whose stat
// cannot be read.
func (s *Source) newProc(j *job, pid int) *proc {
	f, err := os.Open(s.pidPath(pid, "io"))
	if err != nil {
		if !vanished(err) {
			j.errs.add(err)
		}
		return nil
	}
	st, ok := s.readStat(j, pid)
	if !ok {
		f.Close()
		return nil
	}
	p := &proc{key: procKey{pid, st.StartTime}, ppid: st.PPID, f: f, created: true, listed: s.gen}
	if s.sample(j, p) == sampleGone {
		p.close()
		return nil
	}
	return p
}

// readStat reads /proc/<pid>/stat. A process that exited meanwhile gives
// false silently; any other failure is recorded.
func (s *Source) readStat(j *job, pid int) (ProcStat, bool) {
	b, err := readFile(s.pidPath(pid, "stat"), s.buf[:0])
	s.keepBuf(b)
	if err != nil {
		if !vanished(err) {
			j.errs.add(err)
		}
		return ProcStat{}, false
	}
	if len(b) == 0 {
		return ProcStat{}, false // a fixture's reaped process
	}
	st, _, err := parseProcStatBytes(b)
	if err != nil || st.PID != pid {
		j.errs.malformed++
		return ProcStat{}, false
	}
	return st, true
}

// account updates the job's process totals from the pids in s.pids; mark
// is the uptime at the start of this read, in ticks (valid if markOK).
//
// The rules, documented in the package comment:
//   - a process seen at the last read and now adds its growth, counter by
//     counter; a counter that went down sets a new base;
//   - a process seen for the first time adds its whole value if it started
//     at or after the job's last read (mark), and otherwise only sets a base;
//   - a process that left cgroup.procs but whose io still reads (a zombie,
//     or a process moved out) adds its growth once more and is then frozen;
//   - a process that was reaped hands its last values, plus its own unpaid
//     debt, as debt to its nearest tracked ancestor, whose growth pays the
//     debt before it counts: the kernel adds a reaped child's totals to its
//     parent (kernel/exit.c, wait_task_zombie).
func (s *Source) account(j *job, mark uint64, markOK bool) {
	j.clearReadFlags()
	s.sampleListed(j)
	s.sampleUnlisted(j)
	if len(j.reaped) > 0 {
		j.list = slices.DeleteFunc(j.list, func(p *proc) bool { return p.dropped })
	}
	j.passDebts()
	if len(j.reaped) > 0 || s.anyLeaving(j) {
		s.reparentOrphans(j)
	}
	for _, r := range j.reaped {
		r.close()
	}
	clear(j.reaped)
	j.resolveNewParents()
	j.count(markOK)
	j.mark, j.hasMark = mark, markOK
}

// clearReadFlags starts a read: no process is sampled, created, leaving or
// revived yet, and none reaped.
func (j *job) clearReadFlags() {
	for _, p := range j.list {
		p.sampled, p.created, p.leaving, p.revived = false, false, false, false
	}
	j.reaped = j.reaped[:0]
}

// sampleListed samples the processes in s.pids, tracking those seen for
// the first time.
func (s *Source) sampleListed(j *job) {
	for _, pid := range s.pids {
		if p := j.procs[pid]; p != nil && s.resample(j, p) {
			continue
		}
		if p := s.newProc(j, pid); p != nil {
			j.procs[pid] = p
			j.list = append(j.list, p)
		}
	}
}

// resample samples a tracked process that is listed now. It reports false
// when the process was reaped and its pid reused by a new process.
func (s *Source) resample(j *job, p *proc) bool {
	p.listed = s.gen
	switch s.sample(j, p) {
	case sampleOK:
		if p.departed { // moved back in
			p.departed, p.revived = false, true
		}
	case sampleGone:
		j.reap(p)
		return false
	}
	return true
}

// sampleUnlisted samples the tracked processes no longer listed: zombies,
// processes moved out, or reaped ones. One that departed at an earlier
// read is frozen: its growth is not the job's.
func (s *Source) sampleUnlisted(j *job) {
	for _, p := range j.list {
		if p.dropped || p.listed == s.gen {
			continue
		}
		wasDeparted := p.departed
		switch s.sample(j, p) {
		case sampleGone:
			j.reap(p)
		case sampleOK:
			if wasDeparted {
				p.sampled = false
			} else {
				p.departed, p.leaving = true, true
			}
		}
	}
}

// reap stops tracking a process that was reaped; it is closed, and goes
// from j.list, later in the read.
func (j *job) reap(p *proc) {
	j.reaped = append(j.reaped, p)
	delete(j.procs, p.key.pid)
	p.dropped = true
}

// passDebts hands what each reaped process owes to its nearest tracked
// ancestor as debt.
func (j *job) passDebts() {
	for _, r := range j.reaped {
		owed := r.owed()
		if a := j.ancestor(r.parent); a != nil {
			for i := range owed {
				a.debt[i] = satAdd(a.debt[i], owed[i])
			}
		}
	}
}

// owed is what a reaped process leaves to its parent: its last values and
// its unpaid debt, or only the debt if it was never counted (nothing of its
// own was seen).
func (p *proc) owed() [nProcIO]uint64 {
	if !p.hasLast {
		return p.debt
	}
	var owed [nProcIO]uint64
	for i := range owed {
		owed[i] = satAdd(p.last[i], p.debt[i])
	}
	return owed
}

// reparentOrphans reads the new parent of each process whose parent was
// reaped or departed at this read: the kernel reparents a process's
// children when it exits (kernel/exit.c, forget_original_parent).
func (s *Source) reparentOrphans(j *job) {
	for _, p := range j.list {
		if p.parent.pid != 0 && !p.created && j.parentLeft(p.parent) {
			if st, ok := s.readStat(j, p.key.pid); ok {
				p.ppid = st.PPID
			}
			p.parent = j.resolveParent(p)
		}
	}
}

// resolveNewParents finds the parent of each process first seen at this
// read among the tracked ones.
func (j *job) resolveNewParents() {
	for _, p := range j.list {
		if p.created {
			p.parent = j.resolveParent(p)
		}
	}
}

// count adds the growth of each process sampled at this read to the job's
// totals, after paying the process's debt from it, and makes the values
// read the process's new base. markOK says whether this read's mark is
// valid.
func (j *job) count(markOK bool) {
	for _, p := range j.list {
		if !p.sampled {
			continue
		}
		d := j.growth(p, markOK)
		for i := range d {
			pay := min(d[i], p.debt[i])
			d[i] -= pay
			p.debt[i] -= pay
			j.totals[i] = satAdd(j.totals[i], d[i])
		}
		p.last, p.hasLast = p.cur, true
	}
}

// growth is what process p did for the job since the last read: all of it
// if it was first seen now and started since the last read's mark, its
// growth counter by counter if it was counted before (none for a counter
// that went down), and nothing if it is back in the job.
func (j *job) growth(p *proc, markOK bool) [nProcIO]uint64 {
	var d [nProcIO]uint64
	switch {
	case !p.hasLast:
		if markOK && j.hasMark && p.key.start >= j.mark {
			d = p.cur
		}
	case p.revived:
		// A new base: what it did outside the job is not the job's.
	default:
		for i := range d {
			if p.cur[i] >= p.last[i] {
				d[i] = p.cur[i] - p.last[i]
			}
		}
	}
	return d
}

// ancestor returns the nearest tracked ancestor of a process whose parent
// is k, skipping ancestors reaped at this read, or nil.
func (j *job) ancestor(k procKey) *proc {
	for range len(j.reaped) + 1 {
		if k.pid == 0 {
			return nil
		}
		if p := j.procs[k.pid]; p != nil && p.key == k {
			return p
		}
		next := procKey{}
		for _, r := range j.reaped {
			if r.key == k {
				next = r.parent
				break
			}
		}
		k = next
	}
	return nil
}

// anyLeaving reports whether a process departed at this read.
func (s *Source) anyLeaving(j *job) bool {
	for _, p := range j.list {
		if p.leaving {
			return true
		}
	}
	return false
}

// parentLeft reports whether the process keyed k was reaped or departed at
// this read.
func (j *job) parentLeft(k procKey) bool {
	if p := j.procs[k.pid]; p != nil && p.key == k {
		return p.leaving
	}
	for _, r := range j.reaped {
		if r.key == k {
			return true
		}
	}
	return false
}

// resolveParent returns the key of p's parent if the parent is tracked and
// started no later than p, or the zero key.
func (j *job) resolveParent(p *proc) procKey {
	if q := j.procs[p.ppid]; q != nil && q != p && q.key.start <= p.key.start {
		return q.key
	}
	return procKey{}
}

// satAdd adds two counters, saturating instead of wrapping.
func satAdd(a, b uint64) uint64 {
	if s := a + b; s >= a {
		return s
	}
	return ^uint64(0)
}
