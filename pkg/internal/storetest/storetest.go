// Package storetest opens real bbolt state files for tests.
package storetest

import (
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/store"
)

// MustOpen opens a fresh store in the test's temporary directory and, at
// cleanup, checks its integrity and closes it.
func MustOpen(t testing.TB) *store.Store {
	t.Helper()
	s, err := store.Open(filepath.Join(t.TempDir(), "state.db"), store.Options{})
	require.NoError(t, err)
	t.Cleanup(func() {
		require.NoError(t, s.Check(), "store integrity")
		require.NoError(t, s.Close())
	})
	return s
}
