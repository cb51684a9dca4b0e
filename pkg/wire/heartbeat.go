package wire

import (
	"slices"
	"time"

	"sluice/pkg/report"
)

// AppendHeartbeat appends h encoded as a heartbeat message to dst and
// returns the extended buffer. Fields outside the format's limits are
// clamped as the package doc's Caveats describe; [ValidateHeartbeat]
// reports them.
func AppendHeartbeat(dst []byte, h *report.Heartbeat) []byte {
	dst = append(dst, Version1, byte(KindHeartbeat))
	dst = appendString(dst, h.Node)
	dst = appendVarint(dst, timeToNanos(h.Time))
	dst = appendString(dst, h.Version)
	dst = appendVarint(dst, int64(h.Interval))
	dst = appendFloat(dst, h.CPUSeconds)
	dst = appendUvarint(dst, h.RSSBytes)
	dst = appendUvarint(dst, uint64(h.Queued))
	dst = appendUvarint(dst, h.Dropped)
	srcs := limit(h.Sources)
	dst = appendUvarint(dst, uint64(len(srcs)))
	for i := range srcs {
		dst = appendString(dst, srcs[i].Name)
		dst = appendUvarint(dst, uint64(srcs[i].Instances))
		dst = appendFloat(dst, srcs[i].MicrosPerRead)
		dst = appendBool(dst, srcs[i].OK)
		dst = appendUvarint(dst, srcs[i].Malformed)
	}
	return dst
}

// DecodeHeartbeat decodes the heartbeat message b into h, reusing the
// capacity of h.Sources. On error h holds a partial decode.
func DecodeHeartbeat(b []byte, h *report.Heartbeat) error {
	return decodeHeartbeat(b, h, nil)
}

func decodeHeartbeat(b []byte, h *report.Heartbeat, in *Decoder) error {
	if err := checkHeader(b, KindHeartbeat); err != nil {
		return err
	}
	r := reader{b: b, off: 2, kind: KindHeartbeat, in: in}
	h.Node = r.str("node")
	h.Time = r.time("time")
	h.Version = r.str("version")
	h.Interval = time.Duration(r.varint("interval"))
	h.CPUSeconds = r.float("cpu seconds")
	h.RSSBytes = r.uvarint("rss bytes")
	h.Queued = r.uint32("queued")
	h.Dropped = r.uvarint("dropped")
	// A source takes at least 1+1+8+1+1 bytes.
	n, hint := r.count("sources", 12)
	h.Sources = slices.Grow(h.Sources[:0], hint)
	for i := 0; i < n && r.err == nil; i++ {
		h.Sources = append(h.Sources, report.SourceCost{
			Name:          r.str("source name"),
			Instances:     r.uint32("source instances"),
			MicrosPerRead: r.float("source micros per read"),
			OK:            r.bool("source ok"),
			Malformed:     r.uvarint("source malformed"),
		})
	}
	return r.done()
}

// ValidateHeartbeat reports whether h encodes exactly: an error wrapping
// [ErrMalformed] names the first field that [AppendHeartbeat] would clamp.
func ValidateHeartbeat(h *report.Heartbeat) error {
	v := validator{kind: KindHeartbeat}
	v.str("node", h.Node)
	v.time("time", h.Time)
	v.str("version", h.Version)
	v.count("sources", len(h.Sources))
	for i := range h.Sources {
		v.str("source name", h.Sources[i].Name)
	}
	return v.err
}
