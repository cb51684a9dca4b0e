package wire_test

import (
	"bufio"
	"bytes"
	"encoding/hex"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/metric"
	"sluice/pkg/report"
	"sluice/pkg/wire"
)

var update = flag.Bool("update", false, "rewrite testdata/wire/*.golden from the current encoder")

const goldenDir = "../../testdata/wire"

// readHex parses a hex dump: whitespace-separated hex, with "#" comments.
func readHex(t testing.TB, text string) []byte {
	t.Helper()
	var digits strings.Builder
	sc := bufio.NewScanner(strings.NewReader(text))
	for sc.Scan() {
		line, _, _ := strings.Cut(sc.Text(), "#")
		digits.WriteString(strings.Join(strings.Fields(line), ""))
	}
	b, err := hex.DecodeString(digits.String())
	require.NoError(t, err)
	return b
}

func writeHex(b []byte) string {
	var sb strings.Builder
	sb.WriteString("# wire format v1, regenerate with: go test ./pkg/wire -run TestGolden -update\n")
	for len(b) > 0 {
		n := min(16, len(b))
		for i, c := range b[:n] {
			if i > 0 {
				sb.WriteByte(' ')
			}
			fmt.Fprintf(&sb, "%02x", c)
		}
		sb.WriteByte('\n')
		b = b[n:]
	}
	return sb.String()
}

// goldenMessages lists one message of each kind with its golden file.
func goldenMessages() []struct {
	name   string
	file   string
	encode func() []byte
	decode func([]byte) (any, error)
	want   any
} {
	return []struct {
		name   string
		file   string
		encode func() []byte
		decode func([]byte) (any, error)
		want   any
	}{
		{
			name:   "sample",
			file:   "sample.golden",
			encode: func() []byte { return wire.AppendSample(nil, sharedSample()) },
			decode: func(b []byte) (any, error) { var s report.Sample; err := wire.DecodeSample(b, &s); return s, err },
			want:   normSample(*sharedSample()),
		},
		{
			name:   "job event",
			file:   "job_event.golden",
			encode: func() []byte { return wire.AppendJobEvent(nil, typicalJobEvent()) },
			decode: func(b []byte) (any, error) { var e report.JobEvent; err := wire.DecodeJobEvent(b, &e); return e, err },
			want:   normJobEvent(*typicalJobEvent()),
		},
		{
			name:   "heartbeat",
			file:   "heartbeat.golden",
			encode: func() []byte { return wire.AppendHeartbeat(nil, typicalHeartbeat()) },
			decode: func(b []byte) (any, error) { var h report.Heartbeat; err := wire.DecodeHeartbeat(b, &h); return h, err },
			want:   normHeartbeat(*typicalHeartbeat()),
		},
	}
}

// TestGolden keeps the byte layout from changing silently: the encoder
// must reproduce each fixture, and each fixture must decode to its value.
func TestGolden(t *testing.T) {
	for _, tt := range goldenMessages() {
		t.Run(tt.name, func(t *testing.T) {
			path := filepath.Join(goldenDir, tt.file)
			got := tt.encode()
			if *update {
				require.NoError(t, os.MkdirAll(goldenDir, 0o755))
				require.NoError(t, os.WriteFile(path, []byte(writeHex(got)), 0o644))
			}
			text, err := os.ReadFile(path)
			require.NoError(t, err, "run with -update to create it")
			want := readHex(t, string(text))
			assert.Equal(t, want, got, "encoding differs from %s; a layout change needs a new version", path)
			v, err := tt.decode(want)
			require.NoError(t, err)
			assert.Equal(t, tt.want, v)
		})
	}
}

// docExample returns the hex bytes of the package doc's example that
// follows the line containing marker: the leading hex column of each
// indented line up to the next blank comment line.
func docExample(t *testing.T, marker string) []byte {
	t.Helper()
	src, err := os.ReadFile("doc.go")
	require.NoError(t, err)
	hexCol := regexp.MustCompile(`^//\t((?:[0-9A-F]{2} )*[0-9A-F]{2})(?:\s{2,}|$)`)
	var out []byte
	found := false
	for line := range bytes.Lines(src) {
		line = bytes.TrimRight(line, "\n")
		if !found {
			found = bytes.Contains(line, []byte(marker))
			continue
		}
		if len(out) > 0 && !bytes.HasPrefix(line, []byte("//\t")) {
			break
		}
		if m := hexCol.FindSubmatch(line); m != nil {
			out = append(out, readHex(t, string(m[1]))...)
		}
	}
	require.True(t, found, "marker %q not in doc.go", marker)
	require.NotEmpty(t, out)
	return out
}

