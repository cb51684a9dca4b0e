package wire

import (
	"fmt"
	"math"
	"slices"

	"sluice/pkg/report"
)

// AppendSample appends s encoded as a sample message to dst and returns the
// extended buffer. Fields outside the format's limits are clamped as the
// package doc's Caveats describe; [ValidateSample] reports them.
func AppendSample(dst []byte, s *report.Sample) []byte {
	dst = append(dst, Version1, byte(KindSample))
	dst = appendString(dst, s.Node)
	dst = appendUvarint(dst, s.Seq)
	start, end := timeToNanos(s.Start), timeToNanos(s.End)
	if end < start {
		end = start
	}
	dst = appendVarint(dst, start)
	dst = appendUvarint(dst, uint64(end)-uint64(start))
	dst = appendStrings(dst, s.Jobs)
	dst = appendValues(dst, &s.Values)
	per := limit(s.PerJob)
	dst = appendUvarint(dst, uint64(len(per)))
	for i := range per {
		dst = appendString(dst, per[i].Job)
		dst = appendValues(dst, &per[i].Values)
	}
	return dst
}

// DecodeSample decodes the sample message b into s. It reuses the capacity
// of s.Jobs and s.PerJob, so a subscriber that decodes into one Sample
// allocates only the strings. On error s holds a partial decode.
func DecodeSample(b []byte, s *report.Sample) error {
	return decodeSample(b, s, nil)
}

func decodeSample(b []byte, s *report.Sample, in *Decoder) error {
	if err := checkHeader(b, KindSample); err != nil {
		return err
	}
	r := reader{b: b, off: 2, kind: KindSample, in: in}
	s.Node = r.str("node")
	s.Seq = r.uvarint("seq")
	start := r.varint("start")
	d := r.uvarint("duration")
	// The end must stay within int64 nanoseconds; the unsigned
	// subtraction is exact because MaxInt64 >= start.
	if d > uint64(math.MaxInt64)-uint64(start) {
		r.fail("duration", ErrMalformed, fmt.Sprintf("end overflows: start %d + %d ns", start, d))
	}
	s.Start = nanosToTime(start)
	s.End = nanosToTime(int64(uint64(start) + d))
	s.Jobs = r.strings("jobs", s.Jobs)
	r.values("values", &s.Values)
	n, hint := r.count("per-job", 2)
	s.PerJob = slices.Grow(s.PerJob[:0], hint)
	for i := 0; i < n && r.err == nil; i++ {
		s.PerJob = append(s.PerJob, report.JobValues{Job: r.str("per-job job")})
		r.values("per-job values", &s.PerJob[len(s.PerJob)-1].Values)
	}
	return r.done()
}

// ValidateSample reports whether s encodes exactly: an error wrapping
// [ErrMalformed] names the first field that [AppendSample] would clamp.
func ValidateSample(s *report.Sample) error {
	v := validator{kind: KindSample}
	v.str("node", s.Node)
	v.time("start", s.Start)
	v.time("end", s.End)
	if s.End.Before(s.Start) {
		v.fail("end", "end before start")
	}
	v.strs("jobs", s.Jobs)
	v.count("per-job", len(s.PerJob))
	for i := range s.PerJob {
		v.str("per-job job", s.PerJob[i].Job)
	}
	return v.err
}
