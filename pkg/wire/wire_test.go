package wire_test

import (
	"fmt"
	"math"
	"strings"
	"testing"
	"time"
	"unsafe"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/metric"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// Fixtures shared by the tests, benchmarks and fuzz seeds. Functions, not
// package variables, so no test can change another's input.

func typicalSample() *report.Sample {
	start := time.Date(2025, 3, 14, 9, 26, 50, 123456789, time.UTC)
	return &report.Sample{
		Node:  "r07c12n03-ib",
		Seq:   123456,
		Start: start,
		End:   start.Add(10 * time.Second),
		Jobs:  []string{"8812345"},
		Values: metric.Values{
			metric.ReadBytes:   734003200,
			metric.WriteBytes:  52428800,
			metric.ReadOps:     700,
			metric.WriteOps:    50,
			metric.Opens:       1200,
			metric.Closes:      1198,
			metric.StatOps:     5400,
			metric.MetaUpdates: 3,
		},
	}
}

// sharedSample has two jobs and a per-job split; it is the golden sample.
func sharedSample() *report.Sample {
	s := typicalSample()
	s.Jobs = []string{"8812345", "8812346_7"}
	s.Values[metric.Syncs] = 40
	s.PerJob = []report.JobValues{
		{Job: "8812345", Values: metric.Values{metric.ReadBytes: 734003200, metric.ReadOps: 700, metric.Opens: 1200, metric.Closes: 1198, metric.StatOps: 5000}},
		{Job: "8812346_7", Values: metric.Values{metric.WriteBytes: 52428800, metric.WriteOps: 50, metric.StatOps: 400, metric.MetaUpdates: 3, metric.Syncs: 40}},
	}
	return s
}

func typicalJobEvent() *report.JobEvent {
	return &report.JobEvent{
		Type:     report.JobEnd,
		Job:      "8812345",
		Node:     "r07c12n03-ib",
		Time:     time.Date(2025, 3, 14, 11, 0, 0, 5, time.UTC),
		User:     "alice",
		Account:  "proj-climate",
		Name:     "wrf_ensemble",
		Nodes:    []string{"r07c12n03-ib", "r07c12n04-ib", "r07c13n01-ib", "r07c13n02-ib"},
		ExitCode: -9,
	}
}

func typicalHeartbeat() *report.Heartbeat {
	return &report.Heartbeat{
		Node:       "r07c12n03-ib",
		Time:       time.Date(2025, 3, 14, 9, 27, 0, 0, time.UTC),
		Version:    "v0.3.1-4-gdeadbee",
		Interval:   10 * time.Second,
		CPUSeconds: 12.375,
		RSSBytes:   18 << 20,
		Queued:     3,
		Dropped:    1,
		Sources: []report.SourceCost{
			{Name: "lustre", Instances: 2, MicrosPerRead: 85.25, OK: true, Malformed: 7},
			{Name: "nfs", Instances: 0, MicrosPerRead: 12.5, OK: false, Malformed: 300},
		},
	}
}

func manyStrings(n int, format string) []string {
	ss := make([]string, n)
	for i := range ss {
		ss[i] = fmt.Sprintf(format, i)
	}
	return ss
}

func allValues(x uint64) metric.Values {
	var v metric.Values
	for i := range v {
		v[i] = x
	}
	return v
}

// Normalizers make decoded values comparable with assert.Equal: times in
// UTC without a monotonic reading, and empty slices as nil (a decode into a
// fresh value leaves them nil).

func normTime(t time.Time) time.Time { return t.Round(0).UTC() }

func nilIfEmpty[T any](s []T) []T {
	if len(s) == 0 {
		return nil
	}
	return s
}

func normSample(s report.Sample) report.Sample {
	s.Start, s.End = normTime(s.Start), normTime(s.End)
	s.Jobs, s.PerJob = nilIfEmpty(s.Jobs), nilIfEmpty(s.PerJob)
	return s
}

func normJobEvent(e report.JobEvent) report.JobEvent {
	e.Time = normTime(e.Time)
	e.Nodes = nilIfEmpty(e.Nodes)
	return e
}

func normHeartbeat(h report.Heartbeat) report.Heartbeat {
	h.Time = normTime(h.Time)
	h.Sources = nilIfEmpty(h.Sources)
	return h
}

func TestSampleRoundTrip(t *testing.T) {
	t.Parallel()
	epoch := time.Unix(0, 0).UTC()
	long := strings.Repeat("é", 200) // 400 bytes; cut to 256 = 128 runes
	tests := []struct {
		name    string
		input   *report.Sample
		want    *report.Sample // nil: same as input
		wantErr error          // from Validate
	}{
		{name: "zero", input: &report.Sample{}},
		{name: "typical", input: typicalSample()},
		{name: "per-job blocks", input: sharedSample()},
		{name: "epoch", input: &report.Sample{Node: "n", Seq: 1, Start: epoch, End: epoch}},
		{name: "before epoch", input: &report.Sample{Node: "n", Seq: 2, Start: time.Unix(-1, 1).UTC(), End: time.Unix(3, 999999999).UTC()}},
		{name: "zero start", input: &report.Sample{Node: "n", End: time.Unix(1, 0).UTC()}},
		{
			name: "max values",
			input: &report.Sample{
				Node:   strings.Repeat("x", wire.MaxStringLen),
				Seq:    math.MaxUint64,
				Start:  time.Unix(0, math.MinInt64+1).UTC(),
				End:    time.Unix(0, math.MaxInt64).UTC(),
				Jobs:   []string{strings.Repeat("j", wire.MaxStringLen)},
				Values: allValues(math.MaxUint64),
				PerJob: []report.JobValues{{Job: "j", Values: allValues(math.MaxUint64)}},
			},
		},
		{
			name: "many jobs",
			input: &report.Sample{
				Node: "n", Seq: 3, Start: epoch, End: epoch.Add(time.Minute),
				Jobs: manyStrings(wire.MaxCount, "job-%d"),
			},
		},
		{
			name: "many per-job blocks",
			input: func() *report.Sample {
				s := typicalSample()
				s.Jobs = manyStrings(wire.MaxCount, "%d")
				for i, j := range s.Jobs {
					jv := report.JobValues{Job: j}
					jv.Values[i%int(metric.Count)] = uint64(i + 1)
					s.PerJob = append(s.PerJob, jv)
				}
				return s
			}(),
		},
		{
			name: "unicode",
			input: &report.Sample{
				Node: "nœud-Ω-東京", Seq: 4, Start: epoch, End: epoch,
				Jobs:   []string{"作業1", "🚀", ""},
				PerJob: []report.JobValues{{Job: "作業1", Values: metric.Values{metric.Syncs: 1}}},
			},
		},
		{
			name:  "local zone and monotonic reading",
			input: &report.Sample{Node: "n", Start: time.Now(), End: time.Now().Add(time.Second).In(time.FixedZone("X", 3600))},
		},
		{
			name:    "end before start is clamped",
			input:   &report.Sample{Node: "n", Start: epoch.Add(time.Second), End: epoch},
			want:    &report.Sample{Node: "n", Start: epoch.Add(time.Second), End: epoch.Add(time.Second)},
			wantErr: wire.ErrMalformed,
		},
		{
			name:    "long and invalid strings are clamped",
			input:   &report.Sample{Node: long, Jobs: []string{"a\xffb"}},
			want:    &report.Sample{Node: long[:256], Jobs: []string{"a\uFFFDb"}},
			wantErr: wire.ErrMalformed,
		},
		{
			name:    "too many jobs are cut",
			input:   &report.Sample{Node: "n", Jobs: manyStrings(wire.MaxCount+1, "%d")},
			want:    &report.Sample{Node: "n", Jobs: manyStrings(wire.MaxCount, "%d")},
			wantErr: wire.ErrMalformed,
		},
		{
			name:    "times beyond int64 nanoseconds are clamped",
			input:   &report.Sample{Start: time.Date(1600, 1, 1, 0, 0, 0, 0, time.UTC), End: time.Date(2300, 1, 1, 0, 0, 0, 0, time.UTC)},
			want:    &report.Sample{Start: time.Unix(0, math.MinInt64+1).UTC(), End: time.Unix(0, math.MaxInt64).UTC()},
			wantErr: wire.ErrMalformed,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			want := tt.want
			if want == nil {
				want = tt.input
			}
			err := wire.ValidateSample(tt.input)
			if tt.wantErr != nil {
				require.ErrorIs(t, err, tt.wantErr)
			} else {
				require.NoError(t, err)
			}
			b := wire.AppendSample(nil, tt.input)
			var got report.Sample
			require.NoError(t, wire.DecodeSample(b, &got))
			assert.Equal(t, normSample(*want), got, "(-want +got)")
			assert.True(t, want.Start.Equal(got.Start), "start")
			assert.True(t, want.End.Equal(got.End), "end")
			assert.Equal(t, b, wire.AppendSample(nil, &got), "re-encoding")
		})
	}
}

