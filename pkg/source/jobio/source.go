package jobio

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"regexp"
	"slices"
	"strconv"
	"syscall"
	"time"

	"sluice/pkg/source"
)

// Defaults for the zero fields of Options.
const (
	// DefaultCgroupRoot is where cgroup v2 is mounted on systemd hosts.
	DefaultCgroupRoot = "/sys/fs/cgroup"
	// DefaultProcRoot is where procfs is mounted.
	DefaultProcRoot = "/proc"
	// DefaultJobPattern matches a path component "job_<id>" or "job<id>"
	// with a numeric id, the usual layout of batch schedulers' job cgroups,
	// e.g. "system.slice/<scheduler>.scope/job_81234/step_0".
	DefaultJobPattern = `(?:^|/)job_?(\d+)(?:/|$)`
	// DefaultMaxDepth is how many directory levels below the cgroup root a
	// job directory can be: "system.slice/<scheduler>.scope/job_<id>" is at
	// depth 3.
	DefaultMaxDepth = 6
	// DefaultRescanEvery is how many reads reuse one walk of the cgroup
	// tree: at the agent's default 5 s interval a new job is found within a
	// minute.
	DefaultRescanEvery = 12
)

// Options configure a Source. The zero value reads the live system with
// the defaults.
type Options struct {
	// CgroupRoot is the cgroup v2 mount (on a hybrid cgroup v1 system,
	// /sys/fs/cgroup/unified). Empty means DefaultCgroupRoot.
	CgroupRoot string
	// ProcRoot is the procfs mount. Empty means DefaultProcRoot.
	ProcRoot string
	// JobPattern is a regular expression applied to each cgroup directory's
	// path relative to CgroupRoot ("a/b/c", no leading slash); its first
	// capture group is the job id. Empty means DefaultJobPattern, which
	// matches the usual "job_<id>" layouts such as
	// "system.slice/<scheduler>.scope/job_81234/step_0". A directory whose
	// match captures an empty id is not a job.
	JobPattern string
	// MaxDepth is how many levels below CgroupRoot the walk looks for job
	// directories, and how many levels below a job directory it reads the
	// job's sub-cgroups. Zero means DefaultMaxDepth; it must not be negative.
	MaxDepth int
	// RescanEvery is how many reads reuse one walk of the cgroup tree (1:
	// walk on every read); each walk also lists every known job's
	// sub-cgroups again. Between walks a job's sub-cgroups are checked at
	// every read, and a new or removed one is seen at the next read (see
	// the package documentation). Zero means DefaultRescanEvery; it must
	// not be negative.
	RescanEvery int
}

// Source attributes I/O to the batch jobs running on a node: it finds each
// job's cgroup v2 directory, sums /proc/<pid>/io over the job's processes
// and reads the job cgroup's io.stat, and reports per-job totals that never
// go down (see the package documentation for the rules).
//
// A Source keeps one open /proc/<pid>/io descriptor per process, two per
// cgroup directory of a job and a few more (see the package
// documentation), and reuses read buffers, so it must be used by one
// goroutine at a time. Close releases the descriptors.
type Source struct {
	cgroupRoot  string
	procRoot    string
	uptime      string   // <procRoot>/uptime
	uptimeFile  keptFile // kept open
	re          *regexp.Regexp
	maxDepth    int
	rescanEvery int
	now         func() time.Time

	jobs      map[string]*job
	ids       []string // keys of jobs, sorted; rebuilt when jobs change
	walked    bool
	sinceWalk int
	gen       uint64 // read generation

	buf  []byte // file contents (io, stat, cgroup.procs, io.stat, uptime)
	dbuf []byte // getdents64 records
	plan *plan  // set by SumWith
	pids []int

	// Kept from one walk for the next.
	walks     uint64               // walks begun
	matches   map[string]*dirMatch // JobPattern's verdicts, by directory
	walkFound map[string]string    // scratch: job id to directory
	walkQueue []walkDir            // scratch: directories to list
	relBuf    []byte               // scratch: a directory relative to the root
	nameBuf   []byte               // scratch: subdirectory names
	names     []nameSpan           // scratch: the names in nameBuf

	oldScratch []*dirNode // scratch of listDir: a directory's known children
}

