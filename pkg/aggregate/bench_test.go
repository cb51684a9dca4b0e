package aggregate_test

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/aggregate"
	"sluice/pkg/bus"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/metric"
	"sluice/pkg/report"
	"sluice/pkg/tracker"
	"sluice/pkg/wire"
)

// BenchmarkIngestThroughBroker publishes samples of 1,000 nodes running 50
// jobs through a real embedded NATS server into a running aggregator and
// waits until every one has been applied. samples/s is the figure quoted in
// the README.
func BenchmarkIngestThroughBroker(b *testing.B) {
	srv := natstest.Start(b)
	svc, err := aggregate.New(aggregate.Options{
		NATSURL: srv.URL(), StorePath: filepath.Join(b.TempDir(), "bench.db"), Listen: "127.0.0.1:0",
		Tracker: tracker.Options{Window: time.Minute, Live: 10 * time.Second}, TickEvery: time.Second,
	})
	require.NoError(b, err)
	stop, err := svc.Start()
	require.NoError(b, err)
	defer stop()

	const nodes, jobs = 1000, 50
	subj, _ := bus.NewSubjects("", "")
	msgs := make([][]byte, nodes)
	subjects := make([]string, nodes)
	for n := range nodes {
		subjects[n] = subj.Sample(fmt.Sprintf("bw%04d", n))
	}
	nc := natstest.Connect(b, srv.URL())
	t0 := time.Now()
	b.ReportAllocs()
	b.ResetTimer()
	start := time.Now()
	sent := 0
	for i := 0; sent < b.N; i++ {
		for n := 0; n < nodes && sent < b.N; n++ {
			s := report.Sample{
				Node: fmt.Sprintf("bw%04d", n), Seq: uint64(i + 1),
				Start: t0.Add(time.Duration(i) * 5 * time.Second), End: t0.Add(time.Duration(i+1) * 5 * time.Second),
				Jobs: []string{fmt.Sprint(81000 + n%jobs)},
			}
			s.Values[metric.Creates] = uint64(100 + n)
			s.Values[metric.WriteBytes] = uint64(1<<20 + i)
			msgs[n] = wire.AppendSample(msgs[n][:0], &s)
			if err := nc.Publish(subjects[n], msgs[n]); err != nil {
				b.Fatal(err)
			}
			sent++
		}
	}
	require.NoError(b, nc.Flush())
	for svc.Snapshot().Ingest.Accepted["sample"] < uint64(b.N) {
		if svc.Snapshot().Ingest.SlowConsumerDropped > 0 {
			b.Fatalf("aggregator fell behind and dropped samples")
		}
		time.Sleep(time.Millisecond)
	}
	b.ReportMetric(float64(b.N)/time.Since(start).Seconds(), "samples/s")
}

// BenchmarkImport posts a 1,000,000-row window-value file to a running
// aggregator and reports rows per second, from the first byte sent to the
// answer (parse, sketches, recompute and the store write).
func BenchmarkImport(b *testing.B) {
	var body bytes.Buffer
	body.WriteString("day,metric,rate,count\n")
	r := rand.New(rand.NewPCG(1, 2))
	day := time.Now().UTC()
	const rows = 1_000_000
	for i := range rows {
		fmt.Fprintf(&body, "%s,%s,%.6g,1\n", day.AddDate(0, 0, -(i%30)).Format(time.DateOnly), metric.ID(i%int(metric.Count)), math.Exp(4+2*r.NormFloat64()))
	}
	srv := natstest.Start(b)
	svc, err := aggregate.New(aggregate.Options{
		NATSURL: srv.URL(), StorePath: filepath.Join(b.TempDir(), "a.db"), Listen: "127.0.0.1:0",
		TickEvery: time.Hour, FlushEvery: time.Hour, RecomputeEvery: time.Hour,
	})
	require.NoError(b, err)
	stop, err := svc.Start()
	require.NoError(b, err)
	defer stop()
	url := "http://" + svc.HTTPAddr() + "/api/v1/baseline/import"
	b.ResetTimer()
	for b.Loop() {
		resp, err := http.Post(url, "text/csv", bytes.NewReader(body.Bytes()))
		require.NoError(b, err)
		_, _ = io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		require.Equal(b, http.StatusOK, resp.StatusCode)
	}
	b.ReportMetric(float64(rows*b.N)/b.Elapsed().Seconds(), "rows/s")
}
