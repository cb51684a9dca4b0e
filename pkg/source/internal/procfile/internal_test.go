package procfile

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

// A descriptor that went bad under a kept File (closed here behind its back,
// so that ReadAt fails with os.ErrClosed) is replaced within the same Load,
// or, with NoRetry, at the next one.
func TestLoadBadDescriptor(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		noRetry bool
	}{
		{name: "retry"},
		{name: "NoRetry", noRetry: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			path := filepath.Join(t.TempDir(), "stats")
			require.NoError(t, os.WriteFile(path, []byte("data\n"), 0o644))
			f := New(path, Options{CheckEvery: 12, NoRetry: tt.noRetry})
			defer f.Close()
			_, err := f.Load()
			require.NoError(t, err)
			require.NoError(t, f.f.Close())

			data, err := f.Load()
			if tt.noRetry {
				require.ErrorIs(t, err, os.ErrClosed)
				require.Nil(t, f.f, "the bad descriptor is dropped")
				data, err = f.Load()
			}
			require.NoError(t, err)
			require.Equal(t, "data\n", string(data))
			require.Equal(t, 2, f.Opens())
		})
	}
}
