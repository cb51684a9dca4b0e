package wire_test

import (
	"math"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/metric"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// seed adds the golden fixtures and a few encodings to a fuzz corpus.
func seed(f *testing.F, encodings ...[]byte) {
	f.Helper()
	for _, tt := range goldenMessages() {
		text, err := os.ReadFile(filepath.Join(goldenDir, tt.file))
		require.NoError(f, err)
		f.Add(readHex(f, string(text)))
	}
	for _, b := range encodings {
		f.Add(b)
	}
	f.Add([]byte{})
	f.Add([]byte{1})
}

func FuzzDecodeSample(f *testing.F) {
	seed(f,
		wire.AppendSample(nil, &report.Sample{}),
		wire.AppendSample(nil, typicalSample()),
		wire.AppendSample(nil, &report.Sample{Node: "ü", Seq: math.MaxUint64, Start: time.Unix(0, math.MaxInt64), End: time.Unix(0, math.MaxInt64), Values: allValues(math.MaxUint64)}),
	)
	f.Fuzz(func(t *testing.T, b []byte) {
		var s1 report.Sample
		if err := wire.DecodeSample(b, &s1); err != nil {
			require.NotEqual(t, "other", wire.Reason(err), "%v", err)
			return
		}
		require.NoError(t, wire.ValidateSample(&s1), "a decoded sample is valid")
		b2 := wire.AppendSample(nil, &s1)
		var s2 report.Sample
		require.NoError(t, wire.DecodeSample(b2, &s2))
		require.Equal(t, s1, s2)
		require.Equal(t, b2, wire.AppendSample(nil, &s2), "encoding is canonical")
	})
}

func FuzzDecodeJobEvent(f *testing.F) {
	seed(f,
		wire.AppendJobEvent(nil, &report.JobEvent{Type: report.JobStart}),
		wire.AppendJobEvent(nil, typicalJobEvent()),
		wire.AppendJobEvent(nil, &report.JobEvent{Type: report.JobEnd, Time: time.Unix(0, math.MinInt64+1), ExitCode: math.MinInt32, Nodes: []string{"", "ñ"}}),
	)
	f.Fuzz(func(t *testing.T, b []byte) {
		var e1 report.JobEvent
		if err := wire.DecodeJobEvent(b, &e1); err != nil {
			require.NotEqual(t, "other", wire.Reason(err), "%v", err)
			return
		}
		require.NoError(t, wire.ValidateJobEvent(&e1), "a decoded job event is valid")
		b2 := wire.AppendJobEvent(nil, &e1)
		var e2 report.JobEvent
		require.NoError(t, wire.DecodeJobEvent(b2, &e2))
		require.Equal(t, e1, e2)
		require.Equal(t, b2, wire.AppendJobEvent(nil, &e2), "encoding is canonical")
	})
}

// comparableHeartbeat replaces floats with their bits, so NaN equals NaN.
type comparableHeartbeat struct {
	h       report.Heartbeat
	cpu     uint64
	sources []uint64
}

func heartbeatKey(h report.Heartbeat) comparableHeartbeat {
	k := comparableHeartbeat{cpu: math.Float64bits(h.CPUSeconds)}
	h.CPUSeconds = 0
	h.Sources = append([]report.SourceCost(nil), h.Sources...)
	for i := range h.Sources {
		k.sources = append(k.sources, math.Float64bits(h.Sources[i].MicrosPerRead))
		h.Sources[i].MicrosPerRead = 0
	}
	k.h = h
	return k
}

func FuzzDecodeHeartbeat(f *testing.F) {
	seed(f,
		wire.AppendHeartbeat(nil, &report.Heartbeat{}),
		wire.AppendHeartbeat(nil, typicalHeartbeat()),
		wire.AppendHeartbeat(nil, &report.Heartbeat{CPUSeconds: math.NaN(), Queued: math.MaxUint32, Interval: math.MinInt64, Sources: []report.SourceCost{{Instances: math.MaxUint32, MicrosPerRead: math.Inf(1), Malformed: math.MaxUint64}}}),
	)
	f.Fuzz(func(t *testing.T, b []byte) {
		var h1 report.Heartbeat
		if err := wire.DecodeHeartbeat(b, &h1); err != nil {
			require.NotEqual(t, "other", wire.Reason(err), "%v", err)
			return
		}
		require.NoError(t, wire.ValidateHeartbeat(&h1), "a decoded heartbeat is valid")
		b2 := wire.AppendHeartbeat(nil, &h1)
		var h2 report.Heartbeat
		require.NoError(t, wire.DecodeHeartbeat(b2, &h2))
		require.Equal(t, heartbeatKey(h1), heartbeatKey(h2))
		require.Equal(t, b2, wire.AppendHeartbeat(nil, &h2), "encoding is canonical")
	})
}

// FuzzSampleRoundTrip builds samples from fuzzed fields: every sample must
// encode to a message that decodes, to the same sample when it is valid,
// and to one that re-encodes to the same bytes when it was clamped.
func FuzzSampleRoundTrip(f *testing.F) {
	f.Add("r07c12n03-ib", uint64(1), int64(1741944410123456789), uint64(10e9), "8812345", "", uint16(0xfff), uint64(4096), uint64(3), "8812345")
	f.Add("", uint64(0), int64(math.MinInt64), uint64(0), "", "", uint16(0), uint64(0), uint64(0), "")
	f.Add("nœud\xff", uint64(math.MaxUint64), int64(math.MaxInt64), uint64(math.MaxUint64), "作業", "🚀", uint16(0xffff), uint64(math.MaxUint64), uint64(1), "x")
	f.Add("n", uint64(7), int64(-1), uint64(1), "a", "b", uint16(0x801), uint64(1), uint64(0), "")
	f.Fuzz(func(t *testing.T, node string, seq uint64, start int64, dur uint64, job1, job2 string, mask uint16, a, b uint64, perJob string) {
		s := report.Sample{Node: node, Seq: seq}
		if start != math.MinInt64 {
			s.Start = time.Unix(0, start).UTC()
		}
		s.End = s.Start.Add(time.Duration(dur >> 1))
		for _, j := range []string{job1, job2} {
			if j != "" {
				s.Jobs = append(s.Jobs, j)
			}
		}
		for i := range metric.Count {
			if mask&(1<<i) != 0 {
				s.Values[i] = a*uint64(i+1) ^ b
			}
		}
		if perJob != "" {
			jv := report.JobValues{Job: perJob}
			for i := range metric.Count {
				if mask&(1<<(15-i)) != 0 {
					jv.Values[i] = b<<i | a
				}
			}
			s.PerJob = append(s.PerJob, jv)
		}

		enc := wire.AppendSample(nil, &s)
		var got report.Sample
		require.NoError(t, wire.DecodeSample(enc, &got))
		require.Equal(t, enc, wire.AppendSample(nil, &got), "clamping is idempotent")
		if wire.ValidateSample(&s) != nil {
			return
		}
		require.Equal(t, normSample(s), got)
		require.True(t, s.Start.Equal(got.Start) && s.End.Equal(got.End), "times")
	})
}
