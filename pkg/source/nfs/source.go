package nfs

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"sluice/pkg/source"
	"sluice/pkg/source/internal/procfile"
)

// DefaultCheckEvery is how many reads share one check that the open file is
// still the one at the path. /proc/self/mountstats never changes identity
// while the agent runs, so the check only serves roots that are plain
// files (tests, the simulator); at the agent's 5 s interval a replaced file
// is seen within a minute.
const DefaultCheckEvery = 12

// maxFile bounds the file size the Source reads: about 10 KiB per NFSv4
// mount, so this is far above any real node and only stops runaway input.
const maxFile = 64 << 20

// ageSlack is how many seconds the kernel's "age:" (whole seconds of
// jiffies) may lag or lead the Source's clock between two reads.
const ageSlack = 2

// Source reads the NFS client counters of every NFS superblock in
// <procRoot>/self/mountstats, the mount namespace of the agent itself.
//
// It keeps the file open and reads it again from offset 0 with pread on
// every call (a seq_file regenerates its content on a read at offset 0),
// through pkg/source/internal/procfile, which also opens the path again
// once after a failed read. It reuses its buffer and parse results, so it
// must be used by one goroutine at a time. Close releases the file.
type Source struct {
	path string
	now  func() time.Time

	file *procfile.File
	st   Stats
	p    parser

	kept  []kept
	state map[string]*mountState
	keys  map[string]*deviceKey // by device
	gen   uint64
	plan  *plan // set by SumWith
}

// kept is one mount chosen for a reading.
type kept struct {
	m         *Mount
	key       string
	malformed int
}

// deviceKey caches "nfs:"+device, to save an allocation per mount and read.
type deviceKey struct {
	key string
	gen uint64 // the Read that last used it
}

// mountState is what the Source remembers of a reading key between reads to
// tell a remount from an ordinary read.
type mountState struct {
	age   uint64    // the last age: seen
	at    time.Time // when it was seen
	epoch int64     // the reading's Epoch, a Unix time in seconds
	text  string    // epoch formatted, kept to save an allocation per read
	gen   uint64    // the Read that last saw the key
	slots []opSlot  // the plan's slots of the key's per-op lines (plan.sum)
}

// NewSource returns a Source reading <procRoot>/self/mountstats (procRoot is
// normally "/proc"). now stamps each reading and dates mount start times;
// nil means time.Now.
func NewSource(procRoot string, now func() time.Time) *Source {
	if now == nil {
		now = time.Now
	}
	path := filepath.Join(procRoot, "self", "mountstats")
	return &Source{
		path:  path,
		now:   now,
		file:  newFile(path, DefaultCheckEvery),
		state: make(map[string]*mountState),
		keys:  make(map[string]*deviceKey),
	}
}

// newFile returns the kept file at path, checked every checkEvery reads.
func newFile(path string, checkEvery int) *procfile.File {
	return procfile.New(path, procfile.Options{CheckEvery: checkEvery, MaxSize: maxFile})
}

// WithCheckEvery sets how many reads share one check that the open file is
// still the file at the path (at least 1: check on every read) and returns s.
func (s *Source) WithCheckEvery(n int) *Source {
	_ = s.file.Close() // a file open already is opened again by the next Read
	s.file = newFile(s.path, max(n, 1))
	return s
}

// Name returns "nfs", the prefix of every reading's key.
func (s *Source) Name() string { return "nfs" }

// Close closes the file the Source keeps open. A later Read opens it again.
func (s *Source) Close() error { return s.file.Close() }

// Read returns one reading per NFS superblock, in mount order.
//
// Mounts that share a superblock are reported once, under the first one's
// key; see the package documentation for how they are recognised. Key is
// "nfs:<device>", or "nfs:<device>@<mount point>" for a second superblock
// of the same device. Epoch is the superblock's start time (now - age, Unix
// seconds) as first seen; it changes only when "age:" shows a remount, or
// shows that another, older superblock has taken the key, in which case
// that one reading is left out (see the epoch method). Partial mounts are
// skipped. Malformed lines are counted on the reading of
// their mount, and lines outside any reported mount on the first reading.
//
// A missing file, or one without NFS mounts, gives an error wrapping
// source.ErrNoData.
func (s *Source) Read(ctx context.Context) ([]source.Reading, error) {
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("nfs: reading %s: %w", s.path, err)
	}
	data, err := s.load()
	if err != nil {
		return nil, err
	}
	s.p.parse(data, &s.st)
	if len(s.st.Mounts) == 0 {
		return nil, fmt.Errorf("nfs: no NFS mounts in %s: %w", s.path, source.ErrNoData)
	}

	s.gen++
	unattributed := s.st.Malformed
	s.kept = s.kept[:0]
	for i := range s.st.Mounts {
		m := &s.st.Mounts[i]
		unattributed -= m.Malformed
		if m.Partial {
			unattributed += m.Malformed
			continue
		}
		s.keep(m)
	}
	if len(s.kept) == 0 {
		return nil, fmt.Errorf("nfs: %s: all %d NFS mounts are incomplete", s.path, len(s.st.Mounts))
	}

	now := s.now()
	readings := make([]source.Reading, 0, len(s.kept))
	for i := range s.kept {
		k := &s.kept[i]
		st, ok := s.epoch(k.key, k.m.Age, now)
		if !ok {
			continue
		}
		r := source.Reading{Key: k.key, Epoch: st.text, Time: now, Malformed: k.malformed}
		if s.plan != nil {
			st.slots = s.plan.sum(k.m, st.slots, &r)
		} else {
			r.Counters = k.m.Raw()
		}
		readings = append(readings, r)
	}
	for key, st := range s.state {
		if st.gen != s.gen {
			delete(s.state, key)
		}
	}
	for dev, k := range s.keys {
		if k.gen != s.gen {
			delete(s.keys, dev)
		}
	}
	if len(readings) > 0 {
		readings[0].Malformed += unattributed
	}
	return readings, nil
}

