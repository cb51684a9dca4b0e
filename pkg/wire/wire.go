package wire

import (
	"errors"
	"fmt"
)

// Version1 is the only wire format version; it is the first byte of every
// message.
const Version1 byte = 1

// Limits enforced by decoders. They bound what one hostile or corrupt
// payload can make the aggregator allocate.
const (
	// MaxStringLen is the longest string, in bytes, a message may carry.
	MaxStringLen = 256
	// MaxCount is the most job ids, node names, per-job blocks or sources
	// one message may carry.
	MaxCount = 4096
)

// Kind is the message type, the second byte of every message.
type Kind byte

// The message kinds of wire format v1.
const (
	// KindSample is a report.Sample: a node's metric deltas over one interval.
	KindSample Kind = 1
	// KindJobEvent is a report.JobEvent: a job started or ended.
	KindJobEvent Kind = 2
	// KindHeartbeat is a report.Heartbeat: the agent's own health and cost.
	KindHeartbeat Kind = 3
)

// String returns the kind's name as used in logs and metric labels.
func (k Kind) String() string {
	switch k {
	case KindSample:
		return "sample"
	case KindJobEvent:
		return "job_event"
	case KindHeartbeat:
		return "heartbeat"
	}
	return fmt.Sprintf("kind(%d)", byte(k))
}

// Sentinel errors. Decoders wrap them with the message kind and field, so
// callers test them with errors.Is and count rejections with [Reason].
var (
	// ErrEmpty means the payload has no bytes at all.
	ErrEmpty = errors.New("empty message")
	// ErrUnknownVersion means the first byte is not a version this package
	// decodes.
	ErrUnknownVersion = errors.New("unknown version")
	// ErrUnknownKind means the second byte is not a known kind, or not the
	// kind the decoder was asked for.
	ErrUnknownKind = errors.New("unknown kind")
	// ErrTruncated means the payload ends before the message does.
	ErrTruncated = errors.New("truncated message")
	// ErrMalformed means the payload is not a valid message: a bad varint,
	// invalid UTF-8, a string or list over its limit, a value out of its
	// field's range, a metric bit beyond metric.Count, or trailing bytes.
	ErrMalformed = errors.New("malformed message")
)

// Peek checks the version and kind bytes of b and returns the kind, so a
// subscriber can pick the decoder. It does not look at the rest.
func Peek(b []byte) (Kind, error) {
	k, err := header(b)
	if err != nil {
		return 0, fmt.Errorf("wire: %w", err)
	}
	return k, nil
}

// header does Peek's work; its errors carry no prefix so that callers add
// their own.
func header(b []byte) (Kind, error) {
	if len(b) == 0 {
		return 0, ErrEmpty
	}
	if b[0] != Version1 {
		return 0, fmt.Errorf("version %d: %w", b[0], ErrUnknownVersion)
	}
	if len(b) < 2 {
		return 0, fmt.Errorf("kind: %w", ErrTruncated)
	}
	k := Kind(b[1])
	switch k {
	case KindSample, KindJobEvent, KindHeartbeat:
		return k, nil
	}
	return 0, fmt.Errorf("kind %d: %w", b[1], ErrUnknownKind)
}

// Reason returns a short, fixed label for err, for a rejection counter's
// label: "empty", "unknown_version", "unknown_kind", "truncated",
// "malformed", or "other" for any other error. It returns "" for nil.
func Reason(err error) string {
	switch {
	case err == nil:
		return ""
	case errors.Is(err, ErrEmpty):
		return "empty"
	case errors.Is(err, ErrUnknownVersion):
		return "unknown_version"
	case errors.Is(err, ErrUnknownKind):
		return "unknown_kind"
	case errors.Is(err, ErrTruncated):
		return "truncated"
	case errors.Is(err, ErrMalformed):
		return "malformed"
	}
	return "other"
}

// checkHeader is Peek for a decoder that wants one kind.
func checkHeader(b []byte, want Kind) error {
	k, err := header(b)
	if err != nil {
		return fmt.Errorf("wire: %s: %w", want, err)
	}
	if k != want {
		return fmt.Errorf("wire: %s: got a %s message: %w", want, k, ErrUnknownKind)
	}
	return nil
}