// NewSource returns a Source with opts, zero fields meaning the defaults.
// now stamps each reading; nil means time.Now. It fails if JobPattern does
// not compile or has no capture group, or MaxDepth or RescanEvery is
// negative. It touches no files: a missing cgroup root shows at Read.
func NewSource(opts Options, now func() time.Time) (*Source, error) {
	if opts.CgroupRoot == "" {
		opts.CgroupRoot = DefaultCgroupRoot
	}
	if opts.ProcRoot == "" {
		opts.ProcRoot = DefaultProcRoot
	}
	if opts.JobPattern == "" {
		opts.JobPattern = DefaultJobPattern
	}
	if opts.MaxDepth < 0 {
		return nil, fmt.Errorf("jobio: MaxDepth %d is negative", opts.MaxDepth)
	}
	if opts.MaxDepth == 0 {
		opts.MaxDepth = DefaultMaxDepth
	}
	if opts.RescanEvery < 0 {
		return nil, fmt.Errorf("jobio: RescanEvery %d is negative", opts.RescanEvery)
	}
	if opts.RescanEvery == 0 {
		opts.RescanEvery = DefaultRescanEvery
	}
	re, err := regexp.Compile(opts.JobPattern)
	if err != nil {
		return nil, fmt.Errorf("jobio: JobPattern: %w", err)
	}
	if re.NumSubexp() < 1 {
		return nil, fmt.Errorf("jobio: JobPattern %q has no capture group for the job id", opts.JobPattern)
	}
	if now == nil {
		now = time.Now
	}
	return &Source{
		cgroupRoot:  opts.CgroupRoot,
		procRoot:    opts.ProcRoot,
		uptime:      opts.ProcRoot + "/uptime",
		re:          re,
		maxDepth:    opts.MaxDepth,
		rescanEvery: opts.RescanEvery,
		now:         now,
		jobs:        make(map[string]*job),
		walkFound:   make(map[string]string),
		matches:     make(map[string]*dirMatch),
		buf:         make([]byte, 1024),
		dbuf:        make([]byte, 8192),
	}, nil
}

// Name returns "jobio", the prefix of every reading's key.
func (s *Source) Name() string { return "jobio" }

// Jobs returns the ids of the jobs the last Read reported, sorted, for the
// agent to list as running and to reconcile with the scheduler hooks'
// records: the jobs the walks found, and a job whose cgroup has gone at the
// read that reports it once more. That last reading holds the job's final
// interval, so the job ran in it; leaving it out because the walk at the
// same read no longer found its cgroup would drop that interval's I/O. It is
// nil before the first Read.
func (s *Source) Jobs() []string { return slices.Clone(s.ids) }

// Close closes every kept descriptor (/proc/<pid>/io, cgroup directories,
// cgroup.procs, io.stat, /proc/uptime) and forgets all jobs;
// a later Read starts afresh, as a new Source would.
func (s *Source) Close() error {
	s.uptimeFile.close()
	for _, j := range s.jobs {
		j.close()
	}
	clear(s.jobs)
	clear(s.matches)
	s.ids, s.walked = nil, false
	return nil
}

