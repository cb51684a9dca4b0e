package export_test

import (
	"bytes"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	"github.com/prometheus/common/expfmt"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/export"
	"sluice/pkg/level"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

var update = flag.Bool("update", false, "rewrite the golden files")

var t0 = time.Date(2026, 3, 2, 14, 5, 0, 0, time.UTC)

// fixed is a snapshot of a small scenario: a flagged metadata storm, a
// healthy streaming job and an idle one.
func fixed() export.Snapshot {
	storm := model.Summary{JobMeta: model.JobMeta{ID: "81234", User: "dorvane", Name: "quill-index", Start: t0.Add(-10 * time.Minute)}, State: "running", NodesSeen: 64}
	storm.Live[metric.Creates] = 2500
	storm.Live[metric.StatOps] = 15000
	storm.LiveLevels[metric.Creates] = level.Critical
	storm.LiveLevels[metric.StatOps] = level.Critical
	storm.ActiveFlags = []model.Flag{{ID: "81234/critical:creates/1", Job: "81234", Reason: "critical:creates", Metric: metric.Creates, Level: level.Critical, Value: 2500, Cut: 1000, Since: t0}}
	stream := model.Summary{JobMeta: model.JobMeta{ID: "81230", User: "ambrel", Name: "tidepool-assim"}, State: "running", NodesSeen: 4}
	stream.Live[metric.WriteBytes] = 1.5e9
	stream.LiveLevels[metric.WriteBytes] = level.Elevated
	idle := model.Summary{JobMeta: model.JobMeta{ID: "81231", User: "keswin"}, State: "running", NodesSeen: 2}
	in := export.NewIngest()
	in.Accepted["sample"] = 1200
	in.Accepted["job_event"] = 12
	in.Rejected["sample/duplicate"] = 3
	in.Rejected["sample/truncated"] = 1
	in.Duplicates = 3
	agents := []model.Agent{
		{Node: "bw001", Version: "dev", LastSeen: t0, Interval: 5 * time.Second, CPUSeconds: 12.5, CPUShare: 0.0008, RSSBytes: 14 << 20,
			Sources: []model.AgentSource{{Name: "lustre", Instances: 2, MicrosPerRead: 21.5, OK: true}}},
		{Node: "bw002", Version: "dev", LastSeen: t0.Add(-time.Second), Interval: 5 * time.Second, CPUSeconds: 30, CPUShare: 0.003, RSSBytes: 15 << 20, Queued: 4, Dropped: 2,
			Sources: []model.AgentSource{{Name: "lustre", Instances: 1, MicrosPerRead: 19, OK: false, Malformed: 3}}},
	}
	return export.Snapshot{
		Ingest: in, Jobs: []model.Summary{idle, stream, storm}, Cuts: level.DefaultCuts(),
		Watermark: t0, Now: t0.Add(2 * time.Second), Nodes: 70, MaxJobSeries: 10, Agents: agents,
	}
}

func TestGoldenExposition(t *testing.T) {
	c := export.NewCollector(fixed)
	reg := prometheus.NewPedanticRegistry()
	require.NoError(t, reg.Register(c))
	fams, err := reg.Gather()
	require.NoError(t, err)
	var buf bytes.Buffer
	for _, f := range fams {
		_, err := expfmt.MetricFamilyToText(&buf, f)
		require.NoError(t, err)
	}
	golden := filepath.Join("..", "..", "testdata", "export", "fixed.golden")
	if *update {
		require.NoError(t, os.WriteFile(golden, buf.Bytes(), 0o644))
	}
	want, err := os.ReadFile(golden)
	require.NoError(t, err)
	require.NoError(t, testutil.CollectAndCompare(c, bytes.NewReader(want)), "regenerate with: go test ./pkg/export -run TestGoldenExposition -update")
}

func TestMetricNamesFollowConventions(t *testing.T) {
	// testutil.CollectAndLint applies the Prometheus naming rules
	// (client_golang's promlint: units, _total on counters, snake case).
	problems, err := testutil.CollectAndLint(export.NewCollector(fixed))
	require.NoError(t, err)
	assert.Empty(t, problems)
}

func TestPerJobSeriesOnlyForNotableJobsAndCapped(t *testing.T) {
	s := fixed()
	count := func(s export.Snapshot) (jobs map[string]bool, capped float64) {
		reg := prometheus.NewRegistry()
		reg.MustRegister(export.NewCollector(func() export.Snapshot { return s }))
		fams, err := reg.Gather()
		require.NoError(t, err)
		jobs = map[string]bool{}
		for _, f := range fams {
			for _, m := range f.GetMetric() {
				for _, l := range m.GetLabel() {
					if l.GetName() == "job" {
						jobs[l.GetValue()] = true
					}
				}
				if f.GetName() == "sluice_job_series_capped" {
					capped = m.GetGauge().GetValue()
				}
			}
		}
		return jobs, capped
	}
	jobs, capped := count(s)
	assert.Equal(t, map[string]bool{"81234": true, "81230": true}, jobs, "the idle job gets no series")
	assert.Zero(t, capped)

	s.MaxJobSeries = 1
	jobs, capped = count(s)
	assert.Equal(t, map[string]bool{"81234": true}, jobs, "the flagged job goes first")
	assert.Equal(t, 1.0, capped)

	// Many notable jobs: the series count stays within the cap.
	s = fixed()
	s.MaxJobSeries = 100
	for i := range 5000 {
		j := model.Summary{JobMeta: model.JobMeta{ID: fmt.Sprint(90000 + i)}, State: "running"}
		j.LiveLevels[metric.Opens] = level.Elevated
		s.Jobs = append(s.Jobs, j)
	}
	jobs, capped = count(s)
	assert.Len(t, jobs, 100)
	assert.Equal(t, float64(5002-100), capped)
}
