package windowcsv_test

import (
	"bytes"
	"io"
	"math/rand/v2"
	"testing"
	"time"

	"sluice/pkg/metric"
	"sluice/pkg/windowcsv"
)

// benchFile returns a 100,000-row export as Writer writes it: rows sorted
// by day (100 days), random metrics, log-normal full-precision rates (the
// bin values of a sketch are not round numbers) and small counts.
func benchFile(b *testing.B) []byte {
	b.Helper()
	rng := rand.New(rand.NewPCG(3, 5))
	var buf bytes.Buffer
	w := windowcsv.NewWriter(&buf)
	d := time.Date(2024, 1, 1, 0, 0, 0, 0, time.UTC)
	for i := range benchRows {
		if i > 0 && i%1000 == 0 {
			d = d.AddDate(0, 0, 1)
		}
		err := w.Write(windowcsv.Row{
			Day:    d,
			Metric: metric.ID(rng.IntN(int(metric.Count))),
			Rate:   rng.ExpFloat64() * 1e6,
			Count:  1 + rng.Uint64N(50),
		})
		if err != nil {
			b.Fatal(err)
		}
	}
	if err := w.Flush(); err != nil {
		b.Fatal(err)
	}
	return buf.Bytes()
}

const benchRows = 100_000

// BenchmarkRead reads a 100,000-row file from memory with one reused
// Reader; one op is the whole file. rows/s is per benchmark goroutine, so
// run it with -cpu 1 for the per-core figure.
func BenchmarkRead(b *testing.B) {
	data := benchFile(b)
	src := bytes.NewReader(data)
	rd := windowcsv.NewReader(src)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		src.Reset(data)
		rd.Reset(src)
		n := 0
		for {
			_, err := rd.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			n++
		}
		if n != benchRows {
			b.Fatal("rows:", n)
		}
	}
	b.ReportMetric(float64(b.N)*benchRows/b.Elapsed().Seconds(), "rows/s")
	b.ReportMetric(b.Elapsed().Seconds()*1e9/(float64(b.N)*benchRows), "ns/row")
}

// BenchmarkReadEach is BenchmarkRead through Each with a new Reader per
// file, as the import command reads.
func BenchmarkReadEach(b *testing.B) {
	data := benchFile(b)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		st, err := windowcsv.Read(b.Context(), bytes.NewReader(data), func(windowcsv.Row) error { return nil })
		if err != nil || st.Rows != benchRows {
			b.Fatal(err, st.Rows)
		}
	}
	b.ReportMetric(float64(b.N)*benchRows/b.Elapsed().Seconds(), "rows/s")
}

// BenchmarkWrite writes 100,000 rows to io.Discard.
func BenchmarkWrite(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 5))
	rows := make([]windowcsv.Row, benchRows)
	d := time.Date(2024, 1, 1, 0, 0, 0, 0, time.UTC)
	for i := range rows {
		rows[i] = windowcsv.Row{Day: d.AddDate(0, 0, i/1000), Metric: metric.ID(rng.IntN(int(metric.Count))), Rate: rng.ExpFloat64() * 1e6, Count: 1 + rng.Uint64N(50)}
	}
	b.ReportAllocs()
	for b.Loop() {
		w := windowcsv.NewWriter(io.Discard)
		for _, r := range rows {
			if err := w.Write(r); err != nil {
				b.Fatal(err)
			}
		}
		if err := w.Flush(); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N)*benchRows/b.Elapsed().Seconds(), "rows/s")
}
