package pattern_test

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/pattern"
)

// FuzzParse checks that Parse never panics and that anything it accepts
// marshals, parses back equal, and marshals to the same bytes again.
// Seeds: the built-in files, every fixture in testdata/patterns, and the
// valid bodies of the table tests.
func FuzzParse(f *testing.F) {
	for _, glob := range []string{
		filepath.Join("builtin", "*.yaml"),
		filepath.Join(testdata, "*", "*.yaml"),
	} {
		files, err := filepath.Glob(glob)
		require.NoError(f, err)
		for _, file := range files {
			b, err := os.ReadFile(file)
			require.NoError(f, err)
			f.Add(b)
		}
	}
	f.Add([]byte(head + rule))
	f.Add([]byte(head + example + "  last: 3\n"))
	f.Add([]byte(head + "threshold: 0.5\nexample:\n  method: euclidean\n  metrics: [opens]\n  grades: {opens: \"0 6\"}\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := pattern.Parse("fuzz.yaml", bytes.NewReader(data))
		if err != nil {
			assert.Nil(t, p)
			assert.NotEmpty(t, err.Error())
			return
		}
		out, err := p.Marshal()
		require.NoError(t, err, "input:\n%s", data)
		q, err := pattern.Parse("fuzz.yaml", bytes.NewReader(out))
		require.NoError(t, err, "output:\n%s", out)
		require.Equal(t, p, q, "output:\n%s", out)
		again, err := q.Marshal()
		require.NoError(t, err)
		require.Equal(t, string(out), string(again))
	})
}
