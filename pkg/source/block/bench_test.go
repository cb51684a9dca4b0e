package block_test

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"testing"

	"sluice/pkg/source/block"
)

// BenchmarkParse8Devices parses an eight-disk 5.5+ file from memory.
func BenchmarkParse8Devices(b *testing.B) {
	data := []byte(bench8())
	r := bytes.NewReader(data)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		r.Reset(data)
		st, err := block.Parse(r)
		if err != nil || len(st.Devices) != 8 {
			b.Fatal(err, len(st.Devices))
		}
	}
}

// BenchmarkSourceRead8Devices reads the same file from disk through the
// full Read path: stat, pread, parse, match, unwrap, one counter map per
// device.
func BenchmarkSourceRead8Devices(b *testing.B) {
	root := procRoot(b, bench8())
	src := newSource(b, root, block.Options{})
	ctx := context.Background()
	b.ReportAllocs()
	for b.Loop() {
		rs, err := src.Read(ctx)
		if err != nil || len(rs) != 8 {
			b.Fatal(err, len(rs))
		}
	}
}

// BenchmarkPreadBare8Devices only re-reads the same file on an open
// descriptor with ReadAt: the floor the Source's cost compares with.
func BenchmarkPreadBare8Devices(b *testing.B) {
	data := bench8()
	f, err := os.Open(filepath.Join(procRoot(b, data), "diskstats"))
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	buf := make([]byte, 16<<10)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		n, _ := f.ReadAt(buf, 0)
		if n != len(data) {
			b.Fatal(n)
		}
	}
}