func TestJobEventRoundTrip(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   *report.JobEvent
		want    *report.JobEvent
		wantErr error
	}{
		{name: "typical", input: typicalJobEvent()},
		{name: "start with empty metadata", input: &report.JobEvent{Type: report.JobStart, Job: "1", Node: "n", Time: time.Unix(1, 2).UTC()}},
		{name: "zero time", input: &report.JobEvent{Type: report.JobStart}},
		{
			name: "max values",
			input: &report.JobEvent{
				Type: report.JobEnd, Job: strings.Repeat("9", 256), Node: strings.Repeat("n", 256),
				Time: time.Unix(0, math.MaxInt64).UTC(), User: strings.Repeat("u", 256),
				Account: strings.Repeat("a", 256), Name: strings.Repeat("j", 256),
				Nodes: manyStrings(wire.MaxCount, "node%04d"), ExitCode: math.MinInt32,
			},
		},
		{name: "max exit code", input: &report.JobEvent{Type: report.JobEnd, ExitCode: math.MaxInt32}},
		{name: "unicode", input: &report.JobEvent{Type: report.JobStart, Job: "ジョブ", User: "zoë", Name: "模拟 🌊", Nodes: []string{"ń1"}}},
		{
			name:    "too many nodes are cut",
			input:   &report.JobEvent{Type: report.JobStart, Nodes: manyStrings(wire.MaxCount+10, "%d")},
			want:    &report.JobEvent{Type: report.JobStart, Nodes: manyStrings(wire.MaxCount, "%d")},
			wantErr: wire.ErrMalformed,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			want := tt.want
			if want == nil {
				want = tt.input
			}
			err := wire.ValidateJobEvent(tt.input)
			if tt.wantErr != nil {
				require.ErrorIs(t, err, tt.wantErr)
			} else {
				require.NoError(t, err)
			}
			b := wire.AppendJobEvent(nil, tt.input)
			var got report.JobEvent
			require.NoError(t, wire.DecodeJobEvent(b, &got))
			assert.Equal(t, normJobEvent(*want), got, "(-want +got)")
			assert.True(t, want.Time.Equal(got.Time), "time")
			assert.Equal(t, b, wire.AppendJobEvent(nil, &got), "re-encoding")
		})
	}
}

