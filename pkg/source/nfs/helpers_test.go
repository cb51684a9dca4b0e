package nfs_test

import (
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/source/nfs"
)

// wellFormed lists the fixture cases that follow the kernel's layout
// exactly, so that procfs parses them too.
var wellFormed = []string{
	"v4_2_single", "v3", "shared_superblock", "mixed", "statvers_1_0",
	"escaped", "nconnect", "remount_1_before", "remount_2_later", "remount_3_after",
}

// allCases lists every fixture case directory.
func allCases(t testing.TB) []string {
	t.Helper()
	paths, err := filepath.Glob(filepath.Join(fixture.Path(t, "nfs"), "*", "mountstats"))
	require.NoError(t, err)
	require.NotEmpty(t, paths)
	cases := make([]string, 0, len(paths))
	for _, p := range paths {
		cases = append(cases, filepath.Base(filepath.Dir(p)))
	}
	sort.Strings(cases)
	return cases
}

// opNames returns the sorted per-op names of m.
func opNames(m nfs.Mount) []string {
	names := make([]string, 0, len(m.Ops))
	for _, op := range m.Ops {
		names = append(names, op.Name)
	}
	sort.Strings(names)
	return names
}

// v3Ops and v4Ops are the per-op names of the generated fixtures: the
// procedure lists of nfs3_procedures (fs/nfs/nfs3xdr.c) and nfs4_procedures
// (fs/nfs/nfs4xdr.c), sorted.
var (
	v3Ops = sorted("NULL", "GETATTR", "SETATTR", "LOOKUP", "ACCESS", "READLINK", "READ", "WRITE",
		"CREATE", "MKDIR", "SYMLINK", "MKNOD", "REMOVE", "RMDIR", "RENAME", "LINK", "READDIR",
		"READDIRPLUS", "FSSTAT", "FSINFO", "PATHCONF", "COMMIT")
	v4Ops = sorted("NULL", "READ", "WRITE", "COMMIT", "OPEN", "OPEN_CONFIRM", "OPEN_NOATTR",
		"OPEN_DOWNGRADE", "CLOSE", "SETATTR", "FSINFO", "RENEW", "SETCLIENTID",
		"SETCLIENTID_CONFIRM", "LOCK", "LOCKT", "LOCKU", "ACCESS", "GETATTR", "LOOKUP",
		"LOOKUP_ROOT", "REMOVE", "RENAME", "LINK", "SYMLINK", "CREATE", "PATHCONF", "STATFS",
		"READLINK", "READDIR", "SERVER_CAPS", "DELEGRETURN", "GETACL", "SETACL", "FS_LOCATIONS",
		"RELEASE_LOCKOWNER", "SECINFO", "FSID_PRESENT", "EXCHANGE_ID", "CREATE_SESSION",
		"DESTROY_SESSION", "SEQUENCE", "GET_LEASE_TIME", "RECLAIM_COMPLETE", "LAYOUTGET",
		"GETDEVICEINFO", "LAYOUTCOMMIT", "LAYOUTRETURN", "SECINFO_NO_NAME", "TEST_STATEID",
		"FREE_STATEID", "GETDEVICELIST", "BIND_CONN_TO_SESSION", "DESTROY_CLIENTID", "SEEK",
		"ALLOCATE", "DEALLOCATE", "LAYOUTSTATS", "CLONE", "COPY", "OFFLOAD_CANCEL", "LOOKUPP",
		"LAYOUTERROR", "COPY_NOTIFY", "GETXATTR", "SETXATTR", "LISTXATTRS", "REMOVEXATTR",
		"READ_PLUS")
)

func sorted(s ...string) []string {
	sort.Strings(s)
	return s
}

// opsOf turns a table's per-op lines into Mount.Ops, sorted by name: the
// tables compare them with opMap, in any order.
func opsOf(m map[string]nfs.OpStats) []nfs.Op {
	ops := make([]nfs.Op, 0, len(m))
	for name, v := range m {
		ops = append(ops, nfs.Op{Name: name, OpStats: v})
	}
	slices.SortFunc(ops, func(a, b nfs.Op) int { return strings.Compare(a.Name, b.Name) })
	return ops
}

// opMap indexes per-op lines by name; nil for none.
func opMap(ops []nfs.Op) map[string]nfs.OpStats {
	if len(ops) == 0 {
		return nil
	}
	m := make(map[string]nfs.OpStats, len(ops))
	for _, op := range ops {
		m[op.Name] = op.OpStats
	}
	return m
}
