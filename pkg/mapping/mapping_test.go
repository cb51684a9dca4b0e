package mapping_test

import (
	"bytes"
	"os"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/fixture"
	"sluice/pkg/mapping"
	"sluice/pkg/metric"
	"sluice/pkg/source/lustre"
)

// defaultTable is the documented default table, written out literally in
// Entries order (source, metric, counter). "<name>.sum" is the sum of a
// byte counter's samples, "<name>" its sample count.
var defaultTable = []mapping.Entry{
	// Block devices: field names after Documentation/admin-guide/iostats.rst.
	{Source: "block", Counter: "read_bytes", Metric: metric.ReadBytes},
	{Source: "block", Counter: "write_bytes", Metric: metric.WriteBytes},
	{Source: "block", Counter: "reads", Metric: metric.ReadOps},
	{Source: "block", Counter: "writes", Metric: metric.WriteOps},
	{Source: "block", Counter: "flushes", Metric: metric.Syncs},
	// Per-job I/O: /proc/<pid>/io fields from Documentation/filesystems/proc.rst.
	{Source: "jobio", Counter: "proc.rchar", Metric: metric.ReadBytes},
	{Source: "jobio", Counter: "proc.wchar", Metric: metric.WriteBytes},
	{Source: "jobio", Counter: "proc.syscr", Metric: metric.ReadOps},
	{Source: "jobio", Counter: "proc.syscw", Metric: metric.WriteOps},
	{Source: "lustre", Counter: "read_bytes.sum", Metric: metric.ReadBytes},
	{Source: "lustre", Counter: "write_bytes.sum", Metric: metric.WriteBytes},
	{Source: "lustre", Counter: "read_bytes", Metric: metric.ReadOps},
	{Source: "lustre", Counter: "write_bytes", Metric: metric.WriteOps},
	{Source: "lustre", Counter: "open", Metric: metric.Opens},
	{Source: "lustre", Counter: "close", Metric: metric.Closes},
	{Source: "lustre", Counter: "create", Metric: metric.Creates},
	{Source: "lustre", Counter: "link", Metric: metric.Creates},
	{Source: "lustre", Counter: "mkdir", Metric: metric.Creates},
	{Source: "lustre", Counter: "mknod", Metric: metric.Creates},
	{Source: "lustre", Counter: "symlink", Metric: metric.Creates},
	{Source: "lustre", Counter: "rmdir", Metric: metric.Removes},
	{Source: "lustre", Counter: "unlink", Metric: metric.Removes},
	{Source: "lustre", Counter: "getattr", Metric: metric.StatOps},
	{Source: "lustre", Counter: "getxattr", Metric: metric.StatOps},
	{Source: "lustre", Counter: "listxattr", Metric: metric.StatOps},
	{Source: "lustre", Counter: "readdir", Metric: metric.StatOps},
	{Source: "lustre", Counter: "statfs", Metric: metric.StatOps},
	{Source: "lustre", Counter: "fallocate", Metric: metric.MetaUpdates},
	{Source: "lustre", Counter: "removexattr", Metric: metric.MetaUpdates},
	{Source: "lustre", Counter: "rename", Metric: metric.MetaUpdates},
	{Source: "lustre", Counter: "setattr", Metric: metric.MetaUpdates},
	{Source: "lustre", Counter: "setxattr", Metric: metric.MetaUpdates},
	{Source: "lustre", Counter: "truncate", Metric: metric.MetaUpdates},
	{Source: "lustre", Counter: "fsync", Metric: metric.Syncs},
	{Source: "lustre", Counter: "flock", Metric: metric.OtherOps},
	{Source: "lustre", Counter: "ioctl", Metric: metric.OtherOps},
	{Source: "lustre", Counter: "mmap", Metric: metric.OtherOps},
	{Source: "lustre", Counter: "seek", Metric: metric.OtherOps},
	// NFS client: byte fields and event names from include/linux/nfs_iostat.h,
	// per-op names as net/sunrpc/stats.c prints the client procedure tables.
	{Source: "nfs", Counter: "bytes.direct_read", Metric: metric.ReadBytes},
	{Source: "nfs", Counter: "bytes.normal_read", Metric: metric.ReadBytes},
	{Source: "nfs", Counter: "bytes.direct_write", Metric: metric.WriteBytes},
	{Source: "nfs", Counter: "bytes.normal_write", Metric: metric.WriteBytes},
	{Source: "nfs", Counter: "op.READ", Metric: metric.ReadOps},
	{Source: "nfs", Counter: "op.READ_PLUS", Metric: metric.ReadOps},
	{Source: "nfs", Counter: "op.WRITE", Metric: metric.WriteOps},
	{Source: "nfs", Counter: "events.open", Metric: metric.Opens},
	{Source: "nfs", Counter: "events.release", Metric: metric.Closes},
	{Source: "nfs", Counter: "op.CREATE", Metric: metric.Creates},
	{Source: "nfs", Counter: "op.LINK", Metric: metric.Creates},
	{Source: "nfs", Counter: "op.MKDIR", Metric: metric.Creates},
	{Source: "nfs", Counter: "op.MKNOD", Metric: metric.Creates},
	{Source: "nfs", Counter: "op.SYMLINK", Metric: metric.Creates},
	{Source: "nfs", Counter: "op.REMOVE", Metric: metric.Removes},
	{Source: "nfs", Counter: "op.RMDIR", Metric: metric.Removes},
	{Source: "nfs", Counter: "op.ACCESS", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.FSSTAT", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.GETACL", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.GETATTR", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.GETXATTR", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.LISTXATTRS", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.LOOKUP", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.LOOKUPP", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.LOOKUP_ROOT", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.READDIR", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.READDIRPLUS", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.READLINK", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.STATFS", Metric: metric.StatOps},
	{Source: "nfs", Counter: "op.ALLOCATE", Metric: metric.MetaUpdates},
	{Source: "nfs", Counter: "op.DEALLOCATE", Metric: metric.MetaUpdates},
	{Source: "nfs", Counter: "op.REMOVEXATTR", Metric: metric.MetaUpdates},
	{Source: "nfs", Counter: "op.RENAME", Metric: metric.MetaUpdates},
	{Source: "nfs", Counter: "op.SETACL", Metric: metric.MetaUpdates},
	{Source: "nfs", Counter: "op.SETATTR", Metric: metric.MetaUpdates},
	{Source: "nfs", Counter: "op.SETXATTR", Metric: metric.MetaUpdates},
	{Source: "nfs", Counter: "op.COMMIT", Metric: metric.Syncs},
	{Source: "nfs", Counter: "op.CLONE", Metric: metric.OtherOps},
	{Source: "nfs", Counter: "op.COPY", Metric: metric.OtherOps},
	{Source: "nfs", Counter: "op.LOCK", Metric: metric.OtherOps},
	{Source: "nfs", Counter: "op.LOCKT", Metric: metric.OtherOps},
	{Source: "nfs", Counter: "op.LOCKU", Metric: metric.OtherOps},
	{Source: "nfs", Counter: "op.SEEK", Metric: metric.OtherOps},
}