// Read returns one reading per job, in job id order, with the job's
// monotonic totals under the names of CounterNames. Key is
// "jobio:<id>", Job is the id and Epoch is empty: the totals never go down,
// so the agent never sees a reset.
//
// The cgroup tree is walked on the first read, then every RescanEvery
// reads, and at the read after a job's cgroup was found gone; such a job is
// reported once more with its final totals and then dropped. A missing cgroup root gives an error wrapping
// source.ErrNoData; a node without job cgroups gives no readings and no
// error. Other errors (a walk error, a process whose files cannot be read,
// a missing /proc/uptime) are joined and returned with the readings.
func (s *Source) Read(ctx context.Context) ([]source.Reading, error) {
	var errs []error
	if !s.walked || s.sinceWalk >= s.rescanEvery {
		if err := s.walk(); err != nil {
			if errors.Is(err, source.ErrNoData) {
				return nil, err
			}
			errs = append(errs, err)
		}
	}
	s.sinceWalk++
	s.gen++

	mark, markOK := s.readUptime()
	if !markOK && len(s.ids) > 0 {
		errs = append(errs, fmt.Errorf("jobio: reading %s/uptime: processes first seen now only set a base", s.procRoot))
	}
	readings := make([]source.Reading, 0, len(s.ids))
	dropped := false
	for _, id := range s.ids {
		if err := ctx.Err(); err != nil {
			errs = append(errs, fmt.Errorf("jobio: reading jobs: %w", err))
			break
		}
		j := s.jobs[id]
		s.pids = s.pids[:0]
		j.errs = jobErrors{}
		present := !j.lost && s.listJob(j)
		if !present && j.gone {
			j.close() // reported once more at the previous read
			delete(s.jobs, id)
			dropped = true
			continue
		}
		j.gone = !present
		if j.gone && !j.lost {
			s.sinceWalk = s.rescanEvery // a job ended: walk again next time
		}
		s.account(j, mark, markOK)
		if present {
			s.readIOStat(j)
		} else {
			j.ioHave = false
			j.ioStatFile.close()
		}
		readings = append(readings, j.reading(s.now(), s.plan))
		if err := j.errs.err(j.id); err != nil {
			errs = append(errs, err)
		}
	}
	if dropped {
		s.sortIDs()
	}
	return readings, errors.Join(errs...)
}

// readUptime returns /proc/uptime in clock ticks: the mark that processes
// first seen at the next read are compared with.
func (s *Source) readUptime() (uint64, bool) {
	b, err := s.uptimeFile.read(kfd{}, cname{}, s.uptime, s.buf)
	s.keepBuf(b)
	if err != nil {
		return 0, false
	}
	return parseUptime(b)
}

// keepBuf keeps a buffer that readFile grew, for the next read.
func (s *Source) keepBuf(b []byte) {
	if cap(b) > cap(s.buf) {
		s.buf = b[:cap(b)]
	}
}

// walk looks for job directories under the cgroup root, breadth first to
// MaxDepth levels, and updates s.jobs: a new job id gets a new job, a known
// one keeps its state, and one not found any more is marked lost (reported
// once more, then dropped).
func (s *Source) walk() error {
	if err := s.checkRoot(); err != nil {
		return err
	}
	s.walks++
	errs := s.findJobDirs()
	for rel, m := range s.matches {
		if m.walk != s.walks {
			delete(s.matches, rel) // not seen by this walk
		}
	}
	s.walked, s.sinceWalk = true, 0
	s.takeFound()
	if len(errs) == 0 {
		// A job not found is lost, unless part of the tree could not be
		// read: then each job's own listing decides.
		s.markLost()
	}
	s.sortIDs()
	return errors.Join(errs...)
}

// checkRoot checks that the cgroup root is a directory, and forgets every
// job if it is not; a missing root gives an error wrapping
// source.ErrNoData.
func (s *Source) checkRoot() error {
	fi, err := os.Stat(s.cgroupRoot)
	if err != nil {
		s.dropAll()
		if errors.Is(err, fs.ErrNotExist) {
			return fmt.Errorf("jobio: cgroup root %s: %w", s.cgroupRoot, source.ErrNoData)
		}
		return fmt.Errorf("jobio: cgroup root: %w", err)
	}
	if !fi.IsDir() {
		s.dropAll()
		return fmt.Errorf("jobio: cgroup root %s is not a directory", s.cgroupRoot)
	}
	return nil
}

