package store_test

import (
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	bolt "go.etcd.io/bbolt"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/internal/fixture"
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
		Live:   map[string][]model.SliceRecord{"bw007": {{End: t0.Add(5 * time.Second), Seconds: 5, Values: metric.Values{metric.Creates: 12500}}}},
		Open:   map[int]model.OpenRecord{0: {Nodes: map[string]model.AccumRecord{"bw007": {Seconds: 5, Values: metric.Values{metric.Creates: 12500}}}}},
		Closed: 0,
	}
	job.LiveRates[metric.Creates] = 2500
	job.LiveLevels[metric.Creates] = coding.Critical
	flag := model.Flag{ID: "81234-1", Job: "81234", Reason: model.HighRateOf(metric.Creates), Metric: metric.Creates, Level: coding.Critical, Value: 2500, Cut: 1000, Since: t0, Raised: t0}
	job.Streaks = map[model.Reason]model.StreakRecord{flag.Reason: {Above: 3, Since: t0, Score: 1, Flag: &flag}}
	job.FlagsRaised = 1
	w0 := model.Window{Job: "81234", Index: 0, Start: t0, End: t0.Add(time.Minute), Nodes: 2}
	w1 := model.Window{Job: "81234", Index: 1, Start: t0.Add(time.Minute), End: t0.Add(2 * time.Minute), Nodes: 2}
	other := model.Window{Job: "812340", Index: 0, Start: t0, End: t0.Add(time.Minute), Nodes: 1}
	seqs := model.SeqRecord{High: 42, Bits: make([]uint64, 64)}
	seqs.Bits[0] = 0b1011

	require.NoError(t, s.Apply(&store.Batch{
		Jobs:      []model.JobRecord{job},
		Windows:   []model.Window{w1, other, w0},
		Flags:     []model.Flag{flag},
		Nodes:     map[string]model.SeqRecord{"bw007": seqs},
		Watermark: t0.Add(5 * time.Second),
	}))
	st, err := s.Load()
	require.NoError(t, err)
	require.Len(t, st.Jobs, 1)
	assert.Equal(t, job.Meta.ID, st.Jobs[0].Meta.ID)
	assert.True(t, st.Jobs[0].Meta.Start.Equal(t0))
	assert.Equal(t, job.LiveRates, st.Jobs[0].LiveRates)
	assert.Equal(t, job.LiveLevels, st.Jobs[0].LiveLevels)
	assert.Equal(t, job.Open[0].Nodes["bw007"], st.Jobs[0].Open[0].Nodes["bw007"])
	assert.Equal(t, job.Streaks, st.Jobs[0].Streaks)
	assert.Equal(t, 1, st.Jobs[0].FlagsRaised)
	assert.Equal(t, seqs, st.Nodes["bw007"])
	assert.True(t, st.Watermark.Equal(t0.Add(5*time.Second)))

	ws, err := s.Windows("81234")
	require.NoError(t, err)
	require.Len(t, ws, 2, "windows of job 812340 must not leak into 81234's")
	assert.Equal(t, []int{0, 1}, []int{ws[0].Index, ws[1].Index})

	fs, err := s.Flags()
	require.NoError(t, err)
	require.Len(t, fs, 1)
	assert.Equal(t, flag.ID, fs[0].ID)

	require.NoError(t, s.Apply(&store.Batch{GoneJobs: []string{"81234"}}))
	st, err = s.Load()
	require.NoError(t, err)
	assert.Empty(t, st.Jobs)
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

// TestJobOfSchemaOneIsUpgraded reads a job record as the state file held
// it before the raise-and-clear state moved into one map (testdata/store):
// the high-rate flag on creates and the metadata_storm flag come back as
// streaks, by reason, with their counts and flags.
func TestJobOfSchemaOneIsUpgraded(t *testing.T) {
	s := storetest.MustOpen(t)
	require.NoError(t, s.PutRaw("jobs", "81234", fixture.Read(t, "store", "job_v1.json")))
	st, err := s.Load()
	require.NoError(t, err)
	require.Len(t, st.Jobs, 1)
	j := st.Jobs[0]
	assert.Nil(t, j.LegacyRates)
	assert.Nil(t, j.LegacyPatterns)
	require.Len(t, j.Streaks, 2)
	rate := j.Streaks[model.HighRateOf(metric.Creates)]
	require.NotNil(t, rate.Flag)
	assert.Equal(t, model.HighRateOf(metric.Creates), rate.Flag.Reason, `"critical:creates" is read as high_rate:creates`)
	assert.Equal(t, model.SeverityWarning, rate.Flag.Severity)
	assert.Positive(t, rate.Above)
	storm := j.Streaks[model.PatternOf("metadata_storm")]
	require.NotNil(t, storm.Flag)
	assert.Equal(t, model.SeverityCritical, storm.Flag.Severity)
	assert.Equal(t, "metadata_storm", storm.Flag.Pattern)
	assert.InDelta(t, 2.0/3, storm.Score, 1e-9)
	assert.NotEmpty(t, j.Signature, "a missing signature is rebuilt from the windows (none here: an empty one)")
}