func TestJobEventUnknownType(t *testing.T) {
	t.Parallel()
	e := typicalJobEvent()
	e.Type = 7
	require.ErrorIs(t, wire.ValidateJobEvent(e), wire.ErrMalformed)
	var got report.JobEvent
	err := wire.DecodeJobEvent(wire.AppendJobEvent(nil, e), &got)
	require.ErrorIs(t, err, wire.ErrMalformed)
	assert.Contains(t, err.Error(), "type")
}

func TestHeartbeatRoundTrip(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   *report.Heartbeat
		want    *report.Heartbeat
		wantErr error
	}{
		{name: "zero", input: &report.Heartbeat{}},
		{name: "typical", input: typicalHeartbeat()},
		{
			name: "max values",
			input: &report.Heartbeat{
				Node: strings.Repeat("n", 256), Time: time.Unix(0, math.MinInt64+1).UTC(),
				Version: strings.Repeat("v", 256), Interval: math.MaxInt64,
				CPUSeconds: math.MaxFloat64, RSSBytes: math.MaxUint64, Queued: math.MaxUint32, Dropped: math.MaxUint64,
				Sources: func() []report.SourceCost {
					s := make([]report.SourceCost, wire.MaxCount)
					for i := range s {
						s[i] = report.SourceCost{Name: fmt.Sprint("src", i), Instances: math.MaxUint32, MicrosPerRead: math.SmallestNonzeroFloat64, OK: i%2 == 0, Malformed: math.MaxUint64}
					}
					return s
				}(),
			},
		},
		{name: "negative interval and infinities", input: &report.Heartbeat{Interval: math.MinInt64, CPUSeconds: math.Inf(1), Sources: []report.SourceCost{{MicrosPerRead: math.Inf(-1)}}}},
		{name: "unicode", input: &report.Heartbeat{Node: "nœud", Version: "v1-β", Sources: []report.SourceCost{{Name: "λustre", OK: true, Malformed: 1}}}},
		{
			name:    "long version is cut",
			input:   &report.Heartbeat{Version: strings.Repeat("v", 300)},
			want:    &report.Heartbeat{Version: strings.Repeat("v", 256)},
			wantErr: wire.ErrMalformed,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			want := tt.want
			if want == nil {
				want = tt.input
			}
			err := wire.ValidateHeartbeat(tt.input)
			if tt.wantErr != nil {
				require.ErrorIs(t, err, tt.wantErr)
			} else {
				require.NoError(t, err)
			}
			b := wire.AppendHeartbeat(nil, tt.input)
			var got report.Heartbeat
			require.NoError(t, wire.DecodeHeartbeat(b, &got))
			assert.Equal(t, normHeartbeat(*want), got, "(-want +got)")
			assert.True(t, want.Time.Equal(got.Time), "time")
			assert.Equal(t, b, wire.AppendHeartbeat(nil, &got), "re-encoding")
		})
	}
}

