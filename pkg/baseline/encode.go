package baseline

import (
	"bytes"
	"cmp"
	"compress/flate"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"slices"

	"github.com/DataDog/sketches-go/ddsketch"
	"github.com/DataDog/sketches-go/ddsketch/store"

	"sluice/pkg/metric"
)

// formatVersion is the first byte of an encoded Day; the layout is in
// MarshalBinary's doc.
const formatVersion = 1

// maxBody bounds the decompressed body: twelve full sketches of MaxBins
// bins at the longest varfloat (9 bytes) are about 220 KiB, so anything
// past 1 MiB is not a Day (and not worth inflating).
const maxBody = 1 << 20

// checksum returns the CRC-32C of b. crc32.MakeTable builds the Castagnoli
// table once and returns the same one on every later call.
func checksum(b []byte) uint32 { return crc32.Checksum(b, crc32.MakeTable(crc32.Castagnoli)) }

// maxCount is the largest bin count accepted on decode: counts are float64
// in the sketch and exact integers only up to 2^53.
const maxCount = 1 << 53

// MarshalBinary encodes the day. Format version 1:
//
//	byte     version (1)
//	DEFLATE  (RFC 1951) stream of the body:
//	           uvarint  n, the number of metrics that follow (0..n-1)
//	           n times: uvarint idle count
//	                    uvarint length L of the sketch, 0 when empty
//	                    L bytes: ddsketch's compact encoding
//	                    (DDSketch.Encode) with the index mapping included
//	4 bytes  CRC-32C (Castagnoli) of every byte before it, little-endian
//
// n may be below metric.Count (a day written before a metric was added:
// the rest are empty) but not above it. The index mapping is kept in every
// sketch so a decoder can check it is the logarithmic mapping of
// RelativeAccuracy instead of silently misreading bins; it costs 17 bytes
// per non-empty sketch before compression.
//
// DEFLATE because ddsketch's encoding spends about two bytes per bin, so a
// heavy-tailed day of twelve metrics with some 500 bins each is 12-16 KiB;
// neighbouring bins have similar counts and DEFLATE halves that, under the
// 8 KiB a day should take in bbolt (a realistic day of 50,000 windows per
// metric is about 6 KiB). The CRC is there because bbolt does not checksum
// values.
//
// Encoding costs a few hundred microseconds and about 1 MB of short-lived
// allocation (the DEFLATE writer's tables): encode a day when it is stored,
// not per window.
func (d *Day) MarshalBinary() ([]byte, error) { return d.AppendBinary(nil) }

// AppendBinary appends the encoding of MarshalBinary to b.
func (d *Day) AppendBinary(b []byte) ([]byte, error) {
	start := len(b)
	b = append(b, formatVersion)
	buf := bytes.NewBuffer(b)
	zw, err := flate.NewWriter(buf, flate.DefaultCompression)
	if err != nil {
		return b[:start], fmt.Errorf("encode baseline day: %w", err)
	}
	if _, err := zw.Write(d.appendBody(nil)); err != nil {
		return b[:start], fmt.Errorf("encode baseline day: %w", err)
	}
	if err := zw.Close(); err != nil {
		return b[:start], fmt.Errorf("encode baseline day: %w", err)
	}
	b = buf.Bytes()
	return binary.LittleEndian.AppendUint32(b, checksum(b[start:])), nil
}

// appendBody appends the uncompressed body to b.
func (d *Day) appendBody(b []byte) []byte {
	b = binary.AppendUvarint(b, uint64(metric.Count))
	var sk []byte
	for i, s := range d.sketches {
		b = binary.AppendUvarint(b, d.idle[i])
		if s.IsEmpty() {
			b = binary.AppendUvarint(b, 0)
			continue
		}
		sk = sk[:0]
		s.Encode(&sk, false)
		b = binary.AppendUvarint(b, uint64(len(sk)))
		b = append(b, sk...)
	}
	return b
}

// UnmarshalBinary replaces d's contents with the day encoded in data. Any
// input that is not a well-formed encoding (wrong version or checksum,
// truncated, a sketch with a foreign mapping, negative values, counts that
// are not whole numbers of windows) gives an error wrapping [ErrCorrupt]
// and leaves d unchanged.
func (d *Day) UnmarshalBinary(data []byte) error {
	nd, err := decodeDay(data)
	if err != nil {
		return fmt.Errorf("%w: %w", ErrCorrupt, err)
	}
	*d = *nd
	return nil
}

