package wire_test

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// Builders for crafted messages. They use encoding/binary rather than the
// package's own encoder, so a bug there cannot hide a bug here.

func cat(parts ...[]byte) []byte {
	var b []byte
	for _, p := range parts {
		b = append(b, p...)
	}
	return b
}

func uv(v uint64) []byte { return binary.AppendUvarint(nil, v) }
func zz(v int64) []byte  { return binary.AppendVarint(nil, v) } // zig-zag
func str(s string) []byte {
	return append(uv(uint64(len(s))), s...)
}
func f64(f float64) []byte { return binary.LittleEndian.AppendUint64(nil, math.Float64bits(f)) }

var (
	hdrSample    = []byte{1, 1}
	hdrJobEvent  = []byte{1, 2}
	hdrHeartbeat = []byte{1, 3}
	overflow     = []byte{0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01}
)

// sampleAfterNode is the rest of a minimal valid sample after its node:
// seq 1, start 0, duration 0, no jobs, no values, no per-job blocks.
func sampleAfterNode() []byte { return []byte{1, 0, 0, 0, 0, 0} }

func TestPeek(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		input   []byte
		want    wire.Kind
		wantErr error
	}{
		{name: "sample", input: wire.AppendSample(nil, typicalSample()), want: wire.KindSample},
		{name: "job event", input: wire.AppendJobEvent(nil, typicalJobEvent()), want: wire.KindJobEvent},
		{name: "heartbeat", input: wire.AppendHeartbeat(nil, typicalHeartbeat()), want: wire.KindHeartbeat},
		{name: "header only", input: []byte{1, 3}, want: wire.KindHeartbeat},
		{name: "nil", input: nil, wantErr: wire.ErrEmpty},
		{name: "empty", input: []byte{}, wantErr: wire.ErrEmpty},
		{name: "version 0", input: []byte{0, 1}, wantErr: wire.ErrUnknownVersion},
		{name: "version 2", input: []byte{2, 1, 0}, wantErr: wire.ErrUnknownVersion},
		{name: "version byte only", input: []byte{1}, wantErr: wire.ErrTruncated},
		{name: "unknown version with one byte", input: []byte{'{'}, wantErr: wire.ErrUnknownVersion},
		{name: "kind 0", input: []byte{1, 0}, wantErr: wire.ErrUnknownKind},
		{name: "kind 4", input: []byte{1, 4}, wantErr: wire.ErrUnknownKind},
		{name: "kind 255", input: []byte{1, 255}, wantErr: wire.ErrUnknownKind},
		{name: "json", input: []byte(`{"node":"n1"}`), wantErr: wire.ErrUnknownVersion},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := wire.Peek(tt.input)
			if tt.wantErr != nil {
				require.ErrorIs(t, err, tt.wantErr)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
		})
	}
}

func TestReason(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name  string
		input error
		want  string
	}{
		{name: "nil", input: nil, want: ""},
		{name: "empty", input: wire.ErrEmpty, want: "empty"},
		{name: "unknown version", input: fmt.Errorf("x: %w", wire.ErrUnknownVersion), want: "unknown_version"},
		{name: "unknown kind", input: fmt.Errorf("x: %w", wire.ErrUnknownKind), want: "unknown_kind"},
		{name: "truncated", input: fmt.Errorf("a: b: %w", wire.ErrTruncated), want: "truncated"},
		{name: "malformed", input: fmt.Errorf("x: %w", wire.ErrMalformed), want: "malformed"},
		{name: "other", input: errors.New("boom"), want: "other"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			assert.Equal(t, tt.want, wire.Reason(tt.input))
		})
	}
}