func TestHeartbeatNaN(t *testing.T) {
	t.Parallel()
	h := &report.Heartbeat{CPUSeconds: math.NaN()}
	var got report.Heartbeat
	require.NoError(t, wire.DecodeHeartbeat(wire.AppendHeartbeat(nil, h), &got))
	assert.True(t, math.IsNaN(got.CPUSeconds))
}

// TestDecodeReusesTarget checks that decoding into a used value replaces
// every field, reuses slice capacity and leaves nothing from before.
func TestDecodeReusesTarget(t *testing.T) {
	t.Parallel()
	var s report.Sample
	require.NoError(t, wire.DecodeSample(wire.AppendSample(nil, sharedSample()), &s))
	jobs, per := &s.Jobs[0], &s.PerJob[0]

	small := &report.Sample{Node: "other", Seq: 9, Jobs: []string{"x"}, Values: metric.Values{metric.Syncs: 1}}
	require.NoError(t, wire.DecodeSample(wire.AppendSample(nil, small), &s))
	assert.Equal(t, normSample(*small), normSample(s))
	assert.Same(t, jobs, &s.Jobs[0], "jobs capacity reused")
	assert.Empty(t, s.PerJob)
	assert.Same(t, per, &s.PerJob[:1][0], "per-job capacity reused")

	var e report.JobEvent
	require.NoError(t, wire.DecodeJobEvent(wire.AppendJobEvent(nil, typicalJobEvent()), &e))
	smallEvent := &report.JobEvent{Type: report.JobStart, Job: "2"}
	require.NoError(t, wire.DecodeJobEvent(wire.AppendJobEvent(nil, smallEvent), &e))
	assert.Equal(t, normJobEvent(*smallEvent), normJobEvent(e))

	var h report.Heartbeat
	require.NoError(t, wire.DecodeHeartbeat(wire.AppendHeartbeat(nil, typicalHeartbeat()), &h))
	smallHB := &report.Heartbeat{Node: "n", Sources: []report.SourceCost{{Name: "x"}}}
	require.NoError(t, wire.DecodeHeartbeat(wire.AppendHeartbeat(nil, smallHB), &h))
	assert.Equal(t, normHeartbeat(*smallHB), normHeartbeat(h))
}

