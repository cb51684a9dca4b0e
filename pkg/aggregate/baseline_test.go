package aggregate_test

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/stat"

	"sluice/pkg/aggregate"
	"sluice/pkg/api"
	"sluice/pkg/coding"
	"sluice/pkg/internal/natstest"
	"sluice/pkg/metric"
)

// service starts an aggregator on its own broker and store file.
func service(t *testing.T, storePath string, now func() time.Time) (*aggregate.Service, func()) {
	t.Helper()
	srv := natstest.Start(t)
	svc, err := aggregate.New(aggregate.Options{
		NATSURL: srv.URL(), StorePath: storePath, Listen: "127.0.0.1:0",
		TickEvery: time.Hour, FlushEvery: time.Hour, RecomputeEvery: time.Hour, Now: now,
	})
	require.NoError(t, err)
	stopSvc, err := svc.Start()
	require.NoError(t, err, "aggregator did not start")
	stop := func() { require.NoError(t, stopSvc()) }
	t.Cleanup(stop)
	return svc, stop
}

// historyCSV writes n creates windows per day for days days ending on
// last, log-normal around 20 ops/s, plus idle ones, and the exact values.
func historyCSV(last time.Time, days, n int) ([]byte, []float64) {
	r := rand.New(rand.NewPCG(21, 34))
	var b bytes.Buffer
	b.WriteString("# Brackwater history, invented\nday,metric,rate,count\n")
	var values []float64
	for d := range days {
		day := last.AddDate(0, 0, -d).Format(time.DateOnly)
		for range n {
			v := math.Exp(3 + 1.5*r.NormFloat64())
			values = append(values, v)
			fmt.Fprintf(&b, "%s,creates,%g,1\n", day, v)
		}
		fmt.Fprintf(&b, "%s,creates,0,%d\n", day, n)
	}
	return b.Bytes(), values
}

func post(t *testing.T, svc *aggregate.Service, body []byte) api.ImportResult {
	t.Helper()
	resp, err := http.Post("http://"+svc.HTTPAddr()+"/api/v1/baseline/import", "text/csv", bytes.NewReader(body))
	require.NoError(t, err)
	defer resp.Body.Close()
	msg, _ := io.ReadAll(resp.Body)
	require.Equal(t, http.StatusOK, resp.StatusCode, string(msg))
	var res api.ImportResult
	require.NoError(t, json.Unmarshal(msg, &res))
	return res
}

func baselineReport(t *testing.T, svc *aggregate.Service) api.BaselineReport {
	t.Helper()
	resp, err := http.Get("http://" + svc.HTTPAddr() + "/api/v1/baseline")
	require.NoError(t, err)
	defer resp.Body.Close()
	var b api.BaselineReport
	require.NoError(t, json.NewDecoder(resp.Body).Decode(&b))
	return b
}

func creates(b api.BaselineReport) api.BaselineMetric {
	i := slices.IndexFunc(b.Metrics, func(m api.BaselineMetric) bool { return m.Metric == "creates" })
	return b.Metrics[i]
}

// TestImportLearnsExportsAndSurvivesRestart seeds the baseline from a file
// with malformed rows, imports it twice, checks the learned cut against the
// exact quantile (gonum), /metrics and a restart, and that an export
// imported into a fresh aggregator gives the same cut points.
func TestImportLearnsExportsAndSurvivesRestart(t *testing.T) {
	now := time.Date(2026, 11, 30, 12, 0, 0, 0, time.UTC)
	clock := func() time.Time { return now }
	path := filepath.Join(t.TempDir(), "a.db")
	svc, stop := service(t, path, clock)
	before := creates(baselineReport(t, svc))
	assert.Equal(t, coding.BasisSeed, before.Basis)

	good, values := historyCSV(now, 3, 1500)
	lines := strings.SplitAfter(string(good), "\n")
	// Malformed rows at file lines 4, 10 and the end.
	bad := slices.Concat(lines[:3], []string{"2026-11-30,creats,3,1\n"}, lines[3:8], []string{"2026-11-31,creates,3,1\n"}, lines[8:], []string{"2026-11-30,creates,-1,1\n"})
	body := []byte(strings.Join(bad, ""))
	res := post(t, svc, body)
	assert.Equal(t, 3*1500+3, res.Rows)
	assert.Equal(t, 3, res.Malformed)
	require.Len(t, res.Errors, 3)
	assert.Contains(t, res.Errors[0], "line 4: metric")
	assert.Contains(t, res.Errors[1], "line 10: day")
	assert.Contains(t, res.Errors[2], fmt.Sprintf("line %d: rate", len(bad)-1))
	assert.Len(t, res.Days, 3)

	// Windows below the idle floor (1 op/s, coding.Floor) are idle and left
	// out of the quantiles, like the rate-0 rows.
	active := slices.DeleteFunc(values, func(v float64) bool { return v < coding.Floor(metric.Creates) })
	got := creates(baselineReport(t, svc))
	require.Equal(t, coding.BasisLearned, got.Basis)
	assert.EqualValues(t, len(active), got.Windows)
	assert.EqualValues(t, 4500+4500-len(active), got.Idle)
	slices.Sort(active)
	values = active
	// The exact p99.9 by gonum's empirical quantile; DDSketch's bin edge is
	// at most 2.02% above the value at the quantile's rank (see package
	// baseline), so the cut lies within [exact order statistic, +2.1%].
	exact := stat.Quantile(0.999, stat.Empirical, values, nil)
	assert.InEpsilon(t, exact, got.Critical, 0.025, "critical cut %g against exact p99.9 %g", got.Critical, exact)

	again := post(t, svc, body)
	assert.Equal(t, res.Days, again.Days)
	assert.Equal(t, got, creates(baselineReport(t, svc)), "importing the same file twice is importing it once")

	metrics := scrapeText(t, svc)
	assert.Contains(t, metrics, fmt.Sprintf(`sluice_cut_point_operations_per_second{basis="learned",level="critical",metric="creates"} %g`, got.Critical))
	assert.Contains(t, metrics, fmt.Sprintf(`sluice_baseline_windows{metric="creates"} %d`, len(active)))

	resp, err := http.Get("http://" + svc.HTTPAddr() + "/api/v1/baseline/export")
	require.NoError(t, err)
	export, err := io.ReadAll(resp.Body)
	resp.Body.Close()
	require.NoError(t, err)

	fresh, _ := service(t, filepath.Join(t.TempDir(), "b.db"), clock)
	post(t, fresh, export)
	assert.Equal(t, got, creates(baselineReport(t, fresh)), "an export imported elsewhere gives the same cut points")

	// The learned days are in the store: a restart learns the same.
	stop()
	restarted, _ := service(t, path, clock)
	assert.Equal(t, got, creates(baselineReport(t, restarted)))
}

func scrapeText(t *testing.T, svc *aggregate.Service) string {
	resp, err := http.Get("http://" + svc.HTTPAddr() + "/metrics")
	require.NoError(t, err)
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	require.NoError(t, err)
	return string(b)
}
