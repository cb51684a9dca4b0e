package store_test

import (
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	bolt "go.etcd.io/bbolt"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/store"
)

// TestSchemaOneFileIsMigrated opens the state file of schema 1 in
// testdata/store (see its README for what it holds) and checks what comes
// back against that description: every record rewritten, a copy kept,
// the forgotten job in the ended index, and a second open migrating
// nothing.
func TestSchemaOneFileIsMigrated(t *testing.T) {
	orig := fixture.Read(t, "store", "schema1.db")
	path := filepath.Join(t.TempDir(), "state.db")
	require.NoError(t, os.WriteFile(path, orig, 0o600))
	s, err := store.Open(path, store.Options{})
	require.NoError(t, err)

	m := s.Migrated()
	require.NotNil(t, m)
	assertSchemaOne(t, m.Backup)
	assert.Equal(t, map[string]int{"jobs": 2, "windows": 10, "flags": 5, "nodes": 6, "silences": 1, "acks": 1}, m.Records)
	assert.Equal(t, 2, m.Running, "40117 and 40120 were running")

	st, err := s.Load()
	require.NoError(t, err)
	assert.Equal(t, uint64(320), st.StreamSeq)
	assert.Equal(t, uint64(0), st.ReplayFrom, "nothing to read again: the open windows start afresh")
	assert.True(t, st.Watermark.Equal(time.Date(2026, 9, 14, 8, 5, 0, 0, time.UTC)), "%s", st.Watermark)
	require.Len(t, st.Jobs, 2)
	storm := st.Jobs[0]
	require.Equal(t, "40117", storm.Meta.ID)
	assert.Equal(t, []string{"kx0101", "kx0102", "kx0103"}, storm.Meta.Nodes)
	assert.Equal(t, "oberlin", storm.Meta.User)
	assert.Equal(t, 4, storm.Closed, "windows 0 to 3 closed by 08:05 with 5 s of grace")
	require.NotNil(t, storm.LastWindow)
	assert.Equal(t, 3, storm.LastWindow.Index)
	// 60 samples of each of 3 nodes: 40000+100*step creates each.
	assert.Equal(t, uint64(3*(60*40000+100*59*60/2)), storm.Totals[metric.Creates])
	assert.NotEmpty(t, storm.Streaks)
	assert.Positive(t, storm.FlagsRaised)
	assert.Equal(t, model.SeqRecord{High: 60, Span: 4096, Applied: []model.SeqRange{{First: 1, Last: 60}}}, st.Nodes["kx0101"])
	assert.Equal(t, model.SeqRecord{High: 20, Span: 4096, Applied: []model.SeqRange{{First: 1, Last: 20}}}, st.Nodes["kx0104"])

	flags, err := s.Flags()
	require.NoError(t, err)
	assert.Len(t, flags, 5)
	acks, err := s.Acks()
	require.NoError(t, err)
	assert.Equal(t, "ops-jun", acks["40117-1"].By)
	sil, err := s.Silences()
	require.NoError(t, err)
	require.Len(t, sil, 1)
	assert.Equal(t, "40120", sil[0].Job)
	days, err := s.Days()
	require.NoError(t, err)
	assert.Len(t, days, 1)

	// 40118 ended at 08:01:40 and was forgotten: its windows remain, and
	// the ended index has it by its last window's end.
	ws, err := s.Windows("40118")
	require.NoError(t, err)
	require.Len(t, ws, 2)
	p, err := s.Prune(time.Date(2026, 9, 14, 8, 1, 40, 0, time.UTC), 10)
	require.NoError(t, err)
	assert.Equal(t, store.Pruned{}, p, "not before its end")
	p, err = s.Prune(time.Date(2026, 9, 14, 8, 1, 41, 0, time.UTC), 10)
	require.NoError(t, err)
	assert.Equal(t, 1, p.Jobs)
	assert.Equal(t, 2, p.Windows)
	ws, err = s.Windows("40118")
	require.NoError(t, err)
	assert.Empty(t, ws)
	require.NoError(t, s.Check())
	require.NoError(t, s.Close())

	again, err := store.Open(path, store.Options{})
	require.NoError(t, err)
	defer again.Close()
	assert.Nil(t, again.Migrated())
	st2, err := again.Load()
	require.NoError(t, err)
	assert.Equal(t, st.Jobs, st2.Jobs)
}

// assertSchemaOne checks the file at path is a state file of schema 1
// with its two jobs.
func assertSchemaOne(t *testing.T, path string) {
	t.Helper()
	db, err := bolt.Open(path, 0o600, &bolt.Options{ReadOnly: true, Timeout: time.Second})
	require.NoError(t, err)
	defer db.Close()
	require.NoError(t, db.View(func(tx *bolt.Tx) error {
		assert.Equal(t, "1", string(tx.Bucket([]byte("meta")).Get([]byte("schema"))))
		assert.Equal(t, 2, tx.Bucket([]byte("jobs")).Stats().KeyN)
		return nil
	}))
}