// TestDocLayout checks the package doc's description against messages
// built here byte by byte from that description alone, and against the
// doc's own worked examples.
func TestDocLayout(t *testing.T) {
	t.Parallel()
	start := time.Unix(0, 1000).UTC()
	sample := &report.Sample{
		Node:   "cn01",
		Seq:    300,
		Start:  start,
		End:    start.Add(10 * time.Second),
		Jobs:   []string{"42", "é"},
		Values: metric.Values{metric.ReadBytes: 4096, metric.WriteOps: 1, metric.Syncs: 3},
		PerJob: []report.JobValues{{Job: "42", Values: metric.Values{metric.ReadBytes: 4096}}},
	}
	heartbeat := &report.Heartbeat{
		Node:       "cn01",
		Time:       time.Unix(0, -1).UTC(),
		Version:    "v1",
		Interval:   10 * time.Second,
		CPUSeconds: 1.5,
		RSSBytes:   300,
		Sources:    []report.SourceCost{{Name: "lustre", Instances: 2, MicrosPerRead: 12.5, OK: true, Malformed: 3}},
	}
	tests := []struct {
		name   string
		marker string
		want   []byte
		encode func() []byte
		decode func([]byte) (any, error)
		value  any
	}{
		{
			name:   "sample",
			marker: "a sample from node",
			want: []byte{
				0x01,                     // version 1
				0x01,                     // kind sample
				0x04, 'c', 'n', '0', '1', // node: length 4, then the bytes
				0xAC, 0x02, // seq 300 = 0b10_0101100: 0x2C|0x80, then 0x02
				0xD0, 0x0F, // start 1000 ns: zig-zag 2000 = 0b1111_1010000: 0x50|0x80, 0x0F
				0x80, 0xC8, 0xAF, 0xA0, 0x25, // duration 10e9 ns = 0x2_540B_E400 in 7-bit groups: 00 48 2F 20 25
				0x02,           // 2 jobs
				0x02, '4', '2', // "42"
				0x02, 0xC3, 0xA9, // "é" is U+00E9, UTF-8 C3 A9
				0x89, 0x08, // mask 1<<0 | 1<<3 | 1<<10 = 0x409 = 0b1000_0001001: 0x09|0x80, 0x08
				0x80, 0x20, // read_bytes 4096 = 32<<7: 0x00|0x80, 0x20
				0x01,           // write_ops 1
				0x03,           // syncs 3
				0x01,           // 1 per-job block
				0x02, '4', '2', // job "42"
				0x01,       // mask: read_bytes only
				0x80, 0x20, // read_bytes 4096
			},
			encode: func() []byte { return wire.AppendSample(nil, sample) },
			decode: func(b []byte) (any, error) { var s report.Sample; err := wire.DecodeSample(b, &s); return s, err },
			value:  normSample(*sample),
		},
		{
			name:   "heartbeat",
			marker: "a heartbeat from",
			want: []byte{
				0x01, 0x03, // version 1, kind heartbeat
				0x04, 'c', 'n', '0', '1', // node
				0x01,           // time -1 ns: zig-zag 1
				0x02, 'v', '1', // version
				0x80, 0x90, 0xDF, 0xC0, 0x4A, // interval 10e9 ns: zig-zag 20e9 = 0x4_A817_C800
				0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0xF8, 0x3F, // cpu 1.5 = 0x3FF8000000000000, little-endian
				0xAC, 0x02, // rss 300
				0x00,                               // queued
				0x00,                               // dropped
				0x01,                               // 1 source
				0x06, 'l', 'u', 's', 't', 'r', 'e', // name
				0x02,                                           // instances
				0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x29, 0x40, // micros 12.5 = 0x4029000000000000
				0x01, // ok
				0x03, // malformed 3
			},
			encode: func() []byte { return wire.AppendHeartbeat(nil, heartbeat) },
			decode: func(b []byte) (any, error) { var h report.Heartbeat; err := wire.DecodeHeartbeat(b, &h); return h, err },
			value:  normHeartbeat(*heartbeat),
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			assert.Equal(t, tt.want, tt.encode(), "encoder vs hand-encoded")
			assert.Equal(t, tt.want, docExample(t, tt.marker), "doc example vs hand-encoded")
			assert.Contains(t, docText(t), fmt.Sprintf("is these %d bytes", len(tt.want)))
			got, err := tt.decode(tt.want)
			require.NoError(t, err)
			assert.Equal(t, tt.value, got)
		})
	}
}

func docText(t *testing.T) string {
	t.Helper()
	src, err := os.ReadFile("doc.go")
	require.NoError(t, err)
	return strings.Join(strings.Fields(strings.ReplaceAll(string(src), "//", "")), " ")
}