func TestDecodeSampleErrors(t *testing.T) {
	t.Parallel()
	bad := "\xc3\x28"
	tests := []struct {
		name    string
		input   []byte
		wantErr error
		wantMsg string // a substring of the error: the field it names
	}{
		{name: "empty", input: nil, wantErr: wire.ErrEmpty},
		{name: "unknown version", input: cat([]byte{9, 1}, str("n"), sampleAfterNode()), wantErr: wire.ErrUnknownVersion},
		{name: "unknown kind", input: []byte{1, 7}, wantErr: wire.ErrUnknownKind},
		{name: "job event given to sample decoder", input: wire.AppendJobEvent(nil, typicalJobEvent()), wantErr: wire.ErrUnknownKind, wantMsg: "job_event"},
		{name: "header only", input: hdrSample, wantErr: wire.ErrTruncated, wantMsg: "node"},
		{name: "node longer than payload", input: cat(hdrSample, uv(5), []byte("abc")), wantErr: wire.ErrTruncated, wantMsg: "node"},
		{name: "node over limit", input: cat(hdrSample, str(strings.Repeat("n", 257)), sampleAfterNode()), wantErr: wire.ErrMalformed, wantMsg: "257"},
		{name: "node bad utf-8", input: cat(hdrSample, str(bad), sampleAfterNode()), wantErr: wire.ErrMalformed, wantMsg: "UTF-8"},
		{name: "seq varint overflow", input: cat(hdrSample, str("n"), overflow, []byte{0, 0, 0, 0, 0}), wantErr: wire.ErrMalformed, wantMsg: "seq"},
		{name: "seq varint unterminated", input: cat(hdrSample, str("n"), []byte{0x80, 0x80}), wantErr: wire.ErrTruncated, wantMsg: "seq"},
		{name: "end overflows", input: cat(hdrSample, str("n"), uv(1), zz(math.MaxInt64-5), uv(6), []byte{0, 0, 0}), wantErr: wire.ErrMalformed, wantMsg: "duration"},
		{name: "jobs over limit", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(4097)), wantErr: wire.ErrMalformed, wantMsg: "jobs"},
		{name: "jobs fewer than count", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(3), str("a"), str("b")), wantErr: wire.ErrTruncated, wantMsg: "jobs"},
		{name: "job bad utf-8", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(1), str(bad), []byte{0, 0}), wantErr: wire.ErrMalformed, wantMsg: "jobs"},
		{name: "metric bit 12", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(0), uv(1<<12), uv(1), uv(0)), wantErr: wire.ErrMalformed, wantMsg: "metric bit 12 set"},
		{name: "metric bit 63", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(0), uv(1<<63), uv(1), uv(0)), wantErr: wire.ErrMalformed, wantMsg: "metric bit 63 set"},
		{name: "values fewer than mask", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(0), uv(0b111), uv(1), uv(2)), wantErr: wire.ErrTruncated, wantMsg: "values"},
		{name: "value overflow", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(0), uv(1), overflow, uv(0)), wantErr: wire.ErrMalformed, wantMsg: "values"},
		{name: "per-job over limit", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(0), uv(0), uv(4097)), wantErr: wire.ErrMalformed, wantMsg: "per-job"},
		{name: "per-job metric bit 20", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(0), uv(0), uv(1), str("j"), uv(1<<20), uv(5)), wantErr: wire.ErrMalformed, wantMsg: "per-job values"},
		{name: "per-job missing values", input: cat(hdrSample, str("n"), uv(1), zz(0), uv(0), uv(0), uv(0), uv(1), str("j")), wantErr: wire.ErrTruncated, wantMsg: "per-job values"},
		{name: "trailing byte", input: cat(hdrSample, str("n"), sampleAfterNode(), []byte{0}), wantErr: wire.ErrMalformed, wantMsg: "trailing bytes: 1 left"},
		{name: "two messages back to back", input: cat(wire.AppendSample(nil, typicalSample()), wire.AppendSample(nil, typicalSample())), wantErr: wire.ErrMalformed, wantMsg: "trailing bytes"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			var s report.Sample
			err := wire.DecodeSample(tt.input, &s)
			require.ErrorIs(t, err, tt.wantErr)
			assert.Contains(t, err.Error(), "sample")
			assert.Contains(t, err.Error(), tt.wantMsg)
		})
	}
}

func TestDecodeSampleLenient(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name  string
		input []byte
		want  report.Sample
	}{
		{
			name:  "minimal",
			input: cat(hdrSample, str("n"), sampleAfterNode()),
			want:  report.Sample{Node: "n", Seq: 1, Start: normTime(timeUnix(0)), End: normTime(timeUnix(0))},
		},
		{
			name:  "non-minimal varint and zero value under a set bit",
			input: cat(hdrSample, str("n"), []byte{0x81, 0x00}, zz(0), uv(0), uv(0), uv(0b11), uv(0), uv(7), uv(0)),
			want:  report.Sample{Node: "n", Seq: 1, Start: normTime(timeUnix(0)), End: normTime(timeUnix(0)), Values: [12]uint64{1: 7}},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			var got report.Sample
			require.NoError(t, wire.DecodeSample(tt.input, &got))
			assert.Equal(t, tt.want, got)
		})
	}
}

