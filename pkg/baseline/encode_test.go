package baseline_test

import (
	"bytes"
	"compress/flate"
	"encoding/binary"
	"hash/crc32"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/DataDog/sketches-go/ddsketch"
	enc "github.com/DataDog/sketches-go/ddsketch/encoding"
	"github.com/DataDog/sketches-go/ddsketch/mapping"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/baseline"
	"sluice/pkg/metric"
)

func marshal(t testing.TB, d *baseline.Day) []byte {
	t.Helper()
	b, err := d.MarshalBinary()
	require.NoError(t, err)
	return b
}

func TestEncodeRoundTrip(t *testing.T) {
	idleOnly := baseline.NewDay()
	require.NoError(t, idleOnly.AddWithCount(metric.Removes, 0, 1234))
	tests := []struct {
		name string
		day  *baseline.Day
	}{
		{"empty", baseline.NewDay()},
		{"idle only", idleOnly},
		{"realistic", realisticDay(t, 1, 20_000)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := marshal(t, tt.day)
			var got baseline.Day
			require.NoError(t, got.UnmarshalBinary(b))
			requireSameDay(t, tt.day, &got)
			assert.Equal(t, b, marshal(t, &got), "re-encoding gives the same bytes")

			// The decoded day is a working day.
			require.NoError(t, got.Add(metric.ReadOps, 10))
			assert.Equal(t, tt.day.Windows(metric.ReadOps)+1, got.Windows(metric.ReadOps))

			prefixed, err := tt.day.AppendBinary([]byte("key:"))
			require.NoError(t, err)
			assert.Equal(t, append([]byte("key:"), b...), prefixed)
		})
	}
}

// TestDaySize asserts the stored size of a realistic heavy-tailed day of
// 50,000 windows per metric (the encoding is deterministic).
func TestDaySize(t *testing.T) {
	d := realisticDay(t, 1, 50_000)
	b := marshal(t, d)
	bins := 0
	for id := range metric.Count {
		bins += len(binsOf(d, id))
	}
	t.Logf("realistic day: %d bins, %d bytes uncompressed, %d bytes stored", bins, len(baseline.EncodeBody(d)), len(b))
	assert.LessOrEqual(t, len(b), 8<<10)

	// Not a target, for the record: every metric filling all MaxBins bins
	// with random counts of up to 10,000 windows.
	r := rand.New(rand.NewPCG(1, 1))
	full := baseline.NewDay()
	for id := range metric.Count {
		for i := range 2 * baseline.MaxBins {
			require.NoError(t, full.AddWithCount(id, 1e4*math.Pow(1.0203, float64(i)/2), 1+r.Uint64N(10_000)))
		}
	}
	t.Logf("worst case, %d bins per metric: %d bytes uncompressed, %d bytes stored",
		len(binsOf(full, 0)), len(baseline.EncodeBody(full)), len(marshal(t, full)))
}

// entry is one metric's part of a hand-built body.
type entry struct {
	idle   uint64
	sketch []byte
}

func bodyOf(n uint64, es ...entry) []byte {
	b := binary.AppendUvarint(nil, n)
	for _, e := range es {
		b = binary.AppendUvarint(b, e.idle)
		b = binary.AppendUvarint(b, uint64(len(e.sketch)))
		b = append(b, e.sketch...)
	}
	return b
}

// sketchBytes encodes a sketch built by add with the library directly.
func sketchBytes(t *testing.T, alpha float64, add func(s *ddsketch.DDSketch)) []byte {
	t.Helper()
	s, err := ddsketch.LogUnboundedDenseDDSketch(alpha)
	require.NoError(t, err)
	add(s)
	var b []byte
	s.Encode(&b, false)
	return b
}

// rawSketch encodes our mapping and one positive bin by hand, to reach
// values the library refuses to write.
func rawSketch(t *testing.T, index int64, count float64) []byte {
	t.Helper()
	m, err := mapping.NewLogarithmicMapping(baseline.RelativeAccuracy)
	require.NoError(t, err)
	var b []byte
	m.Encode(&b)
	enc.EncodeFlag(&b, enc.NewFlag(enc.FlagTypePositiveStore, enc.BinEncodingIndexDeltasAndCounts))
	enc.EncodeUvarint64(&b, 1)
	enc.EncodeVarint64(&b, index)
	enc.EncodeVarfloat64(&b, count)
	return b
}

