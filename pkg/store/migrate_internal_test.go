package store

import (
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
	bolt "go.etcd.io/bbolt"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

// TestMigrationStoppedHalfwayFinishes stops a migration after its window
// records (as a crash would) and opens the file again: the result equals
// a migration run at once.
func TestMigrationStoppedHalfwayFinishes(t *testing.T) {
	orig := fixture.Read(t, "store", "schema1.db")
	dir := t.TempDir()
	once, halfway := filepath.Join(dir, "once.db"), filepath.Join(dir, "halfway.db")
	for _, p := range []string{once, halfway} {
		require.NoError(t, os.WriteFile(p, orig, 0o600))
	}
	db, err := bolt.Open(halfway, 0o600, &bolt.Options{Timeout: time.Second})
	require.NoError(t, err)
	part := &Store{db: db, path: halfway}
	n, err := part.rewrite(bucketWindows, convertWindow)
	require.NoError(t, err)
	require.Equal(t, 10, n)
	require.NoError(t, db.Close())

	load := func(path string) State {
		s, err := Open(path, Options{})
		require.NoError(t, err)
		defer s.Close()
		require.NotNil(t, s.Migrated())
		st, err := s.Load()
		require.NoError(t, err)
		return st
	}
	require.Equal(t, load(once), load(halfway))
}

// TestOlderJobRecordFoldsIntoStreaks converts a job record written before
// the raise-and-clear states moved into one map (testdata/store/README):
// the high-rate state kept by metric position and the pattern state kept
// by name both come out as streaks, with their flags, and the open
// window's sums count the job as running.
func TestOlderJobRecordFoldsIntoStreaks(t *testing.T) {
	var m Migration
	k, v, err := convertJob([]byte("81234"), fixture.Read(t, "store", "job_v1.json"), &m)
	require.NoError(t, err)
	j, err := decodeJob(string(k), v)
	require.NoError(t, err)
	require.Equal(t, 1, m.Running)
	require.Equal(t, "ambrel", j.Meta.User)
	require.Equal(t, 2, j.Closed)
	require.Len(t, j.Streaks, 2)
	rate := j.Streaks[model.HighRateOf(metric.Creates)]
	require.NotNil(t, rate.Flag)
	require.Equal(t, "81234/critical:creates/1772460010", rate.Flag.ID)
	storm := j.Streaks[model.PatternOf("metadata_storm")]
	require.Equal(t, 1, storm.Above)
	require.NotNil(t, storm.Flag)
	require.InDelta(t, 2.0/3, storm.Score, 1e-12)
}