func decodeDay(data []byte) (*Day, error) {
	if len(data) < 1+4 {
		return nil, fmt.Errorf("%d bytes is too short", len(data))
	}
	head, sum := data[:len(data)-4], binary.LittleEndian.Uint32(data[len(data)-4:])
	if v := head[0]; v != formatVersion {
		return nil, fmt.Errorf("format version %d, want %d", v, formatVersion)
	}
	if got := checksum(head); got != sum {
		return nil, fmt.Errorf("checksum %08x, stored %08x", got, sum)
	}
	// A bytes.Reader is an io.ByteReader, so flate reads no further than
	// the end of its stream and what is left over can be checked.
	zr := bytes.NewReader(head[1:])
	fr := flate.NewReader(zr)
	body, err := io.ReadAll(io.LimitReader(fr, maxBody+1))
	if err != nil {
		return nil, fmt.Errorf("inflate: %w", err)
	}
	if len(body) > maxBody {
		return nil, fmt.Errorf("body inflates past %d bytes", maxBody)
	}
	if zr.Len() != 0 {
		return nil, fmt.Errorf("%d bytes after the compressed body", zr.Len())
	}
	return decodeBody(body)
}

// decodeBody decodes the uncompressed body.
func decodeBody(r []byte) (*Day, error) {
	n, r, err := uvarint(r, "metric count")
	if err != nil {
		return nil, err
	}
	if n > uint64(metric.Count) {
		return nil, fmt.Errorf("%d metrics, this version knows %d", n, metric.Count)
	}
	d := NewDay()
	for i := range metric.ID(n) {
		if d.idle[i], r, err = uvarint(r, i.String()+" idle count"); err != nil {
			return nil, err
		}
		var l uint64
		if l, r, err = uvarint(r, i.String()+" sketch length"); err != nil {
			return nil, err
		}
		if l > uint64(len(r)) {
			return nil, fmt.Errorf("%s sketch: length %d, %d bytes left", i, l, len(r))
		}
		if l > 0 {
			if err := d.decodeSketch(i, r[:l]); err != nil {
				return nil, fmt.Errorf("%s sketch: %w", i, err)
			}
		}
		r = r[l:]
	}
	if len(r) != 0 {
		return nil, fmt.Errorf("%d bytes after the last metric", len(r))
	}
	return d, nil
}

func uvarint(b []byte, what string) (uint64, []byte, error) {
	v, n := binary.Uvarint(b)
	if n <= 0 {
		return 0, b, fmt.Errorf("%s: bad or truncated varint", what)
	}
	return v, b[n:], nil
}

// decodeSketch decodes one sketch into d.sketches[id]. The library decoder
// goes into sparse stores first (a map, bounded by the input size however
// wild the indices), then every bin is checked and copied into the
// collapsing store in index order.
func (d *Day) decodeSketch(id metric.ID, b []byte) error {
	s, err := ddsketch.DecodeDDSketch(b, store.SparseStoreConstructor, nil)
	if err != nil {
		return err
	}
	want := d.sketches[id]
	if !want.IndexMapping.Equals(s.IndexMapping) {
		return fmt.Errorf("index mapping %T (accuracy %g), want logarithmic with accuracy %g", s.IndexMapping, s.RelativeAccuracy(), RelativeAccuracy)
	}
	if !s.GetNegativeValueStore().IsEmpty() {
		return fmt.Errorf("negative values")
	}
	if z := s.GetZeroCount(); z != 0 {
		return fmt.Errorf("zero count %g in the non-idle sketch", z)
	}
	type bin struct {
		index int
		count float64
	}
	var bins []bin
	s.GetPositiveValueStore().ForEach(func(index int, count float64) bool {
		bins = append(bins, bin{index, count})
		return false
	})
	slices.SortFunc(bins, func(a, b bin) int { return cmp.Compare(a.index, b.index) })
	lo, hi := want.Index(want.MinIndexableValue()), want.Index(want.MaxIndexableValue())
	var total float64
	for _, bn := range bins {
		if bn.index < lo || bn.index > hi {
			return fmt.Errorf("bin index %d outside %d..%d", bn.index, lo, hi)
		}
		if !(bn.count > 0) || bn.count > maxCount || bn.count != math.Trunc(bn.count) {
			return fmt.Errorf("bin %d: count %g is not a whole number of windows", bn.index, bn.count)
		}
		if total += bn.count; total > maxCount {
			return fmt.Errorf("total count above %d", uint64(maxCount))
		}
	}
	dst := want.GetPositiveValueStore()
	for _, bn := range bins {
		dst.AddWithCount(bn.index, bn.count)
	}
	return nil
}
