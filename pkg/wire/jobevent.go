package wire

import (
	"fmt"
	"time"
)

// EventType says whether a [JobEvent] reports a job's start or its end.
type EventType byte

// The job event types of wire format v1.
const (
	// JobStart reports a job starting; the scheduler prolog sends it.
	JobStart EventType = 1
	// JobEnd reports a job ending; the scheduler epilog sends it.
	JobEnd EventType = 2
)

// String returns the event type's name as used in logs.
func (t EventType) String() string {
	switch t {
	case JobStart:
		return "start"
	case JobEnd:
		return "end"
	}
	return fmt.Sprintf("event(%d)", byte(t))
}

// JobEvent is what the scheduler hooks publish when a job starts or ends on
// a node; the aggregator uses it to attribute samples to jobs.
type JobEvent struct {
	// Type says whether the job started or ended.
	Type EventType
	// Job is the job id.
	Job string
	// Node is the node that reported the event.
	Node string
	// Time is when the job started or ended.
	Time time.Time
	// User is the job's owner; it may be empty.
	User string
	// Account is the job's accounting project; it may be empty.
	Account string
	// Name is the job's name; it may be empty.
	Name string
	// Nodes is the job's node list, expanded; it may be empty when unknown.
	Nodes []string
	// ExitCode is the job's exit code; it is meaningful for JobEnd only.
	ExitCode int32
}

// AppendJobEvent appends e encoded as a job event message to dst and
// returns the extended buffer. Fields outside the format's limits are
// clamped as the package doc's Caveats describe; [JobEvent.Validate]
// reports them. An unknown Type is written as is and makes decoders reject
// the message.
func AppendJobEvent(dst []byte, e *JobEvent) []byte {
	dst = append(dst, Version1, byte(KindJobEvent), byte(e.Type))
	dst = appendString(dst, e.Job)
	dst = appendString(dst, e.Node)
	dst = appendVarint(dst, timeToNanos(e.Time))
	dst = appendString(dst, e.User)
	dst = appendString(dst, e.Account)
	dst = appendString(dst, e.Name)
	dst = appendStrings(dst, e.Nodes)
	return appendVarint(dst, int64(e.ExitCode))
}

// DecodeJobEvent decodes the job event message b into e, reusing the
// capacity of e.Nodes. On error e holds a partial decode.
func DecodeJobEvent(b []byte, e *JobEvent) error {
	return decodeJobEvent(b, e, nil)
}

func decodeJobEvent(b []byte, e *JobEvent, in *Decoder) error {
	if err := checkHeader(b, KindJobEvent); err != nil {
		return err
	}
	r := reader{b: b, off: 2, kind: KindJobEvent, in: in}
	e.Type = EventType(r.byte("type"))
	if r.err == nil && e.Type != JobStart && e.Type != JobEnd {
		r.fail("type", ErrMalformed, fmt.Sprintf("unknown event type %d", byte(e.Type)))
	}
	e.Job = r.str("job")
	e.Node = r.str("node")
	e.Time = r.time("time")
	e.User = r.str("user")
	e.Account = r.str("account")
	e.Name = r.str("name")
	e.Nodes = r.strings("nodes", e.Nodes)
	e.ExitCode = r.int32("exit code")
	return r.done()
}

// Validate reports whether e encodes exactly and decodes: an error wrapping
// [ErrMalformed] names the first field that [AppendJobEvent] would clamp or
// that decoders would reject.
func (e *JobEvent) Validate() error {
	v := validator{kind: KindJobEvent}
	if e.Type != JobStart && e.Type != JobEnd {
		v.fail("type", fmt.Sprintf("unknown event type %d", byte(e.Type)))
	}
	v.str("job", e.Job)
	v.str("node", e.Node)
	v.time("time", e.Time)
	v.str("user", e.User)
	v.str("account", e.Account)
	v.str("name", e.Name)
	v.strs("nodes", e.Nodes)
	return v.err
}