// deflate compresses body as MarshalBinary does.
func deflate(body []byte) []byte {
	var buf bytes.Buffer
	zw, _ := flate.NewWriter(&buf, flate.BestSpeed)
	_, _ = zw.Write(body)
	_ = zw.Close()
	return buf.Bytes()
}

// sealRaw puts the version byte and the CRC-32C around payload, which
// MarshalBinary would have compressed.
func sealRaw(payload []byte) []byte {
	b := append([]byte{1}, payload...)
	return binary.LittleEndian.AppendUint32(b, crc32.Checksum(b, crc32.MakeTable(crc32.Castagnoli)))
}

func TestDecodeRejects(t *testing.T) {
	good := marshal(t, realisticDay(t, 3, 1000))
	valid := func(add func(s *ddsketch.DDSketch)) []byte { return sketchBytes(t, baseline.RelativeAccuracy, add) }
	oneValue := valid(func(s *ddsketch.DDSketch) { _ = s.Add(5) })
	tests := []struct {
		name  string
		input []byte
		want  string // part of the error message
	}{
		{"nil", nil, "too short"},
		{"short", []byte{1, 2, 3}, "too short"},
		{"unknown version", append([]byte{2}, good[1:]...), "format version 2"},
		{"bad checksum", append(bytes.Clone(good[:len(good)-1]), good[len(good)-1]^1), "checksum"},
		{"no stream", sealRaw(nil), "inflate"},
		{"not deflate", sealRaw([]byte{0xff, 0xff, 0xff}), "inflate"},
		{"truncated stream", sealRaw(deflate(baseline.EncodeBody(realisticDay(t, 3, 1000)))[:100]), "inflate"},
		{"bytes after the stream", sealRaw(append(deflate(bodyOf(0)), "junk"...)), "after the compressed body"},
		{"inflates past the bound", baseline.Seal(make([]byte, 2<<20)), "inflates past"},
		{"empty body", baseline.Seal(nil), "metric count"},
		{"too many metrics", baseline.Seal(bodyOf(uint64(metric.Count) + 1)), "this version knows"},
		{"missing metric", baseline.Seal(bodyOf(2, entry{0, nil})), "idle count"},
		{"sketch past the end", baseline.Seal(bodyOf(1, entry{0, oneValue})[:5]), "bytes left"},
		{"bytes after the last metric", baseline.Seal(append(bodyOf(1, entry{3, oneValue}), 0)), "after the last metric"},
		{"foreign accuracy", baseline.Seal(bodyOf(1, entry{0, sketchBytes(t, 0.02, func(s *ddsketch.DDSketch) { _ = s.Add(5) })})), "index mapping"},
		{"no mapping", baseline.Seal(bodyOf(1, entry{0, oneValue[17:]})), "missing index mapping"},
		{"negative value", baseline.Seal(bodyOf(1, entry{0, valid(func(s *ddsketch.DDSketch) { _ = s.Add(-5) })})), "negative values"},
		{"zero value", baseline.Seal(bodyOf(1, entry{0, valid(func(s *ddsketch.DDSketch) { _ = s.Add(0) })})), "zero count"},
		{"fractional count", baseline.Seal(bodyOf(1, entry{0, valid(func(s *ddsketch.DDSketch) { _ = s.AddWithCount(5, 0.5) })})), "whole number"},
		{"negative count", baseline.Seal(bodyOf(1, entry{0, rawSketch(t, 100, -1)})), "whole number"},
		{"NaN count", baseline.Seal(bodyOf(1, entry{0, rawSketch(t, 100, math.NaN())})), "whole number"},
		{"infinite count", baseline.Seal(bodyOf(1, entry{0, rawSketch(t, 100, math.Inf(1))})), "whole number"},
		{"huge index", baseline.Seal(bodyOf(1, entry{0, rawSketch(t, 1<<40, 1)})), "outside"},
		{"unknown flag", baseline.Seal(bodyOf(1, entry{0, []byte{0xff}})), "sketch"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d := baseline.NewDay()
			require.NoError(t, d.Add(metric.Opens, 5))
			err := d.UnmarshalBinary(tt.input)
			require.ErrorIs(t, err, baseline.ErrCorrupt)
			assert.ErrorContains(t, err, tt.want)
			assert.Equal(t, uint64(1), d.Windows(metric.Opens), "a failed decode leaves the day alone")
		})
	}
}

