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

// blockDefault maps the block device source's counters (pkg/source/diskstats,
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

// defaults are the default rows per source kind.
var defaults = map[string]map[string]metric.ID{
	"lustre": lustreDefault,
	"block":  blockDefault,
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

// Apply adds the mapped counters of one source kind's deltas into v.
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