func TestAppendKeepsPrefix(t *testing.T) {
	t.Parallel()
	prefix := []byte("prefix")
	b := wire.AppendSample(append([]byte(nil), prefix...), typicalSample())
	assert.Equal(t, prefix, b[:len(prefix)])
	var s report.Sample
	require.NoError(t, wire.DecodeSample(b[len(prefix):], &s))
}

func TestDecoderInterns(t *testing.T) {
	t.Parallel()
	var d wire.Decoder
	b := wire.AppendSample(nil, sharedSample())
	var s1, s2 report.Sample
	require.NoError(t, d.DecodeSample(b, &s1))
	require.NoError(t, d.DecodeSample(b, &s2))
	assert.Equal(t, normSample(*sharedSample()), s1)
	assert.Equal(t, s1, s2)
	assert.Same(t, unsafe.StringData(s1.Node), unsafe.StringData(s2.Node), "node interned")
	assert.Same(t, unsafe.StringData(s1.Jobs[1]), unsafe.StringData(s2.PerJob[1].Job), "job interned across fields")
	assert.Equal(t, 3, d.Len()) // node and two job ids

	var e report.JobEvent
	require.NoError(t, d.DecodeJobEvent(wire.AppendJobEvent(nil, typicalJobEvent()), &e))
	assert.Equal(t, normJobEvent(*typicalJobEvent()), e)
	var h report.Heartbeat
	require.NoError(t, d.DecodeHeartbeat(wire.AppendHeartbeat(nil, typicalHeartbeat()), &h))
	assert.Equal(t, normHeartbeat(*typicalHeartbeat()), h)
}

func TestDecoderBounded(t *testing.T) {
	t.Parallel()
	d := wire.Decoder{MaxStrings: 10}
	var s report.Sample
	for i := range 100 {
		require.NoError(t, d.DecodeSample(wire.AppendSample(nil, &report.Sample{Node: fmt.Sprint("node", i)}), &s))
		assert.Equal(t, fmt.Sprint("node", i), s.Node)
		assert.LessOrEqual(t, d.Len(), 10)
	}
}

func TestDecoderAllocs(t *testing.T) {
	b := wire.AppendSample(nil, typicalSample())
	var d wire.Decoder
	var s report.Sample
	require.NoError(t, d.DecodeSample(b, &s))
	allocs := testing.AllocsPerRun(100, func() { _ = d.DecodeSample(b, &s) })
	assert.Zero(t, allocs, "warm interned decode allocates nothing")
	allocs = testing.AllocsPerRun(100, func() { _ = wire.DecodeSample(b, &s) })
	assert.LessOrEqual(t, allocs, 2.0, "plain decode allocates only the node and job strings")
}

func TestKindAndEventTypeStrings(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name  string
		input fmt.Stringer
		want  string
	}{
		{name: "sample", input: wire.KindSample, want: "sample"},
		{name: "job event", input: wire.KindJobEvent, want: "job_event"},
		{name: "heartbeat", input: wire.KindHeartbeat, want: "heartbeat"},
		{name: "unknown kind", input: wire.Kind(9), want: "kind(9)"},
		{name: "start", input: report.JobStart, want: "start"},
		{name: "end", input: report.JobEnd, want: "end"},
		{name: "unknown event", input: report.EventType(0), want: "event(0)"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			assert.Equal(t, tt.want, tt.input.String())
		})
	}
}

func timeUnix(ns int64) time.Time { return time.Unix(0, ns) }