// lliteOpcodeTable is the llite counter set of Lustre master (tag
// 2.17.57), from lustre/llite/lproc_llite.c llite_opcode_table as recorded
// in /work/shared/FORMATS.md section 1.1 ("Counters in master"), plus the
// 2.12-only counters listed there.
var lliteOpcodeTable = map[string]bool{
	// bytes
	"read_bytes": true, "write_bytes": true, "hybrid_read_bytes": true, "hybrid_write_bytes": true,
	"cached_read_bytes": true, "pcc_hit_bytes": true, "pcc_attach_bytes": true,
	// latency in usecs
	"read": true, "write": true, "open": true, "close": true, "mmap": true, "page_fault": true,
	"page_mkwrite": true, "seek": true, "fsync": true, "readdir": true, "openclosetime": true,
	"setattr": true, "truncate": true, "flock": true, "getattr": true, "fallocate": true,
	"create": true, "link": true, "unlink": true, "symlink": true, "mkdir": true, "rmdir": true,
	"mknod": true, "rename": true, "statfs": true, "setxattr": true, "getxattr": true,
	"listxattr": true, "removexattr": true, "inode_permission": true, "splice": true,
	// count only
	"ioctl": true, "getxattr_hits": true, "opencount": true,
	// 2.12 only
	"dirty_pages_hits": true, "dirty_pages_misses": true, "brw_read": true, "brw_write": true, "alloc_inode": true,
}

func TestDefaultIsTheDocumentedTable(t *testing.T) {
	assert.Equal(t, defaultTable, mapping.Default().Entries())
}

func TestDefaultCountersExistInLustre(t *testing.T) {
	for _, e := range mapping.Default().Entries() {
		if e.Source != "lustre" {
			continue
		}
		name, isSum := strings.CutSuffix(e.Counter, ".sum")
		assert.True(t, lliteOpcodeTable[name], "%s is not an llite counter (lproc_llite.c llite_opcode_table, per FORMATS.md)", e.Counter)
		if isSum {
			// Only byte counters' sums are byte quantities.
			assert.True(t, strings.HasSuffix(name, "_bytes"), "%s", e.Counter)
			assert.True(t, e.Metric.IsBytes(), "%s maps to %s", e.Counter, e.Metric)
		} else {
			assert.False(t, e.Metric.IsBytes(), "a sample count %s must not map to a byte metric", e.Counter)
		}
	}
	// The package doc: "read" and "write" are latency counters whose
	// calls are already counted by read_bytes/write_bytes samples.
	def := mapping.Default()["lustre"]
	assert.NotContains(t, def, "read")
	assert.NotContains(t, def, "write")
}

