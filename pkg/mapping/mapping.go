// Package mapping assigns raw source counters to the project's metrics.
//
// # Basics
//
// A [Table] maps, per source kind, raw counter names (as the source reports
// them in a reading) to a [metric.ID]. [Default] is the documented default;
// [Load] reads a YAML file of overrides that are laid over it, where an
// empty metric name drops a counter.
//
// # Caveats
//
// Counters not in the table are ignored, so a new client version's new
// counter adds nothing until it is mapped. For Lustre, a call is counted
// once: read_bytes' sample count is the number of read calls, so the
// latency counters "read" and "write" are deliberately left unmapped.
package mapping

import (
	"fmt"
	"io"
	"maps"
	"slices"
	"sort"
	"strings"

	"go.yaml.in/yaml/v3"

	"sluice/pkg/metric"
)

// Table maps source kind -> raw counter name -> metric.
type Table map[string]map[string]metric.ID

// Entry is one row of a table, for listing and documentation.
type Entry struct {
	Source  string
	Counter string
	Metric  metric.ID
}

// lustreDefault follows the llite counter set named in the Lustre source
// (lustre/llite/lproc_llite.c, llite_opcode_table). "<name>" is a counter's
// sample count, "<name>.sum" the sum of its byte samples.
var lustreDefault = map[string]metric.ID{
	"read_bytes.sum":  metric.ReadBytes,
	"write_bytes.sum": metric.WriteBytes,
	"read_bytes":      metric.ReadOps,
	"write_bytes":     metric.WriteOps,
	"open":            metric.Opens,
	"close":           metric.Closes,
	"create":          metric.Creates,
	"mkdir":           metric.Creates,
	"mknod":           metric.Creates,
	"symlink":         metric.Creates,
	"link":            metric.Creates,
	"unlink":          metric.Removes,
	"rmdir":           metric.Removes,
	"getattr":         metric.StatOps,
	"getxattr":        metric.StatOps,
	"listxattr":       metric.StatOps,
	"statfs":          metric.StatOps,
	"readdir":         metric.StatOps,
	"setattr":         metric.MetaUpdates,
	"truncate":        metric.MetaUpdates,
	"rename":          metric.MetaUpdates,
	"setxattr":        metric.MetaUpdates,
	"removexattr":     metric.MetaUpdates,
	"fallocate":       metric.MetaUpdates,
	"fsync":           metric.Syncs,
	"ioctl":           metric.OtherOps,
	"flock":           metric.OtherOps,
	"seek":            metric.OtherOps,
	"mmap":            metric.OtherOps,
}

// blockDefault maps the block device source's counters (pkg/source/block,
// after Documentation/admin-guide/iostats.rst). Merged requests are already
// inside reads and writes, sectors are inside the byte counts, and the
// millisecond fields are time, which no metric holds. Block operations are
// device requests after merging, not calls, and flushes are block-layer
// FLUSH requests, which the kernel combines: they undercount fsyncs.
var blockDefault = map[string]metric.ID{
	"read_bytes":  metric.ReadBytes,
	"write_bytes": metric.WriteBytes,
	"reads":       metric.ReadOps,
	"writes":      metric.WriteOps,
	"flushes":     metric.Syncs,
}

// nfsDefault maps the NFS client source's counters (pkg/source/nfs, after
// include/linux/nfs_iostat.h and the per-op lines of net/sunrpc/stats.c).
// Bytes are what applications read and wrote, page cache and O_DIRECT
// alike. Operations are RPCs (one READ carries up to rsize bytes; cache hits
// send none), except opens and closes, which come from the client's VFS
// event counters because NFSv3 has no OPEN or CLOSE call and v4 delegations
// skip some. NFSv4 creates regular files through OPEN, so v4 creates
// undercount. COMMIT stands for fsync: mapping events.fsync as well would
// count one fsync twice.
var nfsDefault = map[string]metric.ID{
	"bytes.normal_read":  metric.ReadBytes,
	"bytes.direct_read":  metric.ReadBytes,
	"bytes.normal_write": metric.WriteBytes,
	"bytes.direct_write": metric.WriteBytes,
	"op.READ":            metric.ReadOps,
	"op.READ_PLUS":       metric.ReadOps,
	"op.WRITE":           metric.WriteOps,
	"events.open":        metric.Opens,
	"events.release":     metric.Closes,
	"op.CREATE":          metric.Creates,
	"op.MKDIR":           metric.Creates,
	"op.MKNOD":           metric.Creates,
	"op.SYMLINK":         metric.Creates,
	"op.LINK":            metric.Creates,
	"op.REMOVE":          metric.Removes,
	"op.RMDIR":           metric.Removes,
	"op.LOOKUP":          metric.StatOps,
	"op.LOOKUPP":         metric.StatOps,
	"op.LOOKUP_ROOT":     metric.StatOps,
	"op.GETATTR":         metric.StatOps,
	"op.ACCESS":          metric.StatOps,
	"op.READDIR":         metric.StatOps,
	"op.READDIRPLUS":     metric.StatOps,
	"op.READLINK":        metric.StatOps,
	"op.FSSTAT":          metric.StatOps,
	"op.STATFS":          metric.StatOps,
	"op.GETXATTR":        metric.StatOps,
	"op.LISTXATTRS":      metric.StatOps,
	"op.GETACL":          metric.StatOps,
	"op.SETATTR":         metric.MetaUpdates,
	"op.RENAME":          metric.MetaUpdates,
	"op.SETACL":          metric.MetaUpdates,
	"op.SETXATTR":        metric.MetaUpdates,
	"op.REMOVEXATTR":     metric.MetaUpdates,
	"op.ALLOCATE":        metric.MetaUpdates,
	"op.DEALLOCATE":      metric.MetaUpdates,
	"op.COMMIT":          metric.Syncs,
	"op.LOCK":            metric.OtherOps,
	"op.LOCKT":           metric.OtherOps,
	"op.LOCKU":           metric.OtherOps,
	"op.SEEK":            metric.OtherOps,
	"op.COPY":            metric.OtherOps,
	"op.CLONE":           metric.OtherOps,
}

