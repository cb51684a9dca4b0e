// Package wire encodes and decodes wire format v1: the binary messages that
// node agents publish over NATS to the aggregator. There are three kinds:
// samples (a node's metric deltas over one interval, the hot path), job
// events (a job started or ended) and heartbeats (the agent's own health
// and cost).
//
// # Basics
//
// A message is one NATS payload, self-contained and unframed. Its first
// byte is the format version, [Version1]; its second is the [Kind]. The
// rest is a fixed sequence of fields, with no tags, padding or alignment,
// and the message ends exactly where its last field ends.
//
// [AppendSample], [AppendJobEvent] and [AppendHeartbeat] append a message to
// a caller's buffer, so a publisher reuses one buffer. [DecodeSample],
// [DecodeJobEvent] and [DecodeHeartbeat] decode into a caller's value and
// reuse its slices, so a subscriber allocates only the decoded strings; a
// [Decoder] interns those too. [Peek] reads only the header, to pick the
// decoder for a payload.
//
// Decoders reject a payload that is not a valid message with an error
// wrapping one of [ErrEmpty], [ErrUnknownVersion], [ErrUnknownKind],
// [ErrTruncated] or [ErrMalformed], with the kind and field as context;
// [Reason] maps it to a short label for a rejection counter.
//
// # Layout
//
// Fields use these encodings:
//
//   - byte: one octet.
//   - uvarint: an unsigned integer of at most 64 bits, in groups of 7
//     bits, least significant group first, one group per byte; the high
//     bit (0x80) of a byte is set when another byte follows. At most 10
//     bytes, and a 10th byte must be 0x00 or 0x01. This is the varint of
//     Protocol Buffers and of Go's encoding/binary. Encoders write the
//     shortest form; decoders also accept longer ones. Example: 300 is
//     AC 02.
//   - varint: a signed 64-bit integer v written as the uvarint of its
//     zig-zag mapping u = (v << 1) XOR (v >> 63), with an arithmetic
//     shift, so that 0, -1, 1, -2, 2 become 0, 1, 2, 3, 4. Decode with
//     v = (u >> 1) XOR -(u AND 1).
//   - float64: 8 bytes, an IEEE-754 binary64, little-endian. Any bit
//     pattern is accepted, NaN included.
//   - bool: one byte, 0x00 for false or 0x01 for true; any other value is
//     malformed.
//   - string: a uvarint length n, at most 256, then n bytes of valid UTF-8.
//     There is no terminator. The empty string is the single byte 00.
//   - time: a varint of nanoseconds since 1970-01-01T00:00:00Z, leap
//     seconds not counted (Unix time). The value -2^63 means "no time"
//     (Go's zero time.Time). Decoders return times in UTC.
//   - list of X: a uvarint count n, at most 4096, then n items X.
//   - values: a metric delta per metric, written as a uvarint mask, then
//     one uvarint per set bit, lowest bit first. Bit i (the value 1<<i)
//     set means metric i is present; a clear bit means its delta is 0.
//     Metric i is the metric with wire code i in package metric:
//     0 read_bytes, 1 write_bytes, 2 read_ops, 3 write_ops, 4 opens,
//     5 closes, 6 creates, 7 removes, 8 stat_ops, 9 meta_updates,
//     10 syncs, 11 other_ops. Deltas of read_bytes and write_bytes are
//     bytes; all others are counts of operations; each is the total over
//     the interval, not a rate. Bits 12 to 63 must be clear. Encoders set
//     a bit only for a non-zero delta; decoders accept a set bit whose
//     value is 0.
//
// Every message starts with this header:
//
//	offset  encoding  field    meaning
//	0       byte      version  0x01, wire format v1
//	1       byte      kind     0x01 sample, 0x02 job event, 0x03 heartbeat
//
// A sample (kind 0x01) continues with these fields, in this order:
//
//	encoding          field     meaning and unit
//	string            node      node name as the agent knows itself
//	uvarint           seq       per-node sequence number: 1 for the first
//	                            sample, +1 per sample, never reused across
//	                            agent restarts; (node, seq) identifies a
//	                            sample for de-duplication
//	time              start     interval start, wall clock
//	uvarint           duration  interval length in nanoseconds: end is
//	                            start + duration, computed on the encoded
//	                            time values; an end above 2^63-1 is
//	                            malformed
//	list of string    jobs      ids of the jobs running on the node during
//	                            the interval; may be empty
//	values            values    the node's deltas over the interval
//	list of per-job   per-job   optional: each job's own deltas where a
//	                            per-job source measured them
//
// where each per-job item is:
//
//	string            job       job id
//	values            values    the job's deltas over the interval
//
// A job event (kind 0x02) continues with:
//
//	byte              type      0x01 job start, 0x02 job end; others are
//	                            malformed
//	string            job       job id
//	string            node      node that reported the event
//	time              time      when the job started or ended
//	string            user      job owner; may be empty
//	string            account   accounting project; may be empty
//	string            name      job name; may be empty
//	list of string    nodes     the job's node list, expanded; empty when
//	                            unknown
//	varint            exit      exit code, within a signed 32-bit range;
//	                            meaningful for job end only
//
// A heartbeat (kind 0x03) continues with:
//
//	string            node      node name as the agent knows itself
//	time              time      when the heartbeat was taken
//	string            version   agent build version
//	varint            interval  sampling interval in nanoseconds
//	float64           cpu       agent process CPU time, user+system, since
//	                            it started, in seconds
//	uvarint           rss       agent resident memory in bytes
//	uvarint           queued    samples waiting in the agent's outage
//	                            queue; at most 2^32-1
//	uvarint           dropped   samples dropped past the queue bound since
//	                            the agent started
//	list of source    sources   one item per source kind the agent reads
//
// where each source item is:
//
//	string            name      source kind, e.g. "lustre"
//	uvarint           instances instances found at the last read; at most
//	                            2^32-1
//	float64           micros    mean time of one read, in microseconds
//	bool              ok        whether the last read succeeded
//	uvarint           malformed counter lines the source skipped as
//	                            malformed since the agent started
//
// Bytes after the last field make the message malformed.
//
// For example, a sample from node "cn01" with seq 300, starting 1000 ns
// after the epoch and lasting 10 s, with jobs "42" and "é", deltas
// read_bytes 4096, write_ops 1 and syncs 3, and one per-job block giving
// job "42" read_bytes 4096, is these 36 bytes (hex):
//
//	01 01                 version 1, kind sample
//	04 63 6E 30 31        node "cn01"
//	AC 02                 seq 300
//	D0 0F                 start: zig-zag of 1000 is 2000
//	80 C8 AF A0 25        duration 10 000 000 000 ns
//	02                    2 jobs
//	02 34 32              "42"
//	02 C3 A9              "é"
//	89 08                 mask 0x409: bits 0, 3 and 10
//	80 20 01 03           read_bytes 4096, write_ops 1, syncs 3
//	01                    1 per-job block
//	02 34 32              job "42"
//	01 80 20              mask 0x1: read_bytes 4096
//
// And a heartbeat from "cn01" taken 1 ns before the epoch, from agent
// "v1" sampling every 10 s, with 1.5 s of CPU, 300 bytes resident, nothing
// queued or dropped, and one source "lustre" with 2 instances read in
// 12.5 µs successfully and 3 malformed lines skipped, is these 47 bytes:
//
//	01 03                       version 1, kind heartbeat
//	04 63 6E 30 31              node "cn01"
//	01                          time: zig-zag of -1 is 1
//	02 76 31                    version "v1"
//	80 90 DF C0 4A              interval: zig-zag of 10 000 000 000 ns
//	00 00 00 00 00 00 F8 3F     cpu 1.5
//	AC 02                       rss 300
//	00                          queued 0
//	00                          dropped 0
//	01                          1 source
//	06 6C 75 73 74 72 65        name "lustre"
//	02                          instances 2
//	00 00 00 00 00 00 29 40     micros 12.5
//	01                          ok
//	03                          malformed 3
//
// # Caveats
//
// Version 1 has no optional fields and no extension points: a decoder
// rejects what it does not know. A new field or kind needs a new version or
// kind byte, and a new metric sets a bit that v1 decoders reject, so
// aggregators must be upgraded before the agents that send it.
//
// Encoders cannot fail, so they clamp what the format cannot carry rather
// than write a message every decoder would reject: invalid UTF-8 is
// replaced by U+FFFD and strings are cut to 256 bytes at a rune boundary;
// lists are cut to their first 4096 items; a sample whose End is before its
// Start is sent with End = Start; times outside the nanosecond range
// (before 1677-09-21 or after 2262-04-11 UTC) are clamped to its ends. An
// unknown job event type is written as is and rejected on decode. The
// Validate functions report every such case; call them where the data comes
// from outside the agent.
//
// Times lose their location and monotonic reading; compare them with
// time.Time.Equal. The one instant whose Unix nanoseconds are -2^63 cannot
// be sent, since that value means "no time".
//
// Decoders reuse the capacity of the target's slices, so a slice kept from
// one decode is overwritten by the next; copy what must outlive it. After
// an error the target holds a partial decode.
//
// The limits bound what one payload can make a decoder allocate, not the
// payload's size: a job event with 4096 node names of 256 bytes is about
// 1 MiB, NATS's default max_payload. Publishers should check the length
// against the connection's MaxPayload.
//
// Decoders check encoding, not meaning: an empty node name, a zero seq or a
// negative interval decode without error, and the aggregator judges them.
package wire
