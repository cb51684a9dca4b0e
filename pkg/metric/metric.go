// Package metric names the project's I/O quantities: the fixed set of
// metrics every source's raw counters are mapped onto.
//
// # Basics
//
// A metric is identified by an [ID], a small integer that is also its code
// on the wire. [Values] holds one non-negative delta per metric for one
// interval; [Rates] holds the same quantities divided by seconds.
//
// # Caveats
//
// IDs are part of wire format v1: a new metric is appended at the end and
// never renumbered, so that old agents and new aggregators agree.
package metric

import "fmt"

// ID identifies one metric. Its numeric value is its wire code.
type ID uint8

// The metrics, in wire order. Byte metrics count bytes; every other metric
// counts operations.
const (
	ReadBytes   ID = iota // bytes returned by read calls
	WriteBytes            // bytes accepted by write calls
	ReadOps               // read calls
	WriteOps              // write calls
	Opens                 // file opens
	Closes                // file closes
	Creates               // files, directories, links and nodes created
	Removes               // unlinks and directory removals
	StatOps               // attribute and directory reads (getattr, getxattr, statfs, readdir)
	MetaUpdates           // attribute and namespace changes (setattr, rename, setxattr, truncate)
	Syncs                 // fsync and similar flushes to stable storage
	OtherOps              // every other client operation the mapping counts (ioctl, flock, seek)
	Count                 // number of metrics; not a metric
)

var names = [Count]string{
	ReadBytes:   "read_bytes",
	WriteBytes:  "write_bytes",
	ReadOps:     "read_ops",
	WriteOps:    "write_ops",
	Opens:       "opens",
	Closes:      "closes",
	Creates:     "creates",
	Removes:     "removes",
	StatOps:     "stat_ops",
	MetaUpdates: "meta_updates",
	Syncs:       "syncs",
	OtherOps:    "other_ops",
}

// All lists every metric in wire order.
func All() []ID {
	ids := make([]ID, Count)
	for i := range ids {
		ids[i] = ID(i)
	}
	return ids
}

// String returns the metric's name as used in configuration, the API and
// Prometheus labels.
func (id ID) String() string {
	if id < Count {
		return names[id]
	}
	return fmt.Sprintf("metric(%d)", uint8(id))
}

// Valid reports whether id names a metric.
func (id ID) Valid() bool { return id < Count }

// IsBytes reports whether the metric counts bytes rather than operations.
func (id ID) IsBytes() bool { return id == ReadBytes || id == WriteBytes }

// IsMetadata reports whether the metric counts metadata operations, the
// ones served by a parallel filesystem's metadata servers.
func (id ID) IsMetadata() bool {
	switch id {
	case Opens, Closes, Creates, Removes, StatOps, MetaUpdates:
		return true
	}
	return false
}

// Unit returns the unit of the metric's rate: "bytes/s" or "ops/s".
func (id ID) Unit() string {
	if id.IsBytes() {
		return "bytes/s"
	}
	return "ops/s"
}

// Parse returns the metric with the given name.
func Parse(name string) (ID, error) {
	for i, n := range names {
		if n == name {
			return ID(i), nil
		}
	}
	return 0, fmt.Errorf("unknown metric %q", name)
}

// Values holds one delta per metric over one interval.
type Values [Count]uint64

// Add adds o to v, metric by metric.
func (v *Values) Add(o Values) {
	for i := range v {
		v[i] += o[i]
	}
}

// IsZero reports whether every metric is zero.
func (v Values) IsZero() bool { return v == Values{} }

// Rates holds one rate per metric: bytes or operations per second.
type Rates [Count]float64

// RatesOf divides v by seconds; zero seconds gives zero rates.
func RatesOf(v Values, seconds float64) Rates {
	var r Rates
	if seconds <= 0 {
		return r
	}
	for i, x := range v {
		r[i] = float64(x) / seconds
	}
	return r
}

// Set is a set of metrics, one bit per ID.
type Set uint32

// Add puts id in the set.
func (s *Set) Add(id ID) { *s |= 1 << id }

// Has reports whether id is in the set.
func (s Set) Has(id ID) bool { return s&(1<<id) != 0 }

// IDs lists the set's metrics in wire order.
func (s Set) IDs() []ID {
	var ids []ID
	for id := range Count {
		if s.Has(id) {
			ids = append(ids, id)
		}
	}
	return ids
}
