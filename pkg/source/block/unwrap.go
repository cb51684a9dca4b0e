package block

import "math"

// Indices into a Device's statistics (fields 1 to 17, see Device.values).
const (
	idxSectorsRead    = 2
	idxSectorsWritten = 6
	idxInFlight       = 8
)

// counterNames are the raw counter names of fields 1 to 17, as documented
// in the package doc; in_flight (field 9) is a gauge and has none.
var counterNames = [numValues]string{
	"reads", "reads_merged", "sectors_read", "read_ms",
	"writes", "writes_merged", "sectors_written", "write_ms",
	"", "io_ticks_ms", "weighted_ms",
	"discards", "discards_merged", "sectors_discarded", "discard_ms",
	"flushes", "flush_ms",
}

// isMs marks the fields the kernel prints as unsigned int milliseconds,
// which wrap at 2^32 (diskstats_show in block/genhd.c).
var isMs = [numValues]bool{3: true, 7: true, 9: true, 10: true, 14: true, 16: true}

// Bytes counters derived from the sector counts.
const (
	readBytes  = "read_bytes"
	writeBytes = "write_bytes"
)

// wrapSpan is how much a wrapped millisecond field lost: 2^32.
const wrapSpan = 1 << 32

// devState is what a Source remembers about one device between reads.
type devState struct {
	name     string
	key      string // "block:" + name
	included bool
	gen      uint64 // the Read that last saw the device

	have  bool
	nvals int               // statistics on the line: 11, 15 or 17
	last  [numValues]uint64 // raw values of the last read
	high  [numValues]uint64 // multiples of 2^32 added to wrapped ms fields
	value [numValues]uint64 // unwrapped values of the last read
}

// isWrap reports whether a millisecond field going from last to cur is
// consistent with one wrap of a 32-bit value: last in the upper half of
// the u32 range and cur in the lower half. With per-interval increments far
// below 2^31 ms (24.8 days), any real wrap looks like this.
func isWrap(last, cur uint64) bool {
	return last >= 1<<31 && last <= math.MaxUint32 && cur < 1<<31
}

// update records d's statistics and computes the unwrapped values.
//
// The rule: counts (u64 on 64-bit kernels) never wrap, so any count lower
// than last time means the device was reset (removed and added again under
// the same name): every field restarts from its raw value, and so falls,
// which the agent's delta.Differ takes as a reset. Otherwise a millisecond
// field that fell has wrapped when the fall is consistent with a 32-bit
// wrap (isWrap), and 2^32 is added to it from now on; one that fell in any
// other way is held at its last value (and grows from there), so an odd
// reading can never make the whole device look reset and report its entire
// history as one interval.
func (ds *devState) update(d *Device) {
	cur := d.values()
	nvals := d.Fields - 3
	reset := !ds.have || nvals != ds.nvals
	for i := 0; i < nvals && !reset; i++ {
		reset = !isMs[i] && i != idxInFlight && cur[i] < ds.last[i]
	}
	if reset {
		ds.high = [numValues]uint64{}
	} else {
		for i := range nvals {
			if !isMs[i] || cur[i] >= ds.last[i] {
				continue
			}
			if isWrap(ds.last[i], cur[i]) {
				ds.high[i] += wrapSpan
			} else {
				ds.high[i] = ds.value[i] - cur[i] // hold at the last value
			}
		}
	}
	ds.have, ds.nvals, ds.last = true, nvals, cur
	for i := range nvals {
		ds.value[i] = ds.high[i] + cur[i]
	}
}

// counters returns a new map of the raw counters from the last update.
func (ds *devState) counters() map[string]uint64 {
	m := make(map[string]uint64, ds.nvals+1) // -in_flight +2 bytes
	for i := range ds.nvals {
		if i != idxInFlight {
			m[counterNames[i]] = ds.value[i]
		}
	}
	m[readBytes] = sectorBytes(ds.value[idxSectorsRead])
	m[writeBytes] = sectorBytes(ds.value[idxSectorsWritten])
	return m
}

// sectorBytes converts 512-byte sectors to bytes, saturating rather than
// wrapping, so that a growing count never gives a falling byte count.
func sectorBytes(sectors uint64) uint64 {
	if sectors > math.MaxUint64/SectorSize {
		return math.MaxUint64
	}
	return sectors * SectorSize
}
