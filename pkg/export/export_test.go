package export_test

import (
	"bytes"
	"cmp"
	"flag"
	"fmt"
	"math/rand/v2"
	"net/http/httptest"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"github.com/prometheus/client_golang/prometheus/testutil"
	"github.com/prometheus/common/expfmt"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/export"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

var update = flag.Bool("update", false, "rewrite the golden files")

var t0 = time.Date(2026, 3, 2, 14, 5, 0, 0, time.UTC)

// fixed is a snapshot of a small scenario: a metadata storm with a
// high-rate flag and a critical pattern flag, a healthy streaming job
// whose pattern flag is silenced, a normal job whose only flag is silenced
// (no per-job series at all) and an idle one.
func fixed() export.Snapshot {
	storm := model.Summary{JobMeta: model.JobMeta{ID: "81234", User: "dorvane", Name: "quill-index", Start: t0.Add(-10 * time.Minute)}, State: model.JobRunning, NodesSeen: 64}
	storm.Live[metric.Creates] = 2500
	storm.Live[metric.StatOps] = 15000
	storm.LiveLevels[metric.Creates] = coding.Critical
	storm.LiveLevels[metric.StatOps] = coding.Critical
	storm.ActiveFlags = []model.Flag{
		{ID: "81234-1", Job: "81234", Reason: model.HighRateOf(metric.Creates), Metric: metric.Creates, Level: coding.Critical,
			Score: 1, Severity: model.SeverityWarning, Summary: "creates above the critical cut on 64 nodes", Value: 2500, Cut: 1000, Since: t0},
		{ID: "81234-2", Job: "81234", Reason: model.PatternOf("metadata_storm"), Metric: metric.Creates, Level: coding.Critical,
			Pattern: "metadata_storm", Title: "Metadata storm", Score: 0.91, Severity: model.SeverityCritical,
			Summary: "Metadata storm on 64 nodes", Since: t0.Add(-3 * time.Minute)},
	}
	storm.PatternScores = map[string]float64{"metadata_storm": 0.91, "stat_polling": 0.5, "small_write_flood": 0.12}
	stream := model.Summary{JobMeta: model.JobMeta{ID: "81230", User: "ambrel", Name: "tidepool-assim"}, State: model.JobRunning, NodesSeen: 4}
	stream.Live[metric.WriteBytes] = 1.5e9
	stream.LiveLevels[metric.WriteBytes] = coding.Elevated
	stream.ActiveFlags = []model.Flag{{ID: "81230-1", Job: "81230", Reason: model.PatternOf("heavy_streaming"), Metric: metric.WriteBytes,
		Pattern: "heavy_streaming", Title: "Heavy streaming", Score: 0.77, Severity: model.SeverityInfo, Summary: "Heavy streaming on 4 nodes",
		Since: t0.Add(-5 * time.Minute), State: model.FlagSilenced}}
	stream.PatternScores = map[string]float64{"heavy_streaming": 0.77}
	hushed := model.Summary{JobMeta: model.JobMeta{ID: "81235", User: "lyset", Name: "fernwave-post"}, State: model.JobRunning, NodesSeen: 2}
	hushed.ActiveFlags = []model.Flag{{ID: "81235-1", Job: "81235", Reason: model.PatternOf("small_write_flood"),
		Pattern: "small_write_flood", Score: 0.64, Severity: model.SeverityWarning, Summary: "Small-write flood on 2 nodes", Since: t0, State: model.FlagSilenced}}
	idle := model.Summary{JobMeta: model.JobMeta{ID: "81231", User: "keswin"}, State: model.JobRunning, NodesSeen: 2}
	in := export.NewIngest()
	in.Accepted["sample"] = 1200
	in.Accepted["job_event"] = 12
	in.Rejected["sample/duplicate"] = 3
	in.Rejected["sample/truncated"] = 1
	in.Duplicates = 3
	in.StreamPending, in.StreamExpired, in.CommitAge = 12, 0, 400*time.Millisecond
	agents := []model.AgentStatus{
		{Node: "bw001", Version: "dev", LastSeen: t0, Interval: 5 * time.Second, CPUSeconds: 12.5, CPUShare: 0.0008, RSSBytes: 14 << 20,
			Sources: []model.AgentSource{{Name: "lustre", Instances: 2, MicrosPerRead: 21.5, OK: true}}},
		{Node: "bw002", Version: "dev", LastSeen: t0.Add(-time.Second), Interval: 5 * time.Second, CPUSeconds: 30, CPUShare: 0.003, RSSBytes: 15 << 20, Queued: 4, Dropped: 2,
			Sources: []model.AgentSource{{Name: "lustre", Instances: 1, MicrosPerRead: 19, OK: false, Malformed: 3}}},
	}
	var shares export.ShareHistogram
	for _, share := range []float64{0.0007, 0.0008, 0.0031, 0.003, 0.06} {
		shares.Observe(share)
	}
	return export.Snapshot{
		AgentShares: shares,
		Ingest:      in, Jobs: []model.Summary{idle, stream, hushed, storm}, Cuts: coding.DefaultCuts(),
		Watermark: t0, Now: t0.Add(2 * time.Second), Nodes: 70, MaxJobSeries: 100, Agents: agents,
		Patterns: []export.PatternInfo{{Name: "metadata_storm", Title: "Metadata storm", Severity: "critical",
			Advice: "Consider contacting the user about one file per task.\n  Follow your site's policy before acting on a job."}},
		BrokerConnected: true,
	}
}

// series is one scraped series: its family name, labels and value.
type series struct {
	name   string
	labels map[string]string
	value  float64
}

// gather scrapes a collector over s once, through a pedantic registry.
func gather(t testing.TB, s export.Snapshot) []series {
	t.Helper()
	reg := prometheus.NewPedanticRegistry()
	require.NoError(t, reg.Register(export.NewCollector(func() export.Snapshot { return s })))
	fams, err := reg.Gather()
	require.NoError(t, err)
	var out []series
	for _, f := range fams {
		for _, m := range f.GetMetric() {
			l := map[string]string{}
			for _, p := range m.GetLabel() {
				l[p.GetName()] = p.GetValue()
			}
			out = append(out, series{f.GetName(), l, m.GetGauge().GetValue() + m.GetCounter().GetValue()})
		}
	}
	return out
}

// jobIDs returns the distinct job_id values over all series.
func jobIDs(all []series) map[string]bool {
	ids := map[string]bool{}
	for _, s := range all {
		if id, ok := s.labels["job_id"]; ok {
			ids[id] = true
		}
	}
	return ids
}

// value returns the value of the one series named name, failing if there
// is not exactly one.
func value(t testing.TB, all []series, name string) float64 {
	t.Helper()
	var got []float64
	for _, s := range all {
		if s.name == name {
			got = append(got, s.value)
		}
	}
	require.Len(t, got, 1, name)
	return got[0]
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

func TestNoJobLabel(t *testing.T) {
	// Prometheus's target label is job; a per-job label of that name would
	// be ingested as exported_job, and the alert rules match job_id.
	for _, s := range gather(t, fixed()) {
		assert.NotContains(t, s.labels, "job", s.name)
	}
}

func TestFlagSeries(t *testing.T) {
	all := (gather(t, fixed()))
	var active, scores []series
	for _, s := range all {
		switch s.name {
		case "sluice_job_flag_active":
			active = append(active, s)
		case "sluice_job_flag_score":
			scores = append(scores, s)
		}
	}
	assert.ElementsMatch(t, []series{
		{"sluice_job_flag_active", map[string]string{"job_id": "81234", "reason": "high_rate:creates", "pattern": "", "severity": "warning",
			"user": "dorvane", "name": "quill-index"}, 1},
		{"sluice_job_flag_active", map[string]string{"job_id": "81234", "reason": "pattern:metadata_storm", "pattern": "metadata_storm", "severity": "critical",
			"user": "dorvane", "name": "quill-index"}, 1},
	}, active, "severity comes from the flag, not its level; silenced flags are left out; no free text in the labels")
	assert.ElementsMatch(t, []series{
		{"sluice_job_flag_score", map[string]string{"job_id": "81234", "reason": "high_rate:creates"}, 1},
		{"sluice_job_flag_score", map[string]string{"job_id": "81234", "reason": "pattern:metadata_storm"}, 0.91},
	}, scores)
	assert.NotContains(t, jobIDs(all), "81235", "a normal job whose only flag is silenced gets no series")
}

func TestBadBytesInLabelsDoNotPanic(t *testing.T) {
	s := fixed()
	s.Jobs[3].Name = "quill-\xffindex" // storm
	s.Agents[0].Node = "bw\xff01"
	reg := prometheus.NewPedanticRegistry()
	require.NoError(t, reg.Register(export.NewCollector(func() export.Snapshot { return s })))
	fams, err := reg.Gather()
	require.Error(t, err, "the bad node name is reported")
	var flags []string
	for _, f := range fams {
		if f.GetName() == "sluice_job_flag_active" {
			for _, m := range f.GetMetric() {
				for _, l := range m.GetLabel() {
					if l.GetName() == "name" || l.GetName() == "user" {
						flags = append(flags, l.GetValue())
					}
				}
			}
		}
		if f.GetName() == "sluice_nodes_known" {
			assert.Len(t, f.GetMetric(), 1, "the rest of the scrape goes on")
		}
	}
	assert.ElementsMatch(t, []string{"quill-\uFFFDindex", "dorvane", "quill-\uFFFDindex", "dorvane"}, flags)
}

func TestPatternScoresFromHalfUp(t *testing.T) {
	got := map[string]float64{}
	for _, s := range gather(t, fixed()) {
		if s.name == "sluice_job_pattern_score" {
			got[s.labels["job_id"]+"/"+s.labels["pattern"]] = s.value
		}
	}
	assert.Equal(t, map[string]float64{
		"81234/metadata_storm": 0.91, "81234/stat_polling": 0.5, // 0.12 for small_write_flood is left out
		"81230/heavy_streaming": 0.77, // a silence covers the flag, not the score
	}, got)
}

func TestBrokerConnected(t *testing.T) {
	s := fixed()
	assert.Equal(t, 1.0, value(t, (gather(t, s)), "sluice_broker_connected"))
	s.BrokerConnected = false
	assert.Equal(t, 0.0, value(t, (gather(t, s)), "sluice_broker_connected"))
}

func TestPerJobSeriesOnlyForNotableJobsAndCapped(t *testing.T) {
	s := fixed()
	count := func(s export.Snapshot) (jobs map[string]bool, dropped float64) {
		all := (gather(t, s))
		return jobIDs(all), value(t, all, "sluice_job_series_dropped")
	}
	jobs, dropped := count(s)
	assert.Equal(t, map[string]bool{"81234": true, "81230": true}, jobs, "the idle job and the silenced normal one get no series")
	assert.Zero(t, dropped)

	big := s
	big.MaxJobSeries = 1 << 30
	s.MaxJobSeries = seriesByJob(gather(t, big))["81234"]
	jobs, dropped = count(s)
	assert.Equal(t, map[string]bool{"81234": true}, jobs, "the flagged job goes first")
	assert.Equal(t, 1.0, dropped)
	s.MaxJobSeries--
	jobs, dropped = count(s)
	assert.Empty(t, jobs, "one series short: the flagged job does not fit, and nothing after it is taken")
	assert.Equal(t, 2.0, dropped)

	s.MaxJobSeries = 0
	jobs, dropped = count(s)
	assert.Empty(t, jobs, "a zero cap gives no per-job series")
	assert.Equal(t, 2.0, dropped)
}

func TestJobsLeaveWhenNormalOrEnded(t *testing.T) {
	s := fixed()
	s.Jobs = s.Jobs[:2] // idle 81231 and elevated 81230 (its flag silenced)
	present := func() bool { return jobIDs((gather(t, s)))["81230"] }
	require.True(t, present())

	s.Jobs[1].LiveLevels = coding.Levels{}
	assert.False(t, present(), "back to normal: gone at the next scrape")

	s.Jobs[1].LiveLevels[metric.WriteBytes] = coding.Critical
	require.True(t, present())
	s.Jobs[1].State = model.JobEnded
	assert.False(t, present(), "an ended entry is skipped")
	s.Jobs = s.Jobs[:1]
	assert.False(t, present(), "a job that left the snapshot is gone")
}

func TestCapOrder(t *testing.T) {
	// Most severe first: flag severity critical > warning > info > highest
	// level critical > elevated; equal ranks by job id. The snapshot lists
	// them scrambled; a flag's own level and a silenced flag do not count.
	job := func(id string, l coding.Level, severities ...string) model.Summary {
		j := model.Summary{JobMeta: model.JobMeta{ID: id}, State: model.JobRunning}
		j.LiveLevels[metric.Opens] = l
		for _, sev := range severities {
			sv, err := model.ParseSeverity(sev)
			if err != nil {
				sv = model.Severity(99) // unknown: ranked as info
			}
			j.ActiveFlags = append(j.ActiveFlags, model.Flag{Reason: model.PatternOf(sev), Pattern: sev, Severity: sv, Level: coding.Critical})
		}
		return j
	}
	silenced := job("a-silenced", coding.Elevated, "critical")
	silenced.ActiveFlags[0].State = model.FlagSilenced
	cleared := job("a-cleared", coding.Elevated, "critical")
	cleared.ActiveFlags[0].Cleared = t0
	want := []string{"j-crit-flag", "k-crit-flag", "h-warn-flag", "b-info-flag", "z-unknown-flag", "a-crit-level", "a-cleared", "a-elevated", "a-silenced", "c-elevated"}
	jobs := []model.Summary{
		job("c-elevated", coding.Elevated), job("b-info-flag", coding.Normal, "info"), job("a-crit-level", coding.Critical),
		job("k-crit-flag", coding.Normal, "info", "critical"), silenced, job("h-warn-flag", coding.Critical, "warning"),
		job("a-elevated", coding.Elevated), job("z-unknown-flag", coding.Normal, "bogus"), cleared, job("j-crit-flag", coding.Elevated, "critical"),
		job("a-normal", coding.Normal),
	}
	per := seriesByJob(gather(t, export.Snapshot{Jobs: jobs, MaxJobSeries: 1 << 30}))
	for n := 0; n <= len(want); n++ {
		budget := 0
		for _, id := range want[:n] {
			budget += per[id]
		}
		s := export.Snapshot{Jobs: jobs, MaxJobSeries: budget}
		all := (gather(t, s))
		wantIDs := map[string]bool{}
		for _, id := range want[:n] {
			wantIDs[id] = true
		}
		assert.Equal(t, wantIDs, jobIDs(all), "cap %d", n)
		assert.Equal(t, float64(len(want)-n), value(t, all, "sluice_job_series_dropped"), "cap %d", n)
	}
}

// manyJobs returns n running jobs in scrambled order: per 100, 60 normal
// (every tenth with a silenced flag), 37 elevated, 1 critical in level and
// 2 flagged (a pattern flag of severity critical, warning and info in
// turn, beside a high-rate flag). Each notable job has all
// twelve rates and two pattern scores, one of them under the floor.
func manyJobs(n int) []model.Summary {
	jobs := make([]model.Summary, n)
	severities := []model.Severity{model.SeverityCritical, model.SeverityWarning, model.SeverityInfo}
	for i := range jobs {
		j := &jobs[i]
		j.JobMeta = model.JobMeta{ID: fmt.Sprintf("%06d", 100000+i), User: fmt.Sprintf("user%03d", i%500), Name: fmt.Sprintf("app-%d", i%97)}
		j.State, j.NodesSeen = model.JobRunning, 1+i%64
		for _, id := range metric.All() {
			j.Live[id] = float64(i%1000) * float64(id+1)
		}
		switch k := i % 100; {
		case k < 60:
			if k%10 == 0 {
				j.ActiveFlags = []model.Flag{{Reason: model.PatternOf("stat_polling"), Pattern: "stat_polling", Severity: model.SeverityWarning, Score: 0.8, State: model.FlagSilenced}}
			}
			continue
		case k < 97:
			j.LiveLevels[metric.Opens] = coding.Elevated
		case k == 97:
			j.LiveLevels[metric.Creates] = coding.Critical
		default:
			sev := severities[(2*(i/100)+k-98)%3]
			j.LiveLevels[metric.Creates] = coding.Critical
			j.ActiveFlags = []model.Flag{
				{Reason: model.HighRateOf(metric.Creates), Severity: model.SeverityWarning, Score: 1, Summary: "creates above the critical cut on 64 nodes", Since: t0},
				{Reason: model.PatternOf("metadata_storm"), Pattern: "metadata_storm", Severity: sev, Score: 0.91, Summary: "Metadata storm on 64 nodes", Since: t0},
			}
		}
		j.PatternScores = map[string]float64{"metadata_storm": 0.5 + float64(i%50)/100, "open_close_churn": 0.2}
	}
	rand.New(rand.NewPCG(1, 2)).Shuffle(len(jobs), func(a, b int) { jobs[a], jobs[b] = jobs[b], jobs[a] })
	return jobs
}

// seriesByJob counts the per-job series of each job_id.
func seriesByJob(all []series) map[string]int {
	out := map[string]int{}
	for _, m := range all {
		if id := m.labels["job_id"]; id != "" {
			out[id]++
		}
	}
	return out
}

// TestCardinalityBoundedAt5000Of20000Jobs drives 20,000 running jobs
// through the collector with the cap at 5,000 per-job series.
func TestCardinalityBoundedAt5000Of20000Jobs(t *testing.T) {
	const maxSeries = 5000
	s := fixed()
	s.Jobs = manyJobs(20000)
	for i := range s.Jobs {
		s.Jobs[i].JobMeta.ID = "m" + s.Jobs[i].ID // apart from the fixed scenario's ids
	}
	s.Jobs = append(s.Jobs, fixed().Jobs...)
	uncapped := gather(t, export.Snapshot{Jobs: s.Jobs, MaxJobSeries: 1 << 30})
	per := seriesByJob(uncapped)
	s.MaxJobSeries = maxSeries

	all := gather(t, s)
	got := seriesByJob(all)
	total := 0
	for _, n := range got {
		total += n
	}
	assert.LessOrEqual(t, total, maxSeries, "per-job series within the cap")
	assert.Greater(t, total, maxSeries-40, "the cap is used: the next job would not fit")

	// Rank by hand: exported flag severity, then highest level, then id;
	// every job outranking a kept one is kept too.
	rank := func(j model.Summary) int {
		r := 0
		for _, f := range j.ActiveFlags {
			if f.State == model.FlagActive {
				r = max(r, map[model.Severity]int{model.SeverityCritical: 6, model.SeverityWarning: 5}[f.Severity], 4)
			}
		}
		return max(r, int(j.LiveLevels.Max())+1)
	}
	var order []model.Summary
	for _, j := range s.Jobs {
		if rank(j) > 1 {
			order = append(order, j)
		}
	}
	slices.SortFunc(order, func(a, b model.Summary) int { return cmp.Or(rank(b)-rank(a), strings.Compare(a.ID, b.ID)) })
	kept := 0
	for kept < len(order) && got[order[kept].ID] > 0 {
		assert.Equal(t, per[order[kept].ID], got[order[kept].ID], "a kept job has all its series")
		kept++
	}
	assert.Len(t, got, kept, "the kept jobs are exactly a prefix of the ranking")
	assert.Equal(t, float64(len(order)-kept), value(t, all, "sluice_job_series_dropped"))
	t.Logf("20,000 jobs, %d qualifying: %d kept with %d per-job series, %d dropped; %d series in all", len(order), kept, total, len(order)-kept, len(all))
}

// BenchmarkScrape5000Jobs measures one full scrape of /metrics through
// promhttp of 20,000 running jobs (8,000 of them notable) with the cap at
// 5,000 per-job series, beside the fixed scenario. Text is the plain
// exposition; gzip is what Prometheus asks for.
func BenchmarkScrape5000Jobs(b *testing.B) {
	s := fixed()
	s.MaxJobSeries = 5000
	s.Jobs = append(manyJobs(20000), s.Jobs...)
	reg := prometheus.NewRegistry()
	reg.MustRegister(export.NewCollector(func() export.Snapshot { return s }))
	h := promhttp.HandlerFor(reg, promhttp.HandlerOpts{ErrorHandling: promhttp.HTTPErrorOnError})
	for _, enc := range []string{"text", "gzip"} {
		b.Run(enc, func(b *testing.B) {
			req := httptest.NewRequest("GET", "/metrics", nil)
			if enc == "gzip" {
				req.Header.Set("Accept-Encoding", "gzip")
			}
			var size int
			b.ReportAllocs()
			for b.Loop() {
				rec := httptest.NewRecorder()
				h.ServeHTTP(rec, req)
				if rec.Code != 200 {
					b.Fatalf("status %d: %s", rec.Code, rec.Body)
				}
				size = rec.Body.Len()
			}
			b.ReportMetric(float64(size), "body-bytes")
			b.ReportMetric(float64(len(gather(b, s))), "series")
		})
	}
}

// TestShareHistogramOnlyGrows: the fleet's CPU share is a real histogram
// of heartbeats, so no count goes down whatever the shares; each bucket
// holds the observations at or below its bound, counted by hand here.
func TestShareHistogramOnlyGrows(t *testing.T) {
	var h export.ShareHistogram
	shares := []float64{0.0003, 0.00005, 0.2, 0.001, 0.0001, 0.05, 0.003, 0}
	var prev export.ShareHistogram
	for n, share := range shares {
		h.Observe(share)
		require.Equal(t, uint64(n+1), h.Count)
		for i, b := range export.FleetCPUBuckets {
			want := uint64(0)
			for _, x := range shares[:n+1] {
				if x <= b {
					want++
				}
			}
			require.Equal(t, want, h.Buckets[i], "bucket le=%g after %d", b, n+1)
			require.GreaterOrEqual(t, h.Buckets[i], prev.Buckets[i])
		}
		prev = h
	}
	assert.InDelta(t, 0.25445, h.Sum, 1e-12)
}
