package block

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"math"

	"sluice/pkg/source/internal/fields"
)

// maxLine is the longest line, newline included, that Parse reads; a longer
// line is skipped and counted as malformed. A 20-field line of maximal
// numbers with a 32-byte name (DISK_NAME_LEN) is under 450 bytes, so the
// limit only bounds memory on garbage input.
const maxLine = 1024

// numValues is the most statistics a line carries after major, minor and
// name: 17 on Linux 5.5+.
const numValues = 17

// Token counts of the three line layouts: major, minor, name and then 11
// statistics (before 4.18), 15 (4.18+, discards) or 17 (5.5+, flushes).
const (
	fields14 = 14
	fields18 = 18
	fields20 = 20
)

// Device is one line of /proc/diskstats, printed by diskstats_show in
// block/genhd.c; the statistics are described in
// Documentation/admin-guide/iostats.rst ("Field 1" to "Field 17").
//
// Statistics the line does not have (discards before 4.18, flushes before
// 5.5) are zero; Fields tells which are present. Every field is cumulative
// since boot except InFlight. The kernel prints the millisecond fields
// (ReadMs, WriteMs, IOTicksMs, WeightedMs, DiscardMs, FlushMs) as unsigned
// int, so they wrap at 2^32; Parse returns them as printed and [Source]
// unwraps them.
type Device struct {
	// Major and Minor are the device numbers.
	Major, Minor uint32
	// Name is the device name as printed, e.g. "sda", "nvme0n1p1", "dm-0".
	Name string
	// Fields is the number of whitespace-separated tokens on the line: 14
	// (before Linux 4.18), 18 (4.18+, discards) or 20 (5.5+, flushes).
	Fields int

	// ReadsCompleted is field 1, reads completed successfully.
	ReadsCompleted uint64
	// ReadsMerged is field 2, adjacent reads merged into one.
	ReadsMerged uint64
	// SectorsRead is field 3, in 512-byte sectors whatever the device's
	// sector size (Documentation/block/stat.rst).
	SectorsRead uint64
	// ReadMs is field 4, milliseconds spent by all reads (u32, wraps).
	ReadMs uint64
	// WritesCompleted is field 5, writes completed successfully.
	WritesCompleted uint64
	// WritesMerged is field 6, adjacent writes merged into one.
	WritesMerged uint64
	// SectorsWritten is field 7, in 512-byte sectors.
	SectorsWritten uint64
	// WriteMs is field 8, milliseconds spent by all writes (u32, wraps).
	WriteMs uint64
	// InFlight is field 9, I/Os in progress: a gauge, not a counter.
	InFlight uint64
	// IOTicksMs is field 10, milliseconds the device had I/O in progress
	// (u32, wraps; counted differently since Linux 5.0).
	IOTicksMs uint64
	// WeightedMs is field 11, the weighted milliseconds doing I/O (u32,
	// wraps); in current kernels (diskstats_show at 6.12) the sum of the
	// read, write, discard and flush times.
	WeightedMs uint64
	// DiscardsCompleted is field 12 (4.18+).
	DiscardsCompleted uint64
	// DiscardsMerged is field 13 (4.18+).
	DiscardsMerged uint64
	// SectorsDiscarded is field 14 (4.18+), in 512-byte sectors.
	SectorsDiscarded uint64
	// DiscardMs is field 15 (4.18+), milliseconds spent by all discards
	// (u32, wraps).
	DiscardMs uint64
	// FlushesCompleted is field 16 (5.5+); always zero for partitions.
	FlushesCompleted uint64
	// FlushMs is field 17 (5.5+), milliseconds spent by all flushes (u32,
	// wraps).
	FlushMs uint64
}

// Stats is one parsed /proc/diskstats file.
type Stats struct {
	// Devices holds the well-formed lines in file order. Parse does not
	// check that names are unique.
	Devices []Device
	// Malformed counts non-blank lines that were skipped: a token count
	// other than 14, 18 or 20, a major, minor or statistic that is not an
	// unsigned decimal number in range, or a line longer than 1024 bytes.
	Malformed int
}