// findJobDirs lists the tree breadth first, filling s.walkFound with each
// job id found and its directory, and returns the errors of the
// directories that could not be listed.
func (s *Source) findJobDirs() []error {
	var errs []error
	clear(s.walkFound)
	queue := append(s.walkQueue[:0], walkDir{"", 0})
	for i := 0; i < len(queue); i++ {
		var err error
		if queue, err = s.visit(queue[i], queue); err != nil {
			errs = append(errs, err)
		}
	}
	clear(queue)
	s.walkQueue = queue[:0]
	return errs
}

// visit lists directory d: a subdirectory JobPattern matches is a job
// (recorded in s.walkFound if it captures an id) and is not descended
// into; any other is appended to queue while within MaxDepth. A directory
// gone meanwhile is no error.
func (s *Source) visit(d walkDir, queue []walkDir) ([]walkDir, error) {
	path := s.cgroupRoot
	if d.rel != "" {
		path += "/" + d.rel
	}
	names, err := s.subdirNames(path)
	if err != nil {
		if vanished(err) {
			return queue, nil
		}
		return queue, fmt.Errorf("jobio: walking %s: %w", path, err)
	}
	for _, nm := range names {
		m, isJob := s.match(s.childRel(d.rel, nm))
		if isJob {
			// The top-most match of an id wins: breadth first, a
			// shallower directory is seen before any deeper one, and the
			// walk does not descend into a job.
			if _, ok := s.walkFound[m.id]; !ok && m.id != "" {
				s.walkFound[m.id] = m.rel
			}
			continue
		}
		if d.depth+1 < s.maxDepth {
			queue = append(queue, walkDir{m.rel, d.depth + 1})
		}
	}
	return queue, nil
}

// childRel returns subdirectory nm of directory rel, relative to the
// cgroup root, in s.relBuf: valid until the next call.
func (s *Source) childRel(rel string, nm nameSpan) []byte {
	b := append(s.relBuf[:0], rel...)
	if rel != "" {
		b = append(b, '/')
	}
	b = append(b, s.nameBuf[nm.off:nm.end]...)
	s.relBuf = b
	return b
}

// takeFound makes the jobs of s.walkFound the jobs found: a new id gets a
// new job, and a job whose directory moved is pointed at the new one.
// Every job found lists its subtree afresh at its next read.
func (s *Source) takeFound() {
	for id, rel := range s.walkFound {
		j := s.jobs[id]
		if j == nil {
			j = &job{id: id, key: "jobio:" + id, procs: make(map[int]*proc)}
			s.jobs[id] = j
		}
		j.lost = false
		if j.rel != rel {
			j.setDir(rel, s.cgroupRoot+"/"+rel)
		}
		j.relist = true // every RescanEvery reads, each job's subtree too
	}
}

// markLost marks lost every job the walk did not find.
func (s *Source) markLost() {
	for id, j := range s.jobs {
		if _, ok := s.walkFound[id]; !ok {
			j.lost = true
		}
	}
}

// dirMatch is JobPattern's verdict on a directory, kept between walks so
// that each walk runs the pattern only on directories it has not seen.
type dirMatch struct {
	rel  string // the directory, relative to the cgroup root
	id   string // the job id it captures; empty if none
	job  bool   // the pattern matches: a job directory, or one not to descend into
	walk uint64 // the last walk that saw it
}

// match returns JobPattern's verdict on directory rel, from s.matches or
// computed now, and whether the pattern matches.
func (s *Source) match(rel []byte) (*dirMatch, bool) {
	m := s.matches[string(rel)]
	if m == nil {
		m = &dirMatch{rel: string(rel)}
		if sub := s.re.FindSubmatch(rel); sub != nil {
			m.job, m.id = true, string(sub[1])
		}
		s.matches[m.rel] = m
	}
	m.walk = s.walks
	return m, m.job
}

// walkDir is a directory to list in a walk: its path relative to the
// cgroup root and its depth below it.
type walkDir struct {
	rel   string
	depth int
}

// nameSpan is a name held in Source.nameBuf.
type nameSpan struct{ off, end int }

