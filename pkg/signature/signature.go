// Package signature keeps a job's signature: per metric, the sequence of
// the grades of its closed windows, run-length coded, with a provisional
// grade from the live window.
//
// # Basics
//
// [Signature.Append] adds one closed window's grades (one per metric) in
// O(metrics): a grade equal to the metric's last run extends the run,
// otherwise a new run starts. [Build] computes the same from a list of
// windows at once; the two always agree (a property test checks it), which
// is what lets the aggregator rebuild a signature from stored windows.
// [Signature.SetLive] records the live window's grades as a provisional
// next entry that [Signature.Append] replaces.
//
// The binary form ([Signature.MarshalBinary]) is what the store keeps:
// a version byte, the window count, then per metric the number of runs and
// each run as a grade byte and a uvarint length, then a byte saying whether
// a live entry follows (0 or 1) and, if so, its grades, one byte per
// metric. A job that spends hours at one grade costs three bytes per metric.
//
// # Caveats
//
// A Signature is not safe for concurrent use. Grades are site-relative (see
// package coding): signatures coded against different baselines compare
// only approximately.
package signature

import (
	"encoding/binary"
	"errors"
	"fmt"
	"strconv"
	"strings"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// Run is Count consecutive windows at one grade.
type Run struct {
	Grade coding.Grade `json:"grade"`
	Count uint32       `json:"count"`
}

// Signature is one job's grade sequences, one per metric.
type Signature struct {
	// Runs holds each metric's sequence of closed-window grades.
	Runs [metric.Count][]Run
	// Windows is the number of closed windows appended.
	Windows int
	// Live is the live window's grades, a provisional next entry; valid
	// when HasLive.
	Live    coding.Grades
	HasLive bool
}

// Append adds one closed window and drops the provisional live entry.
func (s *Signature) Append(g coding.Grades) {
	for id, gr := range g {
		runs := s.Runs[id]
		if n := len(runs); n > 0 && runs[n-1].Grade == gr {
			runs[n-1].Count++
			continue
		}
		s.Runs[id] = append(runs, Run{Grade: gr, Count: 1})
	}
	s.Windows++
	s.Live, s.HasLive = coding.Grades{}, false
}

// SetLive records the live window's grades as the provisional next entry.
func (s *Signature) SetLive(g coding.Grades) { s.Live, s.HasLive = g, true }

// Build returns the signature of windows appended in order.
func Build(windows []coding.Grades) Signature {
	var s Signature
	for _, w := range windows {
		s.Append(w)
	}
	return s
}

// Sequence expands one metric's runs into one grade per closed window.
func (s *Signature) Sequence(id metric.ID) []coding.Grade {
	out := make([]coding.Grade, 0, s.Windows)
	for _, r := range s.Runs[id] {
		for range r.Count {
			out = append(out, r.Grade)
		}
	}
	return out
}

// Text returns one metric's runs in compact form, e.g. "0x3 5 6x2", with
// the live grade after a '|' when there is one.
func (s *Signature) Text(id metric.ID) string {
	var b strings.Builder
	for i, r := range s.Runs[id] {
		if i > 0 {
			b.WriteByte(' ')
		}
		b.WriteByte(r.Grade.Byte())
		if r.Count > 1 {
			b.WriteByte('x')
			b.WriteString(strconv.FormatUint(uint64(r.Count), 10))
		}
	}
	if s.HasLive {
		if b.Len() > 0 {
			b.WriteByte(' ')
		}
		b.WriteByte('|')
		b.WriteByte(s.Live[id].Byte())
	}
	return b.String()
}

// version is the first byte of the binary form.
const version = 1

// MarshalBinary encodes the closed windows' runs and the live entry.
func (s *Signature) MarshalBinary() ([]byte, error) {
	b := []byte{version}
	b = binary.AppendUvarint(b, uint64(s.Windows))
	for id := range s.Runs {
		b = binary.AppendUvarint(b, uint64(len(s.Runs[id])))
		for _, r := range s.Runs[id] {
			b = append(b, byte(r.Grade))
			b = binary.AppendUvarint(b, uint64(r.Count))
		}
	}
	if !s.HasLive {
		return append(b, 0), nil
	}
	b = append(b, 1)
	for _, g := range s.Live {
		b = append(b, byte(g))
	}
	return b, nil
}

// ErrCorrupt is wrapped by every error of UnmarshalBinary.
var ErrCorrupt = errors.New("corrupt signature")

// UnmarshalBinary decodes the form MarshalBinary writes. It checks that
// every grade is valid, no run is empty, and each metric's runs add up to
// the window count.
func (s *Signature) UnmarshalBinary(b []byte) error {
	if len(b) == 0 || b[0] != version {
		return fmt.Errorf("%w: want version byte %d", ErrCorrupt, version)
	}
	d := decoder{b: b[1:]}
	var out Signature
	windows := d.uvarint()
	if d.err == nil && windows > uint64(len(b))*(1<<32) {
		d.fail("window count %d", windows)
	}
	out.Windows = int(windows)
	for id := range out.Runs {
		n := d.uvarint()
		if d.err == nil && n > uint64(len(d.b)) { // each run takes at least two bytes
			d.fail("%s: %d runs in %d bytes", metric.ID(id), n, len(d.b))
		}
		var total uint64
		for i := uint64(0); i < n && d.err == nil; i++ {
			r := d.run(metric.ID(id))
			total += uint64(r.Count)
			out.Runs[id] = append(out.Runs[id], r)
		}
		if d.err == nil && total != windows {
			d.fail("%s: runs cover %d windows, want %d", metric.ID(id), total, windows)
		}
	}
	d.live(&out)
	if d.err == nil && len(d.b) > 0 {
		d.fail("%d trailing bytes", len(d.b))
	}
	if d.err != nil {
		return d.err
	}
	*s = out
	return nil
}

// decoder reads the binary form, keeping the first error.
type decoder struct {
	b   []byte
	err error
}

func (d *decoder) fail(format string, args ...any) {
	if d.err == nil {
		d.err = fmt.Errorf("%w: "+format, append([]any{ErrCorrupt}, args...)...)
	}
}

func (d *decoder) uvarint() uint64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Uvarint(d.b)
	if n <= 0 || (n > 1 && d.b[n-1] == 0) { // the last test refuses padded forms
		d.fail("bad varint")
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *decoder) live(s *Signature) {
	if d.err != nil {
		return
	}
	if len(d.b) == 0 || d.b[0] > 1 {
		d.fail("want a live flag of 0 or 1")
		return
	}
	has := d.b[0] == 1
	d.b = d.b[1:]
	if !has {
		return
	}
	if len(d.b) < len(s.Live) {
		d.fail("truncated live grades")
		return
	}
	for i := range s.Live {
		if s.Live[i] = coding.Grade(d.b[i]); s.Live[i] >= coding.GradeCount {
			d.fail("live grade %d", d.b[i])
			return
		}
	}
	d.b = d.b[len(s.Live):]
	s.HasLive = true
}

func (d *decoder) run(id metric.ID) Run {
	if len(d.b) == 0 {
		d.fail("%s: truncated run", id)
		return Run{}
	}
	g := coding.Grade(d.b[0])
	d.b = d.b[1:]
	c := d.uvarint()
	switch {
	case d.err != nil:
	case g >= coding.GradeCount:
		d.fail("%s: grade %d", id, g)
	case c == 0 || c > 1<<32-1:
		d.fail("%s: run of %d windows", id, c)
	}
	return Run{Grade: g, Count: uint32(c)}
}