func TestDefaultMatchesLustreParser(t *testing.T) {
	// The keys must be the ones the Lustre parser's Raw() emits. The want
	// values are summed by hand from testdata/lustre/v2_16_header/stats.
	f, err := os.Open(fixture.Path(t, "lustre", "v2_16_header", "stats"))
	require.NoError(t, err)
	defer f.Close()
	st, err := lustre.Parse(f)
	require.NoError(t, err)

	var got metric.Values
	mapping.Default().Apply("lustre", st.Raw(), &got)
	want := metric.Values{
		metric.ReadBytes:   2472242752,
		metric.WriteBytes:  161303766,
		metric.ReadOps:     1200,
		metric.WriteOps:    300,
		metric.Opens:       42,
		metric.Closes:      42,
		metric.Creates:     9 + 1 + 2 + 3 + 1,      // create link symlink mkdir mknod
		metric.Removes:     8 + 2,                  // unlink rmdir
		metric.StatOps:     310 + 57 + 4 + 25 + 11, // getattr getxattr listxattr statfs readdir
		metric.MetaUpdates: 6 + 2 + 4 + 3 + 1 + 1,  // setattr truncate rename setxattr removexattr fallocate
		metric.Syncs:       5,                      // fsync
		metric.OtherOps:    7 + 14 + 18 + 3,        // ioctl flock seek mmap
	}
	assert.Equal(t, want, got)
}

func TestDefaultIsAFreshCopy(t *testing.T) {
	d := mapping.Default()
	d["lustre"]["open"] = metric.Syncs
	delete(d["lustre"], "close")
	d["nfs"] = map[string]metric.ID{"READ": metric.ReadOps}
	assert.Equal(t, defaultTable, mapping.Default().Entries())
}

// with returns the default table changed by edit.
func with(edit func(t mapping.Table)) mapping.Table {
	tb := mapping.Default()
	edit(tb)
	return tb
}

func TestLoad(t *testing.T) {
	tests := []struct {
		name    string
		input   string // fixture in testdata/mapping
		want    mapping.Table
		wantErr string
	}{
		{name: "map, remap and drop", input: "override.yaml", want: with(func(tb mapping.Table) {
			tb["lustre"]["inode_permission"] = metric.StatOps
			tb["lustre"]["mmap"] = metric.MetaUpdates
			delete(tb["lustre"], "ioctl")
		})},
		{name: "a source kind the base does not know", input: "new_source.yaml", wantErr: `mapping: unknown source kind "gpfs" (known: block, jobio, lustre, nfs)`},
		{name: "no overrides", input: "empty.yaml", want: mapping.Default()},
		{name: "unknown metric names source and counter", input: "unknown_metric.yaml", wantErr: `mapping: lustre.open: unknown metric "open_ops"`},
		{name: "a counter's value must be a metric name", input: "bad_shape.yaml", wantErr: "mapping:"},
		{name: "a source's counters must be a map", input: "list.yaml", wantErr: "mapping:"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := mapping.Load(bytes.NewReader(fixture.Read(t, "mapping", tt.input)), mapping.Default())
			if tt.wantErr != "" {
				require.Error(t, err)
				assert.Contains(t, err.Error(), tt.wantErr)
				assert.Nil(t, got)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want.Entries(), got.Entries())
		})
	}
}

func TestLoadInline(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		want    map[string]metric.ID // the lustre source after Load
		wantErr string
	}{
		{name: "drop a counter the base lacks", input: "lustre: {nosuch: \"\"}", want: mapping.Default()["lustre"]},
		{name: "all three forms", input: "lustre:\n  open: syncs\n  close: ''\n  splice: read_ops\n", want: with(func(tb mapping.Table) {
			tb["lustre"]["open"] = metric.Syncs
			delete(tb["lustre"], "close")
			tb["lustre"]["splice"] = metric.ReadOps
		})["lustre"]},
		{name: "raw counter name is not a metric", input: "lustre: {getattr: getattr}", wantErr: `lustre.getattr: unknown metric "getattr"`},
		{name: "metric names are case sensitive", input: "lustre: {getattr: Stat_Ops}", wantErr: `lustre.getattr: unknown metric "Stat_Ops"`},
		{name: "not a map at the top", input: "- lustre", wantErr: "mapping:"},
		{name: "syntax error", input: "lustre: {open: opens", wantErr: "mapping:"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := mapping.Load(strings.NewReader(tt.input), mapping.Default())
			if tt.wantErr != "" {
				require.Error(t, err)
				assert.Contains(t, err.Error(), tt.wantErr)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got["lustre"])
		})
	}
}