// keep adds m to s.kept unless it shows the same superblock as a mount
// already kept, in which case its malformed lines go to that one.
func (s *Source) keep(m *Mount) {
	sharedDevice := false
	for i := range s.kept {
		k := &s.kept[i]
		if k.m.Device != m.Device {
			continue
		}
		if sameSuperblock(k.m, m) {
			k.malformed += m.Malformed
			return
		}
		sharedDevice = true
	}
	dk := s.keys[m.Device]
	if dk == nil {
		dk = &deviceKey{key: "nfs:" + m.Device}
		s.keys[m.Device] = dk
	}
	dk.gen = s.gen
	key := dk.key
	if sharedDevice {
		key += "@" + m.MountPoint
	}
	s.kept = append(s.kept, kept{m: m, key: key, malformed: m.Malformed})
}

// sameSuperblock reports whether two mounts of one device show the same
// superblock. The kernel keeps counters per superblock and shares one
// superblock between mounts of an export with the same options unless
// nosharecache is set (nfs_compare_super in fs/nfs/super.c), and the
// superblock's options are what "opts:" prints. So: never for nosharecache
// or ages more than ageSlack apart (created at different times); otherwise
// yes if the counters are identical or the options are. The second rule
// matters on a busy client: each mount's counters are summed when it is
// printed, so two mounts of one superblock can differ by the I/O done in
// between.
func sameSuperblock(a, b *Mount) bool {
	if unshared(a.Opts) || unshared(b.Opts) || absDiff(a.Age, b.Age) > ageSlack {
		return false
	}
	if a.Opts == b.Opts {
		return true
	}
	return a.Bytes == b.Bytes && a.Events == b.Events && a.HasEvents == b.HasEvents &&
		slices.Equal(a.Ops, b.Ops)
}

// unshared reports whether the mount options include nosharecache.
func unshared(opts string) bool {
	for o := range strings.SplitSeq(opts, ",") {
		if o == "nosharecache" {
			return true
		}
	}
	return false
}

func absDiff(a, b uint64) uint64 {
	if a > b {
		return a - b
	}
	return b - a
}

// epoch returns the state of key, whose text is the Epoch of key's reading
// for a mount of the given age read at now, and whether to report the
// reading at all.
//
// The epoch is the mount's start time, now - age, fixed when the key is
// first seen, so that jitter between the clock and the kernel's age does
// not move it. A smaller age than last time means a new superblock under
// the key: if it is younger than the time since the last read, it is a
// remount and the new epoch makes the agent treat its counters as a
// reset. Otherwise an older superblock has taken the key over (the first of
// two superblocks of one device was unmounted), as it has when the age
// jumps ahead of the clock; its counters are not a delta of the old ones,
// so the reading is left out once and the agent starts the key afresh.
func (s *Source) epoch(key string, age uint64, now time.Time) (*mountState, bool) {
	start := now.Round(time.Second).Unix() - int64(min(age, 1<<62))
	st := s.state[key]
	if st == nil {
		st = &mountState{age: age, at: now, epoch: start, text: strconv.FormatInt(start, 10), gen: s.gen}
		s.state[key] = st
		return st, true
	}
	elapsed := max(int64(now.Sub(st.at)/time.Second), 0)
	report, restart := true, false
	switch {
	case age < st.age:
		report, restart = age <= uint64(elapsed)+ageSlack, true
	case age-st.age > uint64(elapsed)+ageSlack:
		report, restart = false, true
	}
	if restart {
		st.epoch = max(start, st.epoch+1)
		st.text = strconv.FormatInt(st.epoch, 10)
	}
	st.age, st.at, st.gen = age, now, s.gen
	return st, report
}

// load returns the file's current content, as procfile.File.Load does.
func (s *Source) load() ([]byte, error) {
	data, err := s.file.Load()
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("nfs: %s: %w", s.path, source.ErrNoData)
		}
		return nil, fmt.Errorf("nfs: %w", err)
	}
	return data, nil
}

// Raw returns the mount's cumulative counters under the raw names listed in
// the package documentation: the eight "bytes.*" fields, the 27 "events.*"
// fields (only if HasEvents) and "op.<NAME>" (the operation count) for every
// per-op line. It does not look at Partial.
func (m *Mount) Raw() map[string]uint64 {
	c := make(map[string]uint64, NumBytes+NumEvents+len(m.Ops))
	for i, v := range m.Bytes {
		c[bytesKeys[i]] = v
	}
	if m.HasEvents {
		for i, v := range m.Events {
			c[eventKeys[i]] = v
		}
	}
	for _, op := range m.Ops {
		c[opKey(op.Name)] = op.Ops
	}
	return c
}
