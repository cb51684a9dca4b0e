package lustre

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"syscall"
	"time"

	"sluice/pkg/source"
)

// Source reads every Lustre client mount's llite stats file under a root
// directory, normally /sys/kernel/debug/lustre/llite (Lustre 2.12+) or
// /proc/fs/lustre/llite (older).
//
// A Source keeps each mount's stats file open and reads it again from
// offset 0 (the file is regenerated on every read at offset 0), and keeps
// its read buffer between calls, so it must be used by one goroutine at a
// time. Close releases the files.
type Source struct {
	root    string
	now     func() time.Time
	br      *bufio.Reader
	fr      fileReader // br's source, set for each file
	scratch []Counter
	plan    *plan // set by SumWith

	// mounts caches the instance directories found by the last listing;
	// the root is listed again every rescanEvery reads, or at once when a
	// listed mount's file has gone, so listing costs little per read.
	mounts      []*mount
	sinceScan   int
	rescanEvery int
}

// mount is one instance directory and its open stats file.
type mount struct {
	name     string
	key      string      // the reading key, "lustre:<name>"
	path     string      // <root>/<name>/stats
	f        *os.File    // nil until first read, and after a failed one
	fi       os.FileInfo // f's identity, to tell a replaced file
	snapshot time.Time   // snapshot_time at the last read
	readAt   time.Time   // Source clock at the last read
	memo     memo        // the last read's lines (see memo)
	slots    []slot      // the plan's targets by position (see plan.sum)
}

// DefaultRescanEvery is how many reads reuse one listing of the root: at
// the agent's default 5 s interval a new mount is seen within a minute.
const DefaultRescanEvery = 12

// NewSource returns a Source reading <root>/<instance>/stats. now stamps
// each reading; nil means time.Now.
func NewSource(root string, now func() time.Time) *Source {
	if now == nil {
		now = time.Now
	}
	return &Source{
		root:        root,
		now:         now,
		br:          bufio.NewReaderSize(nil, readSize),
		scratch:     make([]Counter, 0, 40),
		rescanEvery: DefaultRescanEvery,
	}
}

// WithRescanEvery sets how many reads reuse one listing of the root
// (at least 1: list on every read) and returns s.
func (s *Source) WithRescanEvery(n int) *Source {
	s.rescanEvery = max(n, 1)
	return s
}

// Name returns "lustre", the prefix of every reading's key.
func (s *Source) Name() string { return "lustre" }

// Read returns one reading per mount instance, in directory order.
//
// Reading.Time is the read time rather than the file's snapshot_time,
// because 2.15.0 and 2.15.1 print the latter as time since boot. Epoch is
// the stats start_time ("<sec>.<9-digit nsec>"), empty before 2.15 and on
// 2.15.0/2.15.1, where reset detection falls back to the instance name and
// falling values.
//
// A missing root, or one with no mounts, gives an error wrapping
// source.ErrNoData. A mount that disappears while it is read (an unmount
// race) is skipped silently. Other per-mount errors are joined and returned
// with the readings of the remaining mounts.
func (s *Source) Read(ctx context.Context) ([]source.Reading, error) {
	if s.mounts == nil || s.sinceScan >= s.rescanEvery {
		if err := s.scan(); err != nil {
			return nil, err
		}
	}
	s.sinceScan++
	readings := make([]source.Reading, 0, len(s.mounts))
	var errs []error
	gone := false
	for _, m := range s.mounts {
		if err := ctx.Err(); err != nil {
			errs = append(errs, fmt.Errorf("lustre: reading %s: %w", s.root, err))
			break
		}
		path := m.path
		now := s.now()
		st, err := s.readMount(m, path, now)
		if err != nil {
			m.close()
			if vanished(path, err) {
				gone = true
				continue
			}
			errs = append(errs, fmt.Errorf("lustre: reading %s: %w", path, err))
			continue
		}
		r := source.Reading{Key: m.key, Epoch: epoch(st), Time: now, Malformed: st.Malformed}
		if s.plan != nil {
			m.slots = s.plan.sum(st.Counters, m.slots, &r)
		} else {
			r.Counters = st.Raw()
		}
		readings = append(readings, r)
	}
	if gone {
		s.sinceScan = s.rescanEvery // an unmount: list again next time
	}
	if len(readings) == 0 && len(errs) == 0 {
		s.mounts = nil // nothing mounted: look again on every read
		return nil, fmt.Errorf("lustre: no mounts under %s: %w", s.root, source.ErrNoData)
	}
	return readings, errors.Join(errs...)
}

// scan lists the instance directories under the root.
func (s *Source) scan() error {
	entries, err := os.ReadDir(s.root)
	if err != nil {
		s.mounts = nil
		if errors.Is(err, fs.ErrNotExist) {
			return fmt.Errorf("lustre: llite directory %s: %w", s.root, source.ErrNoData)
		}
		return fmt.Errorf("lustre: listing %s: %w", s.root, err)
	}
	old := make(map[string]*mount, len(s.mounts))
	for _, m := range s.mounts {
		old[m.name] = m
	}
	s.mounts = s.mounts[:0]
	for _, e := range entries {
		if !e.IsDir() && e.Type()&fs.ModeSymlink == 0 {
			continue
		}
		m := old[e.Name()]
		if m == nil {
			m = &mount{name: e.Name(), key: "lustre:" + e.Name(), path: filepath.Join(s.root, e.Name(), "stats")}
		}
		delete(old, e.Name())
		s.mounts = append(s.mounts, m)
	}
	for _, m := range old { // unmounted since the last listing
		m.close()
	}
	s.sinceScan = 0
	return nil
}

