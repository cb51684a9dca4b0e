package nfs_test

import (
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"testing"
	"time"

	"github.com/prometheus/procfs"
	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/nfs"
)

// procfsMounts parses data with procfs, the reference library, from a fake
// proc root holding <root>/<pid>/mountstats.
func procfsMounts(t *testing.T, data []byte) ([]*procfs.Mount, error) {
	t.Helper()
	root := t.TempDir()
	const pid = 4242
	dir := filepath.Join(root, strconv.Itoa(pid))
	require.NoError(t, os.Mkdir(dir, 0o755))
	require.NoError(t, os.WriteFile(filepath.Join(dir, "mountstats"), data, 0o644))
	fs, err := procfs.NewFS(root)
	require.NoError(t, err)
	p, err := fs.Proc(pid)
	require.NoError(t, err)
	return p.MountStats()
}

// octal matches the escapes show_vfsstat prints; procfs leaves them as is.
var octal = regexp.MustCompile(`\\[0-3][0-7][0-7]`)

func unescapeOctal(s string) string {
	return octal.ReplaceAllStringFunc(s, func(e string) string {
		v, _ := strconv.ParseUint(e[1:], 8, 8)
		return string([]byte{byte(v)})
	})
}

// TestAgreesWithProcfs checks that Parse and procfs read the same numbers
// from every well-formed fixture.
// reference: github.com/prometheus/procfs v0.23.0 mountstats.go
func TestAgreesWithProcfs(t *testing.T) {
	t.Parallel()
	for _, name := range wellFormed {
		t.Run(name, func(t *testing.T) {
			t.Parallel()
			data := fixture.Read(t, "nfs", name, "mountstats")
			ref, err := procfsMounts(t, data)
			require.NoError(t, err, "procfs must accept a well-formed fixture")
			got, err := nfs.Parse(bytes.NewReader(data))
			require.NoError(t, err)
			require.Zero(t, got.Malformed)

			var refNFS []*procfs.Mount
			for _, m := range ref {
				if m.Type == "nfs" || m.Type == "nfs4" {
					refNFS = append(refNFS, m)
				}
			}
			require.Len(t, got.Mounts, len(refNFS))
			for i, r := range refNFS {
				g := got.Mounts[i]
				rs, ok := r.Stats.(*procfs.MountStatsNFS)
				require.True(t, ok, "procfs stats of %s", r.Mount)
				require.False(t, g.Partial)
				require.True(t, g.HasEvents)
				require.Equal(t, unescapeOctal(r.Device), g.Device)
				require.Equal(t, unescapeOctal(r.Mount), g.MountPoint)
				require.Equal(t, r.Type, g.FSType)
				require.Equal(t, rs.StatVersion, g.StatVersion)
				require.Equal(t, rs.Age, time.Duration(g.Age)*time.Second)
				require.Len(t, rs.Transport, g.Transports)

				b := rs.Bytes
				require.Equal(t, [nfs.NumBytes]uint64{
					b.Read, b.Write, b.DirectRead, b.DirectWrite,
					b.ReadTotal, b.WriteTotal, b.ReadPages, b.WritePages,
				}, g.Bytes)
				e := rs.Events
				require.Equal(t, [nfs.NumEvents]uint64{
					e.InodeRevalidate, e.DnodeRevalidate, e.DataInvalidate, e.AttributeInvalidate,
					e.VFSOpen, e.VFSLookup, e.VFSAccess, e.VFSUpdatePage, e.VFSReadPage,
					e.VFSReadPages, e.VFSWritePage, e.VFSWritePages, e.VFSGetdents, e.VFSSetattr,
					e.VFSFlush, e.VFSFsync, e.VFSLock, e.VFSFileRelease, e.CongestionWait,
					e.Truncation, e.WriteExtension, e.SillyRename, e.ShortRead, e.ShortWrite,
					e.JukeboxDelay, e.PNFSRead, e.PNFSWrite,
				}, g.Events)

				require.Len(t, g.Ops, len(rs.Operations))
				for _, op := range rs.Operations {
					got, ok := g.Op(op.Operation)
					require.True(t, ok, op.Operation)
					require.Equal(t, nfs.OpStats{
						Ops: op.Requests, Trans: op.Transmissions, MajorTimeouts: op.MajorTimeouts,
						BytesSent: op.BytesSent, BytesRecv: op.BytesReceived,
						QueueMs: op.CumulativeQueueMilliseconds,
						RTTMs:   op.CumulativeTotalResponseMilliseconds,
						ExecMs:  op.CumulativeTotalRequestMilliseconds,
						Errors:  op.Errors,
					}, got, op.Operation)
				}
			}
		})
	}
}

// TestProcfsRejectsWhatParseTolerates documents why the package has its own
// parser: procfs fails the whole file on one bad line.
// reference: github.com/prometheus/procfs v0.23.0 mountstats.go
func TestProcfsRejectsWhatParseTolerates(t *testing.T) {
	t.Parallel()
	data := fixture.Read(t, "nfs", "malformed", "mountstats")
	_, err := procfsMounts(t, data)
	require.Error(t, err)
	got, err := nfs.Parse(bytes.NewReader(data))
	require.NoError(t, err)
	require.Len(t, got.Mounts, 3)
}
