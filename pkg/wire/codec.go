package wire

import (
	"encoding/binary"
	"fmt"
	"math"
	"math/bits"
	"slices"
	"strings"
	"time"
	"unicode/utf8"

	"sluice/pkg/metric"
)

// zeroTime is the encoded value of the zero time.Time. The zero Time lies
// far outside the int64 nanosecond range, so it needs a reserved value, and
// the range's lowest value costs nothing: no sampled clock reads 1677.
const zeroTime = math.MinInt64

// Encoding: each helper appends one field encoding from the package doc.

func appendUvarint(dst []byte, v uint64) []byte {
	for v >= 0x80 {
		dst = append(dst, byte(v)|0x80)
		v >>= 7
	}
	return append(dst, byte(v))
}

func appendVarint(dst []byte, v int64) []byte {
	return appendUvarint(dst, uint64(v<<1)^uint64(v>>63))
}

func appendFloat(dst []byte, f float64) []byte {
	return binary.LittleEndian.AppendUint64(dst, math.Float64bits(f))
}

func appendBool(dst []byte, v bool) []byte {
	if v {
		return append(dst, 1)
	}
	return append(dst, 0)
}

// appendString writes s as a string field, first making it fit the
// format: an encoder has no way to report an error, and writing a string
// every decoder rejects would lose the whole message instead of a few bytes.
func appendString(dst []byte, s string) []byte {
	if len(s) > MaxStringLen || !utf8.ValidString(s) {
		s = sanitize(s)
	}
	dst = appendUvarint(dst, uint64(len(s)))
	return append(dst, s...)
}

// sanitize replaces invalid UTF-8 with U+FFFD and cuts s to MaxStringLen
// bytes at a rune boundary.
func sanitize(s string) string {
	s = strings.ToValidUTF8(s, "\uFFFD")
	if len(s) > MaxStringLen {
		n := MaxStringLen
		for n > 0 && !utf8.RuneStart(s[n]) {
			n--
		}
		s = s[:n]
	}
	return s
}

// limit cuts a list to MaxCount items, for the same reason as appendString.
func limit[T any](xs []T) []T {
	if len(xs) > MaxCount {
		return xs[:MaxCount]
	}
	return xs
}

func appendStrings(dst []byte, ss []string) []byte {
	ss = limit(ss)
	dst = appendUvarint(dst, uint64(len(ss)))
	for _, s := range ss {
		dst = appendString(dst, s)
	}
	return dst
}

// appendValues writes the mask of non-zero metrics, then their values.
func appendValues(dst []byte, v *metric.Values) []byte {
	var mask uint64
	for i, x := range v {
		if x != 0 {
			mask |= 1 << i
		}
	}
	dst = appendUvarint(dst, mask)
	for m := mask; m != 0; m &= m - 1 {
		dst = appendUvarint(dst, v[bits.TrailingZeros64(m)])
	}
	return dst
}

// timeToNanos maps t to its encoded value. The zero Time becomes zeroTime;
// times outside the representable range are clamped into it.
func timeToNanos(t time.Time) int64 {
	if t.IsZero() {
		return zeroTime
	}
	// Between these seconds UnixNano cannot overflow.
	if s := t.Unix(); s > -9223372036 && s < 9223372036 {
		return t.UnixNano()
	}
	if !timeInRange(t) {
		if t.Unix() < 0 {
			return zeroTime + 1
		}
		return math.MaxInt64
	}
	return t.UnixNano()
}

// timeInRange reports whether t round-trips exactly: the zero Time, or a
// time whose Unix nanoseconds fit in (MinInt64, MaxInt64].
func timeInRange(t time.Time) bool {
	if t.IsZero() {
		return true
	}
	return !t.Before(time.Unix(0, zeroTime+1)) && !t.After(time.Unix(0, math.MaxInt64))
}

func nanosToTime(n int64) time.Time {
	if n == zeroTime {
		return time.Time{}
	}
	return time.Unix(0, n).UTC()
}

// reader decodes fields from a message. Its error is sticky: after the first
// failure every method returns a zero value, so decoders read field after
// field and check once at the end. Each method takes the field's name for
// the error's context; the name costs nothing unless the read fails.
type reader struct {
	b    []byte
	off  int
	kind Kind
	err  error
	in   *Decoder // interns strings when non-nil
}

func (r *reader) fail(field string, sentinel error, detail string) {
	if r.err != nil {
		return
	}
	if detail != "" {
		r.err = fmt.Errorf("wire: %s: %s: %s: %w", r.kind, field, detail, sentinel)
	} else {
		r.err = fmt.Errorf("wire: %s: %s: %w", r.kind, field, sentinel)
	}
}

func (r *reader) remaining() int { return len(r.b) - r.off }