// Close closes every open stats file.
func (s *Source) Close() error {
	for _, m := range s.mounts {
		m.close()
	}
	return nil
}

func (m *mount) close() {
	if m.f != nil {
		m.f.Close()
		m.f = nil
	}
}

// readMount reads a mount's stats file through its open descriptor. A live
// stats file sums its counters at every read, so its snapshot_time always
// moves on; one that stands still while the Source's clock moved may be a
// descriptor of a file that was replaced on disk (as a simulator or a test
// does). The path is then looked up, and opened and read again if it names
// another file; if it names the same one, the file simply did not change
// (a fixture read by agent bench), and the read stands.
func (s *Source) readMount(m *mount, path string, now time.Time) (Stats, error) {
	fresh := m.f == nil
	if fresh {
		f, err := os.Open(path)
		if err != nil {
			return Stats{}, err
		}
		if m.fi, err = f.Stat(); err != nil {
			f.Close()
			return Stats{}, err
		}
		m.f = f
	}
	st, err := s.parseFrom(m)
	if err != nil {
		return Stats{}, err
	}
	stale := !fresh && !st.SnapshotTime.IsZero() && st.SnapshotTime.Equal(m.snapshot) && now.After(m.readAt)
	if stale && m.replaced(path) {
		m.close()
		return s.readMount(m, path, now)
	}
	m.snapshot, m.readAt = st.SnapshotTime, now
	return st, nil
}

// replaced reports whether path no longer names the file m has open.
func (m *mount) replaced(path string) bool {
	fi, err := os.Stat(path)
	return err != nil || !os.SameFile(fi, m.fi)
}

// parseFrom parses a mount's stats file from offset 0 with the Source's
// buffers and the mount's memo. The returned Counters alias s.scratch and
// are valid until the next call.
func (s *Source) parseFrom(m *mount) (Stats, error) {
	s.fr = fileReader{f: m.f}
	s.br.Reset(&s.fr)
	st, err := parse(s.br, s.scratch, &m.memo)
	s.br.Reset(nil)
	s.scratch = st.Counters
	return st, err
}

// fileReader reads a file from offset 0 with pread, as io.SectionReader
// does, but can be set again for the next file without allocating, and
// takes a short first read as the whole file when it must be one.
//
// A stats file is a seq_file: a read returns records until the file ends,
// the reader's buffer is full, or the next record does not fit in the
// seq_file's own buffer, which is at least a page (seq_read_iter in
// fs/seq_file.c, from memory). A record here is one counter line (the
// first also carries the time stamp lines), well under maxLine, so a first
// read that stopped short of the reader's buffer with at least maxLine of
// the smallest page (4 KiB) left over ended with the file, and the read
// that would return end of file is saved. A regular file (tests, the
// simulator) returns less than asked only at its end.
type fileReader struct {
	f   *os.File
	off int64
	eof bool
}

// minPage is the smallest page size Linux has, and so the smallest
// seq_file buffer.
const minPage = 4096

func (r *fileReader) Read(p []byte) (int, error) {
	if len(p) == 0 {
		return 0, nil
	}
	if r.eof {
		return 0, io.EOF
	}
	n, err := pread(r.f, p, r.off)
	if err != nil {
		return 0, err
	}
	if n == 0 {
		r.eof = true
		return 0, io.EOF
	}
	r.eof = r.off == 0 && n < len(p) && n+maxLine <= minPage
	r.off += int64(n)
	return n, nil
}

// pread is one pread(2) on f, retried on EINTR; os.File.ReadAt would read
// on to fill p.
func pread(f *os.File, p []byte, off int64) (int, error) {
	rc, err := f.SyscallConn()
	if err != nil {
		return 0, err
	}
	var n int
	var perr error
	if err := rc.Read(func(fd uintptr) bool {
		for {
			n, perr = syscall.Pread(int(fd), p, off)
			if perr != syscall.EINTR {
				return true
			}
		}
	}); err != nil {
		return 0, err
	}
	if perr != nil {
		return 0, &os.PathError{Op: "read", Path: f.Name(), Err: perr}
	}
	return n, nil
}

// vanished reports whether err means the stats file went away, as it does
// when the mount is unmounted between listing and reading: open fails with
// ENOENT (or ENOTDIR for an entry that is not a directory), and a debugfs
// file removed while open fails reads with EIO, so any error on a path that
// no longer exists counts too.
func vanished(path string, err error) bool {
	if errors.Is(err, fs.ErrNotExist) || errors.Is(err, syscall.ENOTDIR) {
		return true
	}
	_, serr := os.Stat(path)
	return errors.Is(serr, fs.ErrNotExist)
}

// epoch formats the stats start time as "<sec>.<9-digit nsec>", or "" when
// the file has none.
func epoch(st Stats) string {
	if !st.HasStartTime {
		return ""
	}
	var buf [32]byte
	b := strconv.AppendInt(buf[:0], st.StartTime.Unix(), 10)
	b = append(b, '.')
	ns := st.StartTime.Nanosecond()
	for div := 100000000; div > 0; div /= 10 {
		b = append(b, byte('0'+ns/div%10))
	}
	return string(b)
}
