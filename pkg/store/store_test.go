package store_test

import (
	"fmt"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	bolt "go.etcd.io/bbolt"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/internal/storetest"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/store"
)

var t0 = time.Date(2026, 3, 2, 14, 0, 0, 0, time.UTC)

func TestRoundTrip(t *testing.T) {
	s := storetest.MustOpen(t)
	job := model.JobRecord{
		Meta:   model.JobMeta{ID: "81234", User: "dorvane", Nodes: []string{"bw007", "bw008"}, Start: t0, Announced: true},
		Closed: 2, LastSample: t0.Add(125 * time.Second), Unevaluated: true,
	}
	job.Totals[metric.Creates] = 1 << 40
	job.LiveRates[metric.Creates] = 2500.125
	job.LiveLevels[metric.Creates] = coding.Critical
	job.LiveNodes = 2
	flag := model.Flag{ID: "81234-1", Job: "81234", Reason: model.HighRateOf(metric.Creates), Metric: metric.Creates, Level: coding.Critical,
		Value: 2500, Peak: 3100.5, Cut: 1000, Nodes: 2, Severity: model.SeverityWarning, Summary: "creates above the critical cut on 2 nodes", Since: t0, Raised: t0.Add(time.Second)}
	storm := model.Flag{ID: "81234-2", Job: "81234", Reason: model.PatternOf("metadata_storm"), Metric: metric.Creates, Pattern: "metadata_storm",
		Title: "Metadata storm", Score: 2.0 / 3, Severity: model.SeverityCritical, Advice: "Ask the user about file-per-task output.",
		Drivers: []model.Driver{{Metric: metric.Creates, Rate: 2500, Level: coding.Critical, Grade: 6, Elevated: 100, Critical: 1000}}, Since: t0, Raised: t0}
	job.Streaks = map[model.Reason]model.StreakRecord{
		flag.Reason:                    {Above: 3, Since: t0, Score: 1, Flag: &flag},
		storm.Reason:                   {Above: 2, Below: 1, Since: t0, Score: 2.0 / 3, Flag: &storm},
		model.HighRateOf(metric.Opens): {Above: 1, Since: t0.Add(time.Minute), Score: 1},
	}
	job.FlagsRaised = 2
	w0 := model.Window{Job: "81234", Index: 0, Start: t0, End: t0.Add(time.Minute), Nodes: 2, BusiestShare: 0.75, NodeSpread: 0.5}
	w0.Rates[metric.Creates], w0.Levels[metric.Creates], w0.Grades[metric.Creates] = 2500, coding.Critical, 6
	w1 := model.Window{Job: "81234", Index: 1, Start: t0.Add(time.Minute), End: t0.Add(2 * time.Minute), Nodes: 2}
	other := model.Window{Job: "812340", Index: 0, Start: t0, End: t0.Add(time.Minute), Nodes: 1}
	seqs := model.SeqRecord{High: 42, Span: 4096, Applied: []model.SeqRange{{First: 40, Last: 42}, {First: 1, Last: 38}}}

	require.NoError(t, s.Apply(&store.Batch{
		Jobs:      []model.JobRecord{job},
		Windows:   []model.Window{w1, other, w0},
		Flags:     []model.Flag{flag, storm},
		Nodes:     map[string]model.SeqRecord{"bw007": seqs, "bw008": {High: 3, Span: 4096, Applied: []model.SeqRange{{First: 1, Last: 3}}}},
		Watermark: t0.Add(5 * time.Second), StreamSeq: 9001, ReplayFrom: 8700,
	}))
	st, err := s.Load()
	require.NoError(t, err)
	require.Len(t, st.Jobs, 1)
	want := job
	want.LastWindow = &w1
	want.Signature = st.Jobs[0].Signature // built from the windows: none was written
	assert.Equal(t, want, st.Jobs[0])
	assert.Equal(t, seqs, st.Nodes["bw007"])
	assert.Len(t, st.Nodes, 2)
	assert.True(t, st.Watermark.Equal(t0.Add(5*time.Second)))
	assert.Equal(t, uint64(9001), st.StreamSeq)
	assert.Equal(t, uint64(8700), st.ReplayFrom)

	ws, err := s.Windows("81234")
	require.NoError(t, err)
	require.Len(t, ws, 2, "windows of job 812340 must not leak into 81234's")
	assert.Equal(t, w0, ws[0])

	fs, err := s.Flags()
	require.NoError(t, err)
	assert.Equal(t, []model.Flag{flag, storm}, fs)
	for id, want := range map[string]bool{"81234-1": true, "81234-3": false, "81234": false, "-1": false, "81234-01": false} {
		got, err := s.HasFlag(id)
		require.NoError(t, err)
		assert.Equal(t, want, got, id)
	}

	require.NoError(t, s.Apply(&store.Batch{GoneJobs: []string{"81234"}}))
	st, err = s.Load()
	require.NoError(t, err)
	assert.Empty(t, st.Jobs)
}

