package lustre

import (
	"errors"
	"fmt"
	"io"
	"strconv"
	"time"

	"sluice/pkg/source/internal/fields"
)

// ErrBadCounter means Write was given a counter it cannot print so that
// Parse reads it back: an empty or over-long name or unit, one with
// whitespace, a header keyword used as a name, or a repeated name.
var ErrBadCounter = errors.New("lustre: counter cannot be written")

// maxNameLen bounds names and units in Write, so that every line it prints
// stays well under the maxLine that Parse reads.
const maxNameLen = 255

// Format selects the layout Write prints, after the Lustre version that
// printed it (lprocfs_stats_seq_show and lprocfs_stats_header in
// lustre/obdclass/lprocfs_status.c, units from lustre/llite/lproc_llite.c).
// The zero Format is not valid.
type Format int

// The layouts Write can print.
const (
	// FormatV2_9 is Lustre 2.9 and older: "secs.usecs" snapshot with
	// unpadded microseconds, count-only "[regs]" op counters, and
	// min/max/sum on size counters.
	FormatV2_9 Format = iota + 1
	// FormatV2_12 is Lustre 2.10 to 2.13: as FormatV2_9 but "secs.nsecs".
	FormatV2_12
	// FormatV2_14 is Lustre 2.14: op counters in "[usec]" with
	// min/max/sum/sumsq, size counters with sumsq too, count-only
	// counters in "[reqs]".
	FormatV2_14
	// FormatV2_15 is Lustre 2.15.0 to 2.15.6: as FormatV2_14 plus the
	// start_time and elapsed_time header lines.
	FormatV2_15
	// FormatV2_16 is Lustre 2.15.7, 2.16 and 2.17 up to 2.17.53: as
	// FormatV2_15 but latency in "[usecs]".
	FormatV2_16
	// FormatV2_17 is Lustre 2.17.54 and later: as FormatV2_16 with a name
	// column 35 characters wide instead of 25.
	FormatV2_17
)

// Formats lists every valid Format, oldest first.
func Formats() []Format {
	return []Format{FormatV2_9, FormatV2_12, FormatV2_14, FormatV2_15, FormatV2_16, FormatV2_17}
}

// String returns the Lustre version the format is named after, e.g. "2.16".
func (f Format) String() string {
	switch f {
	case FormatV2_9:
		return "2.9"
	case FormatV2_12:
		return "2.12"
	case FormatV2_14:
		return "2.14"
	case FormatV2_15:
		return "2.15"
	case FormatV2_16:
		return "2.16"
	case FormatV2_17:
		return "2.17"
	}
	return "Format(" + strconv.Itoa(int(f)) + ")"
}

// layout is what distinguishes one Format from another.
type layout struct {
	usecs    bool   // snapshot in "secs.usecs" (≤2.9)
	header   bool   // start_time and elapsed_time lines (2.15+)
	width    int    // name column width
	timeUnit string // unit of latency counters; "" means ops are count-only "[regs]"
}

func (f Format) layout() (layout, bool) {
	switch f {
	case FormatV2_9:
		return layout{usecs: true, width: 25}, true
	case FormatV2_12:
		return layout{width: 25}, true
	case FormatV2_14:
		return layout{width: 25, timeUnit: "usec"}, true
	case FormatV2_15:
		return layout{header: true, width: 25, timeUnit: "usec"}, true
	case FormatV2_16:
		return layout{header: true, width: 25, timeUnit: "usecs"}, true
	case FormatV2_17:
		return layout{header: true, width: 35, timeUnit: "usecs"}, true
	}
	return layout{}, false
}

