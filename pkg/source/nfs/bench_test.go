package nfs_test

import (
	"bytes"
	"context"
	"io"
	"os"
	"testing"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/nfs"
)

// bench2Mounts is the fixture the benchmarks read: an NFSv3 and an NFSv4.2
// mount (22 and 69 per-op lines) after three other mounts, about 5 KiB.
const bench2Mounts = "remount_1_before"

// BenchmarkParse2Mounts parses the file from memory and builds both Raw
// maps, without the Source's buffer reuse.
func BenchmarkParse2Mounts(b *testing.B) {
	data := fixture.Read(b, "nfs", bench2Mounts, "mountstats")
	r := bytes.NewReader(data)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		r.Reset(data)
		st, err := nfs.Parse(r)
		if err != nil || len(st.Mounts) != 2 {
			b.Fatal(err, len(st.Mounts))
		}
		for i := range st.Mounts {
			_ = st.Mounts[i].Raw()
		}
	}
}

// BenchmarkSourceRead2Mounts is one agent interval: pread the file on the
// kept descriptor, parse into reused buffers, dedupe, build two readings.
func BenchmarkSourceRead2Mounts(b *testing.B) {
	data := fixture.Read(b, "nfs", bench2Mounts, "mountstats")
	src, _ := newSource(b, data, &clock{t: t0})
	ctx := context.Background()
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		rs, err := src.Read(ctx)
		if err != nil || len(rs) != 2 {
			b.Fatal(err, len(rs))
		}
	}
}

// BenchmarkPreadBare2Mounts only preads the same file from offset 0 on an
// open descriptor into a buffer, the way the Source does: the floor the
// Source's cost compares with.
func BenchmarkPreadBare2Mounts(b *testing.B) {
	data := fixture.Read(b, "nfs", bench2Mounts, "mountstats")
	_, path := procRoot(b, data)
	f, err := os.Open(path)
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	buf := make([]byte, 32<<10)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		n, err := f.ReadAt(buf, 0)
		if err != io.EOF || n != len(data) {
			b.Fatal(err, n)
		}
	}
}