func TestDecodeJobEventErrors(t *testing.T) {
	t.Parallel()
	rest := func(exit []byte) []byte { // job, node, time, user, account, name, nodes, exit
		return cat(str("j"), str("n"), zz(0), str(""), str(""), str(""), uv(0), exit)
	}
	tests := []struct {
		name    string
		input   []byte
		wantErr error
		wantMsg string
	}{
		{name: "empty", input: []byte{}, wantErr: wire.ErrEmpty},
		{name: "unknown version", input: cat([]byte{0, 2, 1}, rest(zz(0))), wantErr: wire.ErrUnknownVersion},
		{name: "unknown kind", input: cat([]byte{1, 0x42, 1}, rest(zz(0))), wantErr: wire.ErrUnknownKind},
		{name: "sample given to job event decoder", input: wire.AppendSample(nil, typicalSample()), wantErr: wire.ErrUnknownKind, wantMsg: "sample"},
		{name: "header only", input: hdrJobEvent, wantErr: wire.ErrTruncated, wantMsg: "type"},
		{name: "event type 0", input: cat(hdrJobEvent, []byte{0}, rest(zz(0))), wantErr: wire.ErrMalformed, wantMsg: "type"},
		{name: "event type 3", input: cat(hdrJobEvent, []byte{3}, rest(zz(0))), wantErr: wire.ErrMalformed, wantMsg: "type"},
		{name: "exit code above int32", input: cat(hdrJobEvent, []byte{2}, rest(zz(math.MaxInt32+1))), wantErr: wire.ErrMalformed, wantMsg: "exit code"},
		{name: "exit code below int32", input: cat(hdrJobEvent, []byte{2}, rest(zz(math.MinInt32-1))), wantErr: wire.ErrMalformed, wantMsg: "exit code"},
		{name: "time overflow", input: cat(hdrJobEvent, []byte{1}, str("j"), str("n"), overflow), wantErr: wire.ErrMalformed, wantMsg: "time"},
		{name: "user over limit", input: cat(hdrJobEvent, []byte{1}, str("j"), str("n"), zz(0), str(strings.Repeat("u", 300)), str(""), str(""), uv(0), zz(0)), wantErr: wire.ErrMalformed, wantMsg: "user"},
		{name: "nodes over limit", input: cat(hdrJobEvent, []byte{1}, str("j"), str("n"), zz(0), str(""), str(""), str(""), uv(5000)), wantErr: wire.ErrMalformed, wantMsg: "nodes"},
		{name: "nodes huge count", input: cat(hdrJobEvent, []byte{1}, str("j"), str("n"), zz(0), str(""), str(""), str(""), uv(math.MaxUint64)), wantErr: wire.ErrMalformed, wantMsg: "nodes"},
		{name: "node name bad utf-8", input: cat(hdrJobEvent, []byte{1}, str("j"), str("n"), zz(0), str(""), str(""), str(""), uv(1), str("\xff"), zz(0)), wantErr: wire.ErrMalformed, wantMsg: "nodes"},
		{name: "missing exit code", input: cat(hdrJobEvent, []byte{1}, str("j"), str("n"), zz(0), str(""), str(""), str(""), uv(0)), wantErr: wire.ErrTruncated, wantMsg: "exit code"},
		{name: "trailing bytes", input: cat(hdrJobEvent, []byte{1}, rest(zz(0)), []byte("xyz")), wantErr: wire.ErrMalformed, wantMsg: "trailing bytes: 3 left"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			var e report.JobEvent
			err := wire.DecodeJobEvent(tt.input, &e)
			require.ErrorIs(t, err, tt.wantErr)
			assert.Contains(t, err.Error(), "job_event")
			assert.Contains(t, err.Error(), tt.wantMsg)
		})
	}
}

