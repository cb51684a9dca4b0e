package wire

import (
	"slices"
	"time"
)

// Heartbeat is what an agent publishes periodically about itself, so the
// aggregator can tell a silent node from an idle one and export the agent's
// own cost.
type Heartbeat struct {
	// Node is the node name as the agent knows itself.
	Node string
	// Time is when the heartbeat was taken.
	Time time.Time
	// Version is the agent's build version.
	Version string
	// Interval is the agent's sampling interval.
	Interval time.Duration
	// CPUSeconds is the agent process's CPU time (user+system) since it
	// started, in seconds.
	CPUSeconds float64
	// RSSBytes is the agent's resident memory, in bytes.
	RSSBytes uint64
	// Queued counts samples waiting in the agent's outage queue.
	Queued uint32
	// Dropped counts samples dropped past the queue bound since the agent
	// started.
	Dropped uint64
	// Sources holds one entry per source kind the agent reads.
	Sources []SourceCost
}

// SourceCost is what reading one kind of source costs the agent.
type SourceCost struct {
	// Name is the source's kind, e.g. "lustre".
	Name string
	// Instances counts the source's instances found at the last read.
	Instances uint32
	// MicrosPerRead is the mean time one read of all instances takes, in
	// microseconds.
	MicrosPerRead float64
	// OK reports whether the last read succeeded.
	OK bool
	// Malformed counts counter lines the source skipped as malformed since
	// the agent started.
	Malformed uint64
}

// AppendHeartbeat appends h encoded as a heartbeat message to dst and
// returns the extended buffer. Fields outside the format's limits are
// clamped as the package doc's Caveats describe; [Heartbeat.Validate]
// reports them.
func AppendHeartbeat(dst []byte, h *Heartbeat) []byte {
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
func DecodeHeartbeat(b []byte, h *Heartbeat) error {
	return decodeHeartbeat(b, h, nil)
}

func decodeHeartbeat(b []byte, h *Heartbeat, in *Decoder) error {
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
		h.Sources = append(h.Sources, SourceCost{
			Name:          r.str("source name"),
			Instances:     r.uint32("source instances"),
			MicrosPerRead: r.float("source micros per read"),
			OK:            r.bool("source ok"),
			Malformed:     r.uvarint("source malformed"),
		})
	}
	return r.done()
}

// Validate reports whether h encodes exactly: an error wrapping
// [ErrMalformed] names the first field that [AppendHeartbeat] would clamp.
func (h *Heartbeat) Validate() error {
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