// Write prints s as the stats file of format f, for the simulator and tests.
//
// Counters with zero Samples are left out, as Lustre does. Each counter is
// printed the way that version prints its kind, so units and fields may
// change: size counters ("bytes", "pages") keep their unit and get
// min/max/sum (plus sumsq from 2.14); latency and request counters become
// "[regs]" count-only before 2.14, and "[usec]"/"[usecs]" with
// min/max/sum/sumsq after, unless they were count-only, which print as
// "[reqs]"; other units are printed unchanged. What survives every format is
// each counter's Samples and the sums Raw reports. A missing StartTime is
// printed as 0, as 2.15.0 did. Times before 1970 are refused.
func Write(w io.Writer, s Stats, f Format) error {
	l, ok := f.layout()
	if !ok {
		return fmt.Errorf("lustre: unknown format %d", int(f))
	}
	if err := checkCounters(s.Counters); err != nil {
		return err
	}
	snapSec, snapNsec, err := stamp(s.SnapshotTime)
	if err != nil {
		return fmt.Errorf("lustre: snapshot time: %w", err)
	}
	buf := make([]byte, 0, 64+96*len(s.Counters))
	buf = appendName(buf, "snapshot_time", l.width)
	if l.usecs {
		buf = strconv.AppendInt(buf, snapSec, 10)
		buf = append(buf, '.')
		buf = strconv.AppendInt(buf, snapNsec/1000, 10)
		buf = append(buf, " secs.usecs\n"...)
	} else {
		buf = appendStamp(buf, snapSec, snapNsec)
	}
	if l.header {
		var startSec, startNsec int64
		if s.HasStartTime {
			if startSec, startNsec, err = stamp(s.StartTime); err != nil {
				return fmt.Errorf("lustre: start time: %w", err)
			}
		}
		buf = appendName(buf, "start_time", l.width)
		buf = appendStamp(buf, startSec, startNsec)
		es, en := snapSec-startSec, snapNsec-startNsec
		if en < 0 {
			en += 1e9
			es--
		}
		if es < 0 {
			es, en = 0, 0
		}
		buf = appendName(buf, "elapsed_time", l.width)
		buf = appendStamp(buf, es, en)
	}
	for i := range s.Counters {
		c := &s.Counters[i]
		if c.Samples == 0 {
			continue
		}
		unit, fields := l.render(c)
		buf = appendName(buf, c.Name, l.width)
		buf = strconv.AppendUint(buf, c.Samples, 10)
		buf = append(buf, " samples ["...)
		buf = append(buf, unit...)
		buf = append(buf, ']')
		if fields >= 3 {
			for _, v := range [3]uint64{c.Min, c.Max, c.Sum} {
				buf = append(buf, ' ')
				buf = strconv.AppendUint(buf, v, 10)
			}
		}
		if fields == 4 {
			buf = append(buf, ' ')
			buf = strconv.AppendUint(buf, c.SumSq, 10)
		}
		buf = append(buf, '\n')
	}
	if _, err := w.Write(buf); err != nil {
		return fmt.Errorf("lustre: writing stats: %w", err)
	}
	return nil
}

// render returns the unit and number of fields layout l prints c with.
func (l layout) render(c *Counter) (string, int) {
	op := isTimeUnit(c.Unit) || c.Unit == "regs" || c.Unit == "reqs"
	switch {
	case isSizeUnit(c.Unit) && c.Fields == 0:
		return c.Unit, 0
	case isSizeUnit(c.Unit) && l.timeUnit == "":
		return c.Unit, 3
	case isSizeUnit(c.Unit):
		return c.Unit, 4
	case op && l.timeUnit == "":
		return "regs", 0
	case op && c.Fields == 0:
		return "reqs", 0 // ioctl, getxattr_hits
	case c.Unit == "reqs":
		return "reqs", 4 // opencount keeps min/max/sum/sumsq in reqs
	case op:
		return l.timeUnit, 4
	}
	return c.Unit, c.Fields
}

// checkCounters reports the first counter Write cannot print faithfully.
func checkCounters(cs []Counter) error {
	seen := make(map[string]struct{}, len(cs))
	for i := range cs {
		c := &cs[i]
		switch c.Name {
		case "snapshot_time", "start_time", "elapsed_time":
			return fmt.Errorf("%w: name %q is a header keyword", ErrBadCounter, c.Name)
		}
		if !validToken(c.Name) {
			return fmt.Errorf("%w: name %q", ErrBadCounter, c.Name)
		}
		if !validToken(c.Unit) {
			return fmt.Errorf("%w: counter %q: unit %q", ErrBadCounter, c.Name, c.Unit)
		}
		if c.Fields != 0 && c.Fields != 3 && c.Fields != 4 {
			return fmt.Errorf("%w: counter %q: %d fields", ErrBadCounter, c.Name, c.Fields)
		}
		if _, dup := seen[c.Name]; dup {
			return fmt.Errorf("%w: name %q repeats", ErrBadCounter, c.Name)
		}
		seen[c.Name] = struct{}{}
	}
	return nil
}

// validToken reports whether s can be printed as one token Parse splits
// out: it holds none of the bytes fields.IsSpace separates tokens on.
func validToken(s string) bool {
	if s == "" || len(s) > maxNameLen {
		return false
	}
	for i := 0; i < len(s); i++ {
		if fields.IsSpace(s[i]) {
			return false
		}
	}
	return true
}

// stamp splits t into Unix seconds and nanoseconds; the zero Time is 0.
func stamp(t time.Time) (sec, nsec int64, err error) {
	if t.IsZero() {
		return 0, 0, nil
	}
	if t.Unix() < 0 {
		return 0, 0, fmt.Errorf("%v is before 1970", t)
	}
	return t.Unix(), int64(t.Nanosecond()), nil
}

// appendName appends name left-aligned in a column of width, then a space,
// like the "%-25s " of lprocfs_stats_seq_show.
func appendName(buf []byte, name string, width int) []byte {
	buf = append(buf, name...)
	for i := len(name); i < width; i++ {
		buf = append(buf, ' ')
	}
	return append(buf, ' ')
}

// appendStamp appends "<sec>.<9-digit nsec> secs.nsecs" and a newline.
func appendStamp(buf []byte, sec, nsec int64) []byte {
	buf = strconv.AppendInt(buf, sec, 10)
	buf = append(buf, '.')
	var frac [9]byte
	for i := len(frac) - 1; i >= 0; i-- {
		frac[i] = byte('0' + nsec%10)
		nsec /= 10
	}
	buf = append(buf, frac[:]...)
	return append(buf, " secs.nsecs\n"...)
}
