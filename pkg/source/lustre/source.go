package lustre

import (
	"bufio"
	"context"
	"errors"
	"fmt"
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
// A Source keeps a read buffer between calls to avoid allocating it on every
// read, so it must be used by one goroutine at a time.
type Source struct {
	root    string
	now     func() time.Time
	br      *bufio.Reader
	scratch []Counter
}

// NewSource returns a Source reading <root>/<instance>/stats. now stamps
// each reading; nil means time.Now.
func NewSource(root string, now func() time.Time) *Source {
	if now == nil {
		now = time.Now
	}
	return &Source{
		root:    root,
		now:     now,
		br:      bufio.NewReaderSize(nil, maxLine),
		scratch: make([]Counter, 0, 40),
	}
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
	entries, err := os.ReadDir(s.root)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("lustre: llite directory %s: %w", s.root, source.ErrNoData)
		}
		return nil, fmt.Errorf("lustre: listing %s: %w", s.root, err)
	}
	readings := make([]source.Reading, 0, len(entries))
	var errs []error
	for _, e := range entries {
		if err := ctx.Err(); err != nil {
			errs = append(errs, fmt.Errorf("lustre: reading %s: %w", s.root, err))
			break
		}
		if !e.IsDir() && e.Type()&fs.ModeSymlink == 0 {
			continue
		}
		path := filepath.Join(s.root, e.Name(), "stats")
		st, err := s.readFile(path)
		if err != nil {
			if vanished(path, err) {
				continue
			}
			errs = append(errs, fmt.Errorf("lustre: reading %s: %w", path, err))
			continue
		}
		readings = append(readings, source.Reading{
			Key:       "lustre:" + e.Name(),
			Epoch:     epoch(st),
			Time:      s.now(),
			Counters:  st.Raw(),
			Malformed: st.Malformed,
		})
	}
	if len(readings) == 0 && len(errs) == 0 {
		return nil, fmt.Errorf("lustre: no mounts under %s: %w", s.root, source.ErrNoData)
	}
	return readings, errors.Join(errs...)
}

// readFile parses one stats file with the Source's buffers. The returned
// Counters alias s.scratch and are valid until the next call.
func (s *Source) readFile(path string) (Stats, error) {
	f, err := os.Open(path)
	if err != nil {
		return Stats{}, err
	}
	s.br.Reset(f)
	st, err := parse(s.br, s.scratch)
	s.br.Reset(nil) // drop the reference to the closed file
	s.scratch = st.Counters
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	return st, err
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