func TestLoadUnknownSourceKind(t *testing.T) {
	_, err := mapping.Load(bytes.NewReader(fixture.Read(t, "mapping", "typo_source.yaml")), mapping.Default())
	require.Error(t, err, "an override for a source kind the base does not know should be rejected")
	assert.Contains(t, err.Error(), "lustr")
}

func TestLoadLeavesBaseAlone(t *testing.T) {
	base := mapping.Default()
	got, err := mapping.Load(bytes.NewReader(fixture.Read(t, "mapping", "override.yaml")), base)
	require.NoError(t, err)
	assert.Equal(t, defaultTable, base.Entries(), "Load must not modify its base")
	got["lustre"]["open"] = metric.Syncs
	assert.Equal(t, metric.Opens, base["lustre"]["open"], "the result must not share maps with the base")
}

func TestLoadNilBase(t *testing.T) {
	got, err := mapping.Load(strings.NewReader(""), nil)
	require.NoError(t, err)
	assert.Empty(t, got.Entries())
	_, err = mapping.Load(strings.NewReader("lustre: {open: opens}"), nil)
	assert.ErrorContains(t, err, `unknown source kind "lustre"`, "with no base, no source kind is known")
}

func TestApply(t *testing.T) {
	tb := mapping.Table{
		"lustre": {"read_bytes.sum": metric.ReadBytes, "read_bytes": metric.ReadOps, "mkdir": metric.Creates, "create": metric.Creates},
		"nfs":    {"READ": metric.ReadOps},
	}
	tests := []struct {
		name   string
		source string
		input  map[string]uint64
		start  metric.Values
		want   metric.Values
	}{
		{name: "mapped counters", source: "lustre", input: map[string]uint64{"read_bytes.sum": 4096, "read_bytes": 2},
			want: metric.Values{metric.ReadBytes: 4096, metric.ReadOps: 2}},
		{name: "counters sharing a metric add up", source: "lustre", input: map[string]uint64{"mkdir": 3, "create": 4},
			want: metric.Values{metric.Creates: 7}},
		{name: "unmapped counters are ignored", source: "lustre", input: map[string]uint64{"read": 1000, "open": 5},
			want: metric.Values{}},
		{name: "adds to what is there", source: "lustre", input: map[string]uint64{"mkdir": 1},
			start: metric.Values{metric.Creates: 10, metric.Syncs: 2}, want: metric.Values{metric.Creates: 11, metric.Syncs: 2}},
		{name: "per source kind", source: "nfs", input: map[string]uint64{"READ": 9, "mkdir": 1},
			want: metric.Values{metric.ReadOps: 9}},
		{name: "unknown source kind adds nothing", source: "cifs", input: map[string]uint64{"READ": 9},
			want: metric.Values{}},
		{name: "no counters", source: "lustre", want: metric.Values{}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := tt.start
			tb.Apply(tt.source, tt.input, &got)
			assert.Equal(t, tt.want, got)
		})
	}
}

func TestEntriesOrder(t *testing.T) {
	tb := mapping.Table{
		"nfs":    {"WRITE": metric.WriteOps, "READ": metric.ReadOps},
		"lustre": {"b": metric.Opens, "a": metric.Opens, "z": metric.ReadBytes},
	}
	want := []mapping.Entry{
		{Source: "lustre", Counter: "z", Metric: metric.ReadBytes},
		{Source: "lustre", Counter: "a", Metric: metric.Opens},
		{Source: "lustre", Counter: "b", Metric: metric.Opens},
		{Source: "nfs", Counter: "READ", Metric: metric.ReadOps},
		{Source: "nfs", Counter: "WRITE", Metric: metric.WriteOps},
	}
	assert.Equal(t, want, tb.Entries())
	assert.Empty(t, mapping.Table{}.Entries())
}

func FuzzLoad(f *testing.F) {
	entries, err := os.ReadDir(fixture.Path(f, "mapping"))
	require.NoError(f, err)
	for _, e := range entries {
		f.Add(fixture.Read(f, "mapping", e.Name()))
	}
	f.Add([]byte("lustre: {open: ~, close: 5, seek: [1]}\n"))
	f.Add([]byte("lustre: &a {open: opens}\nnfs: *a\n"))
	f.Add([]byte("lustre: {open: opens, open: closes}\n"))
	f.Add([]byte("? [x]\n: {}\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := mapping.Load(bytes.NewReader(data), mapping.Default())
		if err != nil {
			require.Nil(t, got)
			return
		}
		for _, e := range got.Entries() {
			require.True(t, e.Metric.Valid(), "%+v", e)
		}
	})
}
