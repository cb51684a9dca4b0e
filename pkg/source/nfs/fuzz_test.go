package nfs_test

import (
	"bytes"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/nfs"
)

func FuzzParse(f *testing.F) {
	for _, c := range allCases(f) {
		f.Add(fixture.Read(f, "nfs", c, "mountstats"))
	}
	f.Add([]byte("device a mounted on /b with fstype nfs statvers=1.1\n\tage:\t1\n\tbytes:\t1 2 3 4 5 6 7 8\n\tper-op statistics\n\tX: 1 2 3 4 5 6 7 8\n"))
	f.Add([]byte("no device mounted on /x with fstype nfs4\n\timpl_id:\tname='a\ndevice\n\\\\\\0401\n"))
	f.Add([]byte("device \\777\\0 mounted on \\1\\12 with fstype nfs4 statvers=\n\tper-op statistics\n: 1 2 3 4 5 6 7 8 9\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		st, err := nfs.Parse(bytes.NewReader(data))
		require.NoError(t, err, "a bytes.Reader never fails")

		lines := bytes.Count(data, []byte("\n"))
		if len(data) > 0 && data[len(data)-1] != '\n' {
			lines++
		}
		require.LessOrEqual(t, st.Malformed+len(st.Mounts), lines)
		perMount, ops := 0, 0
		for _, m := range st.Mounts {
			require.Contains(t, []string{"nfs", "nfs4"}, m.FSType)
			require.GreaterOrEqual(t, m.Malformed, 0)
			perMount += m.Malformed
			ops += len(m.Ops)
			if !m.HasEvents {
				require.Equal(t, [nfs.NumEvents]uint64{}, m.Events)
			}
			raw := m.Raw()
			require.LessOrEqual(t, len(raw), nfs.NumBytes+nfs.NumEvents+len(m.Ops))
			names := map[string]bool{}
			for _, op := range m.Ops {
				require.NotEmpty(t, op.Name)
				require.False(t, names[op.Name], "per-op name %q is listed once", op.Name)
				names[op.Name] = true
			}
		}
		require.LessOrEqual(t, perMount, st.Malformed)
		require.LessOrEqual(t, st.Malformed+len(st.Mounts)+ops, lines, "every line is one thing at most")
	})
}