// jobioDefault maps the per-job source's counters (pkg/source/jobio, after
// the /proc/<pid>/io fields of Documentation/filesystems/proc.rst): bytes
// and calls through read- and write-family system calls, as the Lustre and
// NFS rows count calls. Left out: proc.read_bytes and proc.write_bytes (the
// storage-level view of the same I/O), cancelled_write_bytes (a correction,
// not I/O) and every iostat.* counter (block devices only, and already
// inside rchar/wchar). Each job this source reports, alone on its node or
// not, takes exactly the metrics mapped here from this source, and the rest
// from the node.
var jobioDefault = map[string]metric.ID{
	"proc.rchar": metric.ReadBytes,
	"proc.wchar": metric.WriteBytes,
	"proc.syscr": metric.ReadOps,
	"proc.syscw": metric.WriteOps,
}

// defaults are the default rows per source kind.
var defaults = map[string]map[string]metric.ID{
	"lustre": lustreDefault,
	"nfs":    nfsDefault,
	"block":  blockDefault,
	"jobio":  jobioDefault,
}

// Default returns a fresh copy of the default table.
func Default() Table {
	t := Table{}
	for kind, rows := range defaults {
		t[kind] = make(map[string]metric.ID, len(rows))
		for k, v := range rows {
			t[kind][k] = v
		}
	}
	return t
}

// Load reads YAML overrides and lays them over base. Source kinds must be
// ones base knows, so a misspelt kind is an error rather than a no-op. The
// layout is
//
//	lustre:
//	  inode_permission: stat_ops   # map a counter
//	  ioctl: ""                    # drop a counter
func Load(r io.Reader, base Table) (Table, error) {
	var raw map[string]map[string]string
	dec := yaml.NewDecoder(r)
	dec.KnownFields(true)
	if err := dec.Decode(&raw); err != nil && err != io.EOF {
		return nil, fmt.Errorf("mapping: %w", err)
	}
	out := base.clone()
	for src, counters := range raw {
		if out[src] == nil {
			return nil, fmt.Errorf("mapping: unknown source kind %q (known: %s)", src, strings.Join(slices.Sorted(maps.Keys(base)), ", "))
		}
		for counter, name := range counters {
			if name == "" {
				delete(out[src], counter)
				continue
			}
			id, err := metric.Parse(name)
			if err != nil {
				return nil, fmt.Errorf("mapping: %s.%s: %w", src, counter, err)
			}
			out[src][counter] = id
		}
	}
	return out, nil
}

func (t Table) clone() Table {
	c := make(Table, len(t))
	for src, m := range t {
		c[src] = make(map[string]metric.ID, len(m))
		for k, v := range m {
			c[src][k] = v
		}
	}
	return c
}

// Apply adds the mapped counters of one source kind into v: the raw
// counters of one instance become its sums per metric.
func (t Table) Apply(sourceKind string, counters map[string]uint64, v *metric.Values) {
	m := t[sourceKind]
	for name, x := range counters {
		if id, ok := m[name]; ok {
			v[id] += x
		}
	}
}

// Entries lists the table sorted by source, metric and counter.
func (t Table) Entries() []Entry {
	var es []Entry
	for src, m := range t {
		for c, id := range m {
			es = append(es, Entry{Source: src, Counter: c, Metric: id})
		}
	}
	sort.Slice(es, func(i, j int) bool {
		a, b := es[i], es[j]
		if a.Source != b.Source {
			return a.Source < b.Source
		}
		if a.Metric != b.Metric {
			return a.Metric < b.Metric
		}
		return a.Counter < b.Counter
	})
	return es
}
