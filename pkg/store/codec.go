package store

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// ErrCorrupt means a record could not be decoded: truncated, of an unknown
// record version, or with bytes left over.
var ErrCorrupt = errors.New("corrupt record")

// enc appends a record's fields in the file's binary form: unsigned
// integers as uvarints, signed as zig-zag varints, floats as their 8 IEEE
// 754 bytes (so they come back bit for bit), strings with their length
// first, times as Unix nanoseconds after a presence byte.
type enc struct{ b []byte }

func (e *enc) byte(v byte)      { e.b = append(e.b, v) }
func (e *enc) uvarint(v uint64) { e.b = binary.AppendUvarint(e.b, v) }
func (e *enc) varint(v int64)   { e.b = binary.AppendVarint(e.b, v) }
func (e *enc) float(f float64)  { e.b = binary.LittleEndian.AppendUint64(e.b, math.Float64bits(f)) }
func (e *enc) str(s string)     { e.uvarint(uint64(len(s))); e.b = append(e.b, s...) }
func (e *enc) count(n int)      { e.uvarint(uint64(n)) }
func (e *enc) bool(v bool)      { e.byte(boolByte(v)) }
func (e *enc) int(v int)        { e.varint(int64(v)) }
func (e *enc) levels(l *coding.Levels) {
	for _, x := range l {
		e.byte(byte(x))
	}
}

func (e *enc) grades(g *coding.Grades) {
	for _, x := range g {
		e.byte(byte(x))
	}
}

func (e *enc) values(v *metric.Values) {
	for _, x := range v {
		e.uvarint(x)
	}
}

func (e *enc) rates(r *metric.Rates) {
	for _, x := range r {
		e.float(x)
	}
}

// time writes 0 for the zero time, else 1 and the Unix nanoseconds: the
// zero time.Time has no Unix nanosecond form.
func (e *enc) time(t time.Time) {
	if t.IsZero() {
		e.byte(0)
		return
	}
	e.byte(1)
	e.varint(t.UnixNano())
}

func boolByte(v bool) byte {
	if v {
		return 1
	}
	return 0
}

// dec reads what enc wrote. The first failure sticks: later reads return
// zero values, and err says which field failed where.
type dec struct {
	b   []byte
	off int
	err error
}

func (d *dec) fail(field, why string) {
	if d.err == nil {
		d.err = fmt.Errorf("%w: %s at byte %d: %s", ErrCorrupt, field, d.off, why)
	}
}

func (d *dec) byte(field string) byte {
	if d.err != nil {
		return 0
	}
	if d.off >= len(d.b) {
		d.fail(field, "truncated")
		return 0
	}
	d.off++
	return d.b[d.off-1]
}

func (d *dec) uvarint(field string) uint64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Uvarint(d.b[d.off:])
	if n <= 0 {
		d.fail(field, "bad or truncated uvarint")
		return 0
	}
	d.off += n
	return v
}

func (d *dec) varint(field string) int64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Varint(d.b[d.off:])
	if n <= 0 {
		d.fail(field, "bad or truncated varint")
		return 0
	}
	d.off += n
	return v
}

func (d *dec) float(field string) float64 {
	if d.err != nil {
		return 0
	}
	if len(d.b)-d.off < 8 {
		d.fail(field, "truncated")
		return 0
	}
	d.off += 8
	return math.Float64frombits(binary.LittleEndian.Uint64(d.b[d.off-8:]))
}

// count reads a length, refusing one larger than the bytes left could
// hold at min bytes per item: a corrupt length must not allocate.
func (d *dec) count(field string, min int) int {
	n := d.uvarint(field)
	if d.err == nil && n > uint64((len(d.b)-d.off)/max(min, 1)) {
		d.fail(field, fmt.Sprintf("count %d larger than the record", n))
		return 0
	}
	return int(n)
}

func (d *dec) str(field string) string {
	n := d.count(field, 1)
	if d.err != nil {
		return ""
	}
	d.off += n
	return string(d.b[d.off-n : d.off])
}

func (d *dec) bool(field string) bool {
	switch d.byte(field) {
	case 0:
		return false
	case 1:
		return true
	}
	d.fail(field, "not a boolean")
	return false
}

func (d *dec) metric(field string) metric.ID {
	id := metric.ID(d.byte(field))
	if !id.Valid() {
		d.fail(field, fmt.Sprintf("metric %d", id))
	}
	return id
}

func (d *dec) int(field string) int {
	v := d.varint(field)
	if v < math.MinInt32 || v > math.MaxInt32 {
		d.fail(field, fmt.Sprintf("%d out of range", v))
		return 0
	}
	return int(v)
}

func (d *dec) time(field string) time.Time {
	switch d.byte(field) {
	case 0:
		return time.Time{}
	case 1:
		return time.Unix(0, d.varint(field)).UTC()
	}
	d.fail(field, "bad time tag")
	return time.Time{}
}

func (d *dec) levels(field string, l *coding.Levels) {
	for i := range l {
		x := coding.Level(d.byte(field))
		if x > coding.Critical {
			d.fail(field, fmt.Sprintf("level %d", x))
		}
		l[i] = x
	}
}

func (d *dec) grades(field string, g *coding.Grades) {
	for i := range g {
		x := coding.Grade(d.byte(field))
		if x >= coding.GradeCount {
			d.fail(field, fmt.Sprintf("grade %d", x))
		}
		g[i] = x
	}
}

func (d *dec) values(field string, v *metric.Values) {
	for i := range v {
		v[i] = d.uvarint(field)
	}
}

func (d *dec) rates(field string, r *metric.Rates) {
	for i := range r {
		r[i] = d.float(field)
	}
}

// version reads a record's leading version byte and checks it is want.
func (d *dec) version(what string, want byte) {
	if v := d.byte(what + " version"); d.err == nil && v != want {
		d.fail(what+" version", fmt.Sprintf("%d (this build reads %d)", v, want))
	}
}

// end fails if bytes are left over, and returns the first error.
func (d *dec) end() error {
	if d.err == nil && d.off != len(d.b) {
		d.fail("end", fmt.Sprintf("%d bytes left over", len(d.b)-d.off))
	}
	return d.err
}