func (r *reader) uvarint(field string) uint64 {
	if r.err != nil {
		return 0
	}
	if r.off < len(r.b) && r.b[r.off] < 0x80 {
		v := uint64(r.b[r.off])
		r.off++
		return v
	}
	v, n := binary.Uvarint(r.b[r.off:])
	if n == 0 {
		r.fail(field, ErrTruncated, "")
		return 0
	}
	if n < 0 {
		r.fail(field, ErrMalformed, "varint overflows 64 bits")
		return 0
	}
	r.off += n
	return v
}

func (r *reader) varint(field string) int64 {
	u := r.uvarint(field)
	return int64(u>>1) ^ -int64(u&1)
}

// uint32 reads a uvarint that must fit in 32 bits.
func (r *reader) uint32(field string) uint32 {
	u := r.uvarint(field)
	if u > math.MaxUint32 {
		r.fail(field, ErrMalformed, fmt.Sprintf("%d overflows 32 bits", u))
		return 0
	}
	return uint32(u)
}

// int32 reads a varint that must fit in 32 bits.
func (r *reader) int32(field string) int32 {
	v := r.varint(field)
	if v < math.MinInt32 || v > math.MaxInt32 {
		r.fail(field, ErrMalformed, fmt.Sprintf("%d overflows 32 bits", v))
		return 0
	}
	return int32(v)
}

func (r *reader) byte(field string) byte {
	if r.err != nil {
		return 0
	}
	if r.off >= len(r.b) {
		r.fail(field, ErrTruncated, "")
		return 0
	}
	c := r.b[r.off]
	r.off++
	return c
}

func (r *reader) bool(field string) bool {
	switch c := r.byte(field); c {
	case 0:
		return false
	case 1:
		return true
	default:
		r.fail(field, ErrMalformed, fmt.Sprintf("bool byte %d", c))
		return false
	}
}

func (r *reader) float(field string) float64 {
	if r.err != nil {
		return 0
	}
	if r.remaining() < 8 {
		r.fail(field, ErrTruncated, "")
		return 0
	}
	u := binary.LittleEndian.Uint64(r.b[r.off:])
	r.off += 8
	return math.Float64frombits(u)
}

func (r *reader) time(field string) time.Time {
	return nanosToTime(r.varint(field))
}

func (r *reader) str(field string) string {
	n := r.uvarint(field)
	if r.err != nil {
		return ""
	}
	if n > MaxStringLen {
		r.fail(field, ErrMalformed, fmt.Sprintf("string of %d bytes exceeds %d", n, MaxStringLen))
		return ""
	}
	if n > uint64(r.remaining()) {
		r.fail(field, ErrTruncated, "")
		return ""
	}
	p := r.b[r.off : r.off+int(n)]
	if !utf8.Valid(p) {
		r.fail(field, ErrMalformed, "invalid UTF-8")
		return ""
	}
	r.off += int(n)
	if r.in != nil {
		return r.in.intern(p)
	}
	return string(p)
}

// count reads a list length. minSize is the fewest bytes one item takes;
// the returned capacity hint never exceeds what the remaining bytes could
// hold, so a forged count cannot make the decoder allocate much.
func (r *reader) count(field string, minSize int) (n, hint int) {
	u := r.uvarint(field)
	if r.err != nil {
		return 0, 0
	}
	if u > MaxCount {
		r.fail(field, ErrMalformed, fmt.Sprintf("count %d exceeds %d", u, MaxCount))
		return 0, 0
	}
	n = int(u)
	return n, min(n, r.remaining()/minSize)
}

func (r *reader) strings(field string, dst []string) []string {
	n, hint := r.count(field, 1)
	dst = slices.Grow(dst[:0], hint)
	for i := 0; i < n && r.err == nil; i++ {
		dst = append(dst, r.str(field))
	}
	return dst
}

func (r *reader) values(field string, v *metric.Values) {
	*v = metric.Values{}
	mask := r.uvarint(field)
	if r.err != nil {
		return
	}
	if mask>>metric.Count != 0 {
		r.fail(field, ErrMalformed, fmt.Sprintf("metric bit %d set, but only bits 0-%d name metrics", 63-bits.LeadingZeros64(mask), metric.Count-1))
		return
	}
	for m := mask; m != 0 && r.err == nil; m &= m - 1 {
		v[bits.TrailingZeros64(m)] = r.uvarint(field)
	}
}

// done returns the sticky error, or ErrMalformed when bytes are left over.
func (r *reader) done() error {
	if r.err == nil && r.off != len(r.b) {
		r.fail("trailing bytes", ErrMalformed, fmt.Sprintf("%d left after the last field", len(r.b)-r.off))
	}
	return r.err
}