func TestDecodeHeartbeatErrors(t *testing.T) {
	t.Parallel()
	// head is a valid heartbeat up to its queued field.
	head := func(queued []byte) []byte {
		return cat(hdrHeartbeat, str("n"), zz(0), str("v"), zz(10), f64(1), uv(1), queued, uv(0))
	}
	tests := []struct {
		name    string
		input   []byte
		wantErr error
		wantMsg string
	}{
		{name: "empty", input: nil, wantErr: wire.ErrEmpty},
		{name: "unknown version", input: cat([]byte{0xff, 3}, head(uv(0))[2:], uv(0)), wantErr: wire.ErrUnknownVersion},
		{name: "unknown kind", input: []byte{1, 0}, wantErr: wire.ErrUnknownKind},
		{name: "job event given to heartbeat decoder", input: wire.AppendJobEvent(nil, typicalJobEvent()), wantErr: wire.ErrUnknownKind},
		{name: "header only", input: hdrHeartbeat, wantErr: wire.ErrTruncated, wantMsg: "node"},
		{name: "short float", input: cat(hdrHeartbeat, str("n"), zz(0), str("v"), zz(10), []byte{0, 0, 0, 0}), wantErr: wire.ErrTruncated, wantMsg: "cpu seconds"},
		{name: "queued above uint32", input: cat(head(uv(math.MaxUint32+1)), uv(0)), wantErr: wire.ErrMalformed, wantMsg: "queued"},
		{name: "sources over limit", input: cat(head(uv(0)), uv(wire.MaxCount+1)), wantErr: wire.ErrMalformed, wantMsg: "sources"},
		{name: "source instances above uint32", input: cat(head(uv(0)), uv(1), str("s"), uv(1<<40), f64(1), []byte{1}, uv(0)), wantErr: wire.ErrMalformed, wantMsg: "source instances"},
		{name: "source ok byte 2", input: cat(head(uv(0)), uv(1), str("s"), uv(1), f64(1), []byte{2}, uv(0)), wantErr: wire.ErrMalformed, wantMsg: "source ok"},
		{name: "source missing ok", input: cat(head(uv(0)), uv(1), str("s"), uv(1), f64(1)), wantErr: wire.ErrTruncated, wantMsg: "source ok"},
		{name: "source missing malformed", input: cat(head(uv(0)), uv(1), str("s"), uv(1), f64(1), []byte{1}), wantErr: wire.ErrTruncated, wantMsg: "source malformed"},
		{name: "source malformed overflows", input: cat(head(uv(0)), uv(1), str("s"), uv(1), f64(1), []byte{1}, overflow), wantErr: wire.ErrMalformed, wantMsg: "source malformed"},
		{name: "sources fewer than count", input: cat(head(uv(0)), uv(2), str("s"), uv(1), f64(1), []byte{1}, uv(0)), wantErr: wire.ErrTruncated, wantMsg: "source name"},
		{name: "missing sources", input: head(uv(0)), wantErr: wire.ErrTruncated, wantMsg: "sources"},
		{name: "trailing byte", input: cat(head(uv(0)), uv(0), []byte{0}), wantErr: wire.ErrMalformed, wantMsg: "trailing bytes"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			var h report.Heartbeat
			err := wire.DecodeHeartbeat(tt.input, &h)
			require.ErrorIs(t, err, tt.wantErr)
			assert.Contains(t, err.Error(), "heartbeat")
			assert.Contains(t, err.Error(), tt.wantMsg)
		})
	}
}

// TestTruncation cuts valid messages at every offset: the decoder must
// reject each prefix as empty, truncated or malformed, and never panic.
func TestTruncation(t *testing.T) {
	t.Parallel()
	decoders := map[string]func([]byte) error{
		"sample":    func(b []byte) error { return wire.DecodeSample(b, &report.Sample{}) },
		"job_event": func(b []byte) error { return wire.DecodeJobEvent(b, &report.JobEvent{}) },
		"heartbeat": func(b []byte) error { return wire.DecodeHeartbeat(b, &report.Heartbeat{}) },
	}
	tests := []struct {
		name  string
		kind  string
		input []byte
	}{
		{name: "zero sample", kind: "sample", input: wire.AppendSample(nil, &report.Sample{})},
		{name: "typical sample", kind: "sample", input: wire.AppendSample(nil, typicalSample())},
		{name: "shared sample", kind: "sample", input: wire.AppendSample(nil, sharedSample())},
		{name: "max sample", kind: "sample", input: wire.AppendSample(nil, &report.Sample{Node: "n", Seq: math.MaxUint64, Values: allValues(math.MaxUint64), PerJob: []report.JobValues{{Job: "j", Values: allValues(math.MaxUint64)}}})},
		{name: "zero job event", kind: "job_event", input: wire.AppendJobEvent(nil, &report.JobEvent{Type: report.JobStart})},
		{name: "typical job event", kind: "job_event", input: wire.AppendJobEvent(nil, typicalJobEvent())},
		{name: "zero heartbeat", kind: "heartbeat", input: wire.AppendHeartbeat(nil, &report.Heartbeat{})},
		{name: "typical heartbeat", kind: "heartbeat", input: wire.AppendHeartbeat(nil, typicalHeartbeat())},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			decode := decoders[tt.kind]
			require.NoError(t, decode(tt.input))
			require.ErrorIs(t, decode(tt.input[:0]), wire.ErrEmpty)
			for i := 1; i < len(tt.input); i++ {
				err := decode(tt.input[:i])
				require.Error(t, err, "prefix of %d bytes decoded", i)
				if !errors.Is(err, wire.ErrTruncated) && !errors.Is(err, wire.ErrMalformed) {
					t.Fatalf("prefix of %d bytes: got %v, want truncated or malformed", i, err)
				}
			}
		})
	}
}