// TestDecodeDamage truncates a real encoding at every length and flips
// every bit of it: each must give an error, none a panic or a wrong day.
func TestDecodeDamage(t *testing.T) {
	good := marshal(t, realisticDay(t, 4, 500))
	for n := range len(good) {
		var d baseline.Day
		require.ErrorIs(t, d.UnmarshalBinary(good[:n]), baseline.ErrCorrupt, "truncated to %d bytes", n)
	}
	for i := range good {
		for bit := range 8 {
			b := bytes.Clone(good)
			b[i] ^= 1 << bit
			var d baseline.Day
			require.ErrorIs(t, d.UnmarshalBinary(b), baseline.ErrCorrupt, "byte %d bit %d", i, bit)
		}
	}
}

// TestDecodeFewerMetrics reads a day written when there were fewer
// metrics: the missing ones are empty.
func TestDecodeFewerMetrics(t *testing.T) {
	var d baseline.Day
	require.NoError(t, d.UnmarshalBinary(baseline.Seal(bodyOf(2, entry{4, nil}, entry{0, rawSketch(t, 300, 6)}))))
	assert.Equal(t, uint64(4), d.Idle(metric.ReadBytes))
	assert.Equal(t, uint64(6), d.Windows(metric.WriteBytes))
	for id := metric.ReadOps; id < metric.Count; id++ {
		assert.Zero(t, d.Windows(id)+d.Idle(id), "%s", id)
	}
}

func FuzzDecodeDay(f *testing.F) {
	// A small real day: the fuzzer minimises every input that finds new
	// coverage, which is quadratic in its length, so a day of thousands of
	// windows (kilobytes) would spend the run minimising.
	d := baseline.NewDay()
	for _, w := range []struct {
		id    metric.ID
		rate  float64
		count uint64
	}{
		{metric.ReadBytes, 2e4, 3}, {metric.ReadBytes, 3e6, 1}, {metric.ReadBytes, 5e8, 2},
		{metric.WriteBytes, 0, 9}, {metric.ReadOps, 1, 1}, {metric.ReadOps, 1000, 40},
		{metric.Opens, 0.5, 5}, {metric.Syncs, 2, 1},
	} {
		require.NoError(f, d.AddWithCount(w.id, w.rate, w.count))
	}
	f.Add(marshal(f, d))
	f.Add(baseline.EncodeBody(d)) // reaches the body decoder through Seal
	f.Add(marshal(f, baseline.NewDay()))
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, data []byte) {
		// The input as stored bytes, and as a body sealed with a valid
		// checksum so the fuzzer gets past it.
		for _, in := range [][]byte{data, baseline.Seal(data)} {
			var d baseline.Day
			if err := d.UnmarshalBinary(in); err != nil {
				require.ErrorIs(t, err, baseline.ErrCorrupt)
				continue
			}
			for id := range metric.Count {
				var n uint64
				for v, c := range d.Bins(id) {
					require.True(t, v > 0 && !math.IsInf(v, 0), "bin value %g", v)
					require.Positive(t, c)
					n += c
				}
				require.Equal(t, d.Windows(id), n)
				if n > 0 {
					_, ok := d.Quantile(id, 0.999)
					require.True(t, ok)
				}
			}
			// What decodes re-encodes to the same day (through the
			// uncompressed body: the round-trip tests cover MarshalBinary).
			var again baseline.Day
			require.NoError(t, again.UnmarshalBinary(baseline.Seal(baseline.EncodeBody(&d))))
			requireSameDay(t, &d, &again)
		}
	})
}
