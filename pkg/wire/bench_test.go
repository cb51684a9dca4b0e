package wire_test

import (
	"testing"

	"sluice/pkg/report"
	"sluice/pkg/wire"
)

// The benchmarks decode into one reused value, as an ingest loop does.

func BenchmarkAppendSample(b *testing.B) {
	s := typicalSample()
	buf := wire.AppendSample(nil, s)
	b.SetBytes(int64(len(buf)))
	b.ReportAllocs()
	for b.Loop() {
		buf = wire.AppendSample(buf[:0], s)
	}
}

func BenchmarkDecodeSample(b *testing.B) {
	msg := wire.AppendSample(nil, typicalSample())
	var s report.Sample
	b.SetBytes(int64(len(msg)))
	b.ReportAllocs()
	for b.Loop() {
		if err := wire.DecodeSample(msg, &s); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDecoderDecodeSample is BenchmarkDecodeSample with interning, for
// an aggregator that sees the same node and job again.
func BenchmarkDecoderDecodeSample(b *testing.B) {
	msg := wire.AppendSample(nil, typicalSample())
	var d wire.Decoder
	var s report.Sample
	b.SetBytes(int64(len(msg)))
	b.ReportAllocs()
	for b.Loop() {
		if err := d.DecodeSample(msg, &s); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecodeSamplePerJob(b *testing.B) {
	msg := wire.AppendSample(nil, sharedSample())
	var s report.Sample
	b.SetBytes(int64(len(msg)))
	b.ReportAllocs()
	for b.Loop() {
		if err := wire.DecodeSample(msg, &s); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecodeJobEvent(b *testing.B) {
	msg := wire.AppendJobEvent(nil, typicalJobEvent())
	var e report.JobEvent
	b.SetBytes(int64(len(msg)))
	b.ReportAllocs()
	for b.Loop() {
		if err := wire.DecodeJobEvent(msg, &e); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecodeHeartbeat(b *testing.B) {
	msg := wire.AppendHeartbeat(nil, typicalHeartbeat())
	var h report.Heartbeat
	b.SetBytes(int64(len(msg)))
	b.ReportAllocs()
	for b.Loop() {
		if err := wire.DecodeHeartbeat(msg, &h); err != nil {
			b.Fatal(err)
		}
	}
}
