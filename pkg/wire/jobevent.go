package wire

import (
	"fmt"

	"sluice/pkg/report"
)

// AppendJobEvent appends e encoded as a job event message to dst and
// returns the extended buffer. Fields outside the format's limits are
// clamped as the package doc's Caveats describe; [ValidateJobEvent]
// reports them. An unknown Type is written as is and makes decoders reject
// the message.
func AppendJobEvent(dst []byte, e *report.JobEvent) []byte {
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
func DecodeJobEvent(b []byte, e *report.JobEvent) error {
	return decodeJobEvent(b, e, nil)
}

func decodeJobEvent(b []byte, e *report.JobEvent, in *Decoder) error {
	if err := checkHeader(b, KindJobEvent); err != nil {
		return err
	}
	r := reader{b: b, off: 2, kind: KindJobEvent, in: in}
	e.Type = report.EventType(r.byte("type"))
	if r.err == nil && e.Type != report.JobStart && e.Type != report.JobEnd {
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

// ValidateJobEvent reports whether e encodes exactly and decodes: an error wrapping
// [ErrMalformed] names the first field that [AppendJobEvent] would clamp or
// that decoders would reject.
func ValidateJobEvent(e *report.JobEvent) error {
	v := validator{kind: KindJobEvent}
	if e.Type != report.JobStart && e.Type != report.JobEnd {
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
