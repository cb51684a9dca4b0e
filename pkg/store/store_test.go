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
	"sluice/pkg/internal/storetest"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/store"
	"sluice/pkg/tracker"
)

var t0 = time.Date(2026, 3, 2, 14, 0, 0, 0, time.UTC)

func TestRoundTrip(t *testing.T) {
	s := storetest.MustOpen(t)
	job := tracker.JobState{
		Meta:   model.JobMeta{ID: "81234", User: "dorvane", Nodes: []string{"bw007", "bw008"}, Start: t0, Announced: true},
		Live:   map[string][]tracker.Slice{"bw007": {{End: t0.Add(5 * time.Second), Seconds: 5, Values: metric.Values{metric.Creates: 12500}}}},
		Open:   map[int]*tracker.OpenWindow{0: {Nodes: map[string]*tracker.Accum{"bw007": {Seconds: 5, Values: metric.Values{metric.Creates: 12500}}}}},
		Closed: 0,
	}
	job.LiveRates[metric.Creates] = 2500
	job.LiveLevels[metric.Creates] = coding.Critical
	flag := model.Flag{ID: "81234/critical:creates/1", Job: "81234", Reason: "critical:creates", Metric: metric.Creates, Level: coding.Critical, Value: 2500, Cut: 1000, Since: t0, Raised: t0}
	job.Hyst[metric.Creates] = tracker.Hysteresis{Above: 3, Since: t0, Flag: &flag}
	w0 := model.Window{Job: "81234", Index: 0, Start: t0, End: t0.Add(time.Minute), Nodes: 2}
	w1 := model.Window{Job: "81234", Index: 1, Start: t0.Add(time.Minute), End: t0.Add(2 * time.Minute), Nodes: 2}
	other := model.Window{Job: "812340", Index: 0, Start: t0, End: t0.Add(time.Minute), Nodes: 1}
	seqs := tracker.SeqSet{High: 42, Bits: make([]uint64, 64)}
	seqs.Bits[0] = 0b1011

	require.NoError(t, s.Apply(&store.Batch{
		Jobs:      []tracker.JobState{job},
		Windows:   []model.Window{w1, other, w0},
		Flags:     []model.Flag{flag},
		Nodes:     map[string]tracker.SeqSet{"bw007": seqs},
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
	assert.Equal(t, flag.Reason, st.Jobs[0].Hyst[metric.Creates].Flag.Reason)
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
