package wire

import "sluice/pkg/report"

// DefaultMaxStrings is the number of distinct strings a [Decoder] keeps
// when MaxStrings is zero: enough for the node names and running job ids of
// a large centre.
const DefaultMaxStrings = 1 << 16

// Decoder decodes messages like the package's Decode functions, but interns
// the strings it decodes: a node name or job id seen before is returned as
// the same string, without allocating. An aggregator sees the same few
// thousand node names and job ids over and over, so interning removes
// nearly all of a sample's allocations and the garbage they leave behind.
//
// The zero Decoder is ready to use. A Decoder is not safe for concurrent
// use; give each ingest goroutine its own.
type Decoder struct {
	// MaxStrings bounds the intern table. When it is full the table is
	// emptied and refilled from the messages that follow, so its memory
	// stays under about MaxStrings × MaxStringLen bytes whatever the
	// traffic. Zero means DefaultMaxStrings.
	MaxStrings int

	strs map[string]string
}

// DecodeSample is [DecodeSample] with interned strings.
func (d *Decoder) DecodeSample(b []byte, s *report.Sample) error { return decodeSample(b, s, d) }

// DecodeJobEvent is [DecodeJobEvent] with interned strings.
func (d *Decoder) DecodeJobEvent(b []byte, e *report.JobEvent) error { return decodeJobEvent(b, e, d) }

// DecodeHeartbeat is [DecodeHeartbeat] with interned strings.
func (d *Decoder) DecodeHeartbeat(b []byte, h *report.Heartbeat) error {
	return decodeHeartbeat(b, h, d)
}

// Len returns the number of strings the intern table holds.
func (d *Decoder) Len() int { return len(d.strs) }

// intern returns p as a string, from the table when it is there.
func (d *Decoder) intern(p []byte) string {
	if s, ok := d.strs[string(p)]; ok { // no allocation for the lookup
		return s
	}
	limit := d.MaxStrings
	if limit <= 0 {
		limit = DefaultMaxStrings
	}
	if d.strs == nil {
		d.strs = make(map[string]string)
	} else if len(d.strs) >= limit {
		clear(d.strs)
	}
	s := string(p)
	d.strs[s] = s
	return s
}