// Parse reads one /proc/diskstats file in any of the 14, 18 and 20 token
// layouts, or /proc/diskstats as a test or simulator writes it.
//
// Lines that do not parse are skipped and counted in Stats.Malformed, so one
// bad line does not lose the other devices; blank lines are ignored. The
// only error is a read error from r, returned with the devices parsed
// before it; a line cut short by the error is dropped, not parsed.
func Parse(r io.Reader) (Stats, error) {
	br := bufio.NewReaderSize(r, maxLine)
	st := Stats{Devices: make([]Device, 0, 16)}
	for {
		line, err := br.ReadSlice('\n')
		if err == bufio.ErrBufferFull {
			st.Malformed++
			for err == bufio.ErrBufferFull {
				_, err = br.ReadSlice('\n')
			}
		} else if err == nil || err == io.EOF {
			st.addLine(line, nil)
		}
		switch err {
		case nil:
		case io.EOF:
			return st, nil
		default:
			return st, fmt.Errorf("block: reading diskstats: %w", err)
		}
	}
}

// parseBuf parses a whole file held in data, appending to devs[:0] so that
// the Source can reuse the slice. Names found in known are taken from it
// rather than allocated. Lines follow the same rules as in Parse, including
// the length limit.
func parseBuf(data []byte, devs []Device, known map[string]*devState) Stats {
	st := Stats{Devices: devs[:0]}
	for len(data) > 0 {
		var line []byte
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			line, data = data[:i+1], data[i+1:]
		} else {
			line, data = data, nil
		}
		// The same limit as bufio's in Parse: a line of maxLine bytes or
		// more, not counting its newline, does not fit.
		if len(line) > maxLine || len(line) == maxLine && line[maxLine-1] != '\n' {
			st.Malformed++
			continue
		}
		st.addLine(line, known)
	}
	return st
}

// addLine parses one line into st.
func (st *Stats) addLine(line []byte, known map[string]*devState) {
	d, ok, blank := parseLine(line, known)
	switch {
	case ok:
		st.Devices = append(st.Devices, d)
	case !blank:
		st.Malformed++
	}
}

// parseLine parses "major minor name v1 ... vN" with N of 11, 15 or 17.
// blank reports a line of only whitespace, which is neither a device nor
// malformed.
func parseLine(line []byte, known map[string]*devState) (d Device, ok, blank bool) {
	var tok [fields20 + 1][]byte // one more, to tell a line that has too many
	n := fields.Split(line, tok[:])
	switch n {
	case 0:
		return Device{}, false, true
	case fields14, fields18, fields20:
	default:
		return Device{}, false, false
	}
	var vals [numValues]uint64
	for i, t := range tok[:n] {
		if i == 2 {
			continue // the name
		}
		v, good := fields.ParseUint(t)
		if !good {
			return Device{}, false, false
		}
		switch i {
		case 0, 1:
			if v > math.MaxUint32 {
				return Device{}, false, false
			}
			if i == 0 {
				d.Major = uint32(v)
			} else {
				d.Minor = uint32(v)
			}
		default:
			vals[i-3] = v
		}
	}
	if ds, found := known[string(tok[2])]; found {
		d.Name = ds.name
	} else {
		d.Name = string(tok[2])
	}
	d.Fields = n
	d.setValues(&vals)
	return d, true, false
}

// setValues sets the statistics from fields 1 to 17 in order.
func (d *Device) setValues(v *[numValues]uint64) {
	d.ReadsCompleted, d.ReadsMerged, d.SectorsRead, d.ReadMs = v[0], v[1], v[2], v[3]
	d.WritesCompleted, d.WritesMerged, d.SectorsWritten, d.WriteMs = v[4], v[5], v[6], v[7]
	d.InFlight, d.IOTicksMs, d.WeightedMs = v[8], v[9], v[10]
	d.DiscardsCompleted, d.DiscardsMerged, d.SectorsDiscarded, d.DiscardMs = v[11], v[12], v[13], v[14]
	d.FlushesCompleted, d.FlushMs = v[15], v[16]
}

// values returns the statistics as fields 1 to 17 in order.
func (d *Device) values() [numValues]uint64 {
	return [numValues]uint64{
		d.ReadsCompleted, d.ReadsMerged, d.SectorsRead, d.ReadMs,
		d.WritesCompleted, d.WritesMerged, d.SectorsWritten, d.WriteMs,
		d.InFlight, d.IOTicksMs, d.WeightedMs,
		d.DiscardsCompleted, d.DiscardsMerged, d.SectorsDiscarded, d.DiscardMs,
		d.FlushesCompleted, d.FlushMs,
	}
}