// TestShardsKeepEveryNode writes many nodes' sequence sets in batches, as
// the commits do (each batch only the nodes that changed), and reads
// every node's latest back.
func TestShardsKeepEveryNode(t *testing.T) {
	s := storetest.MustOpen(t)
	want := map[string]model.SeqRecord{}
	for round := range 5 {
		changed := map[string]model.SeqRecord{}
		for n := round; n < 3000; n += 1 + round {
			rec := model.SeqRecord{High: uint64(100*round + n + 1), Span: 4096, Applied: []model.SeqRange{{First: 1, Last: uint64(100*round + n + 1)}}}
			changed[fmt.Sprintf("kx%04d", n)] = rec
			want[fmt.Sprintf("kx%04d", n)] = rec
		}
		require.NoError(t, s.Apply(&store.Batch{Nodes: changed}))
	}
	st, err := s.Load()
	require.NoError(t, err)
	assert.Equal(t, want, st.Nodes)
}

func TestSecondOpenerFailsFast(t *testing.T) {
	path := filepath.Join(t.TempDir(), "held.db")
	first, err := store.Open(path, store.Options{})
	require.NoError(t, err)
	defer first.Close()
	_, err = store.Open(path, store.Options{LockTimeout: 200 * time.Millisecond})
	require.ErrorIs(t, err, store.ErrLocked)
	assert.Contains(t, err.Error(), path)
}

func TestNewerSchemaRefused(t *testing.T) {
	path := filepath.Join(t.TempDir(), "future.db")
	db, err := bolt.Open(path, 0o600, &bolt.Options{Timeout: time.Second})
	require.NoError(t, err)
	require.NoError(t, db.Update(func(tx *bolt.Tx) error {
		b, err := tx.CreateBucketIfNotExists([]byte("meta"))
		if err != nil {
			return err
		}
		return b.Put([]byte("schema"), []byte("99"))
	}))
	require.NoError(t, db.Close())
	_, err = store.Open(path, store.Options{})
	assert.ErrorIs(t, err, store.ErrSchema)
}

// TestBaselineDaysRoundTrip writes two origins' days and a deletion, and
// reads back the same quantiles.
func TestBaselineDaysRoundTrip(t *testing.T) {
	s := storetest.MustOpen(t)
	d := baseline.NewDay()
	for i := 1; i <= 1000; i++ {
		require.NoError(t, d.Add(metric.Creates, float64(i)))
	}
	day := baseline.DayOf(t0)
	live, imp := baseline.Key{Origin: baseline.Live, Day: day}, baseline.Key{Origin: baseline.Import, Day: day - 1}
	require.NoError(t, s.Apply(&store.Batch{Days: map[baseline.Key]*baseline.Day{live: d, imp: d}}))
	got, err := s.Days()
	require.NoError(t, err)
	require.Len(t, got, 2)
	want, _ := d.Quantile(metric.Creates, 0.99)
	q, ok := got[imp].Quantile(metric.Creates, 0.99)
	require.True(t, ok)
	assert.Equal(t, want, q)

	require.NoError(t, s.Apply(&store.Batch{Days: map[baseline.Key]*baseline.Day{imp: nil}}))
	got, err = s.Days()
	require.NoError(t, err)
	assert.Len(t, got, 1)
	assert.Contains(t, got, live)
}
