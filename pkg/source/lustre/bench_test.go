package lustre_test

import (
	"bytes"
	"context"
	"testing"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/lustre"
)

// BenchmarkParse30 parses the 34-counter Lustre 2.16 fixture from memory
// and builds the Raw map, the per-mount work of one agent interval.
func BenchmarkParse30(b *testing.B) {
	data := fixture.Read(b, "lustre", "v2_16_header", "stats")
	r := bytes.NewReader(data)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		r.Reset(data)
		st, err := lustre.Parse(r)
		if err != nil {
			b.Fatal(err)
		}
		if len(st.Raw()) != 36 {
			b.Fatal("wrong counter count")
		}
	}
}

// BenchmarkSourceRead reads one mount from disk through the full Read path:
// list, open, parse, Raw, Reading.
func BenchmarkSourceRead(b *testing.B) {
	root := b.TempDir()
	writeMount(b, root, "scratch-ffff9a0c12345000", "v2_16_header")
	src := lustre.NewSource(root, nowFunc)
	ctx := context.Background()
	b.ReportAllocs()
	for b.Loop() {
		rs, err := src.Read(ctx)
		if err != nil || len(rs) != 1 {
			b.Fatal(err, len(rs))
		}
	}
}