// subdirNames returns the names of the subdirectories of path, sorted, as
// spans of s.nameBuf, valid until the next call.
func (s *Source) subdirNames(path string) ([]nameSpan, error) {
	s.nameBuf, s.names = s.nameBuf[:0], s.names[:0]
	err := eachSubdir(path, s.dbuf, func(name []byte) {
		off := len(s.nameBuf)
		s.nameBuf = append(s.nameBuf, name...)
		s.names = append(s.names, nameSpan{off, len(s.nameBuf)})
	})
	if err != nil {
		return nil, err
	}
	b := s.nameBuf
	slices.SortFunc(s.names, func(x, y nameSpan) int { return bytes.Compare(b[x.off:x.end], b[y.off:y.end]) })
	return s.names, nil
}

// dropAll forgets every job, as when the cgroup root has gone.
func (s *Source) dropAll() {
	for _, j := range s.jobs {
		j.close()
	}
	clear(s.jobs)
	s.ids, s.walked = s.ids[:0], false
}

// sortIDs rebuilds s.ids from s.jobs.
func (s *Source) sortIDs() {
	s.ids = s.ids[:0]
	for id := range s.jobs {
		s.ids = append(s.ids, id)
	}
	slices.Sort(s.ids)
}

// readIOStat adds the growth of the job cgroup's io.stat, summed over
// devices, to the job's totals. The first read of a cgroup, a missing file
// and a sum that went down (the cgroup was recreated) set a new base.
func (s *Source) readIOStat(j *job) {
	b, err := s.readIOStatFile(j)
	if err != nil {
		// No io controller in the job's parent's cgroup.subtree_control, or
		// the cgroup went away meanwhile.
		if !vanished(err) {
			j.errs.add(err)
		}
		j.ioHave = false
		return
	}
	sum, malformed := sumIOStatBytes(b)
	j.errs.malformed += malformed
	if j.ioHave {
		var d [nIOStat]uint64
		down := false
		for i := range sum {
			if sum[i] < j.ioLast[i] {
				down = true
				break
			}
			d[i] = sum[i] - j.ioLast[i]
		}
		if !down {
			for i := range d {
				j.totals[nProcIO+i] += d[i]
			}
		}
	}
	j.ioLast, j.ioHave = sum, true
}

// readIOStatFile reads the job directory's io.stat, kept open (see
// keptFile) and opened by name in the kept job directory.
func (s *Source) readIOStatFile(j *job) ([]byte, error) {
	b, err := j.ioStatFile.read(j.root.dir, ioStatName, j.ioStat, s.buf)
	s.keepBuf(b)
	return b, err
}

// vanished reports whether err means a file or directory went away while
// it was read: a process that exited (ESRCH from procfs) or a removed
// cgroup (ENOENT, or ENODEV from a removed kernfs node).
func vanished(err error) bool {
	return errors.Is(err, fs.ErrNotExist) || errors.Is(err, syscall.ESRCH) ||
		errors.Is(err, syscall.ENODEV) || errors.Is(err, syscall.ENOTDIR)
}

// jobErrors collects one job's unexpected errors during one read.
type jobErrors struct {
	first     error
	n         int
	malformed int
}

// add records err.
func (e *jobErrors) add(err error) {
	if e.first == nil {
		e.first = err
	}
	e.n++
}

// err returns the job's errors as one error, or nil.
func (e *jobErrors) err(id string) error {
	switch e.n {
	case 0:
		return nil
	case 1:
		return fmt.Errorf("jobio: job %s: %w", id, e.first)
	}
	return fmt.Errorf("jobio: job %s: %d errors, first: %w", id, e.n, e.first)
}

// pidPath returns "<procRoot>/<pid>/<file>".
func (s *Source) pidPath(pid int, file string) string {
	var b [20]byte
	return s.procRoot + "/" + string(strconv.AppendInt(b[:0], int64(pid), 10)) + "/" + file
}
