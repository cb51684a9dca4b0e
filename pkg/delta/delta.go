// Package delta turns successive readings of cumulative counters into
// per-interval differences that are never negative.
//
// # Basics
//
// The agent first maps each instance's raw counters onto the project's
// metrics (summing the counters each metric takes), then hands the sums to
// a [Differ], which remembers the previous sums of every instance (by
// reading key). [Differ.Update] returns, per instance, the increase of
// each metric since the previous reading. A changed epoch (for Lustre, a
// new stats start_time) or any metric going down is a reset of the whole
// instance: the delta is then the new value, which is what accumulated
// since the reset.
//
// # Caveats
//
// The first reading of an instance only sets the base and yields no delta:
// an instance seen for the first time may have counted for days, and
// reporting that as one interval would be a spike. The cost is that I/O done
// between a remount and the first reading of the new instance is not seen.
//
// Working on metric sums rather than raw counters is what keeps the agent
// cheap (a node has hundreds of raw counters and twelve metrics). The price
// is that a reset is seen only when some metric's sum goes down; the
// sources reset whole instances at once (writing to a Lustre stats file
// clears every counter in it), so the sums fall with them. The only true
// wrap-around the sources have is handled by the source (the block
// source's millisecond fields), not here.
package delta

import "sluice/pkg/metric"

// Instance is one source instance's mapped counters at one reading.
type Instance struct {
	Key    string        // the reading key
	Epoch  string        // changes when the instance's counters restart
	Values metric.Values // cumulative sums per metric
}

// Delta is the increase of one instance's metrics over one interval.
type Delta struct {
	Key    string
	Values metric.Values
	// Reset reports that the instance's counters restarted during the
	// interval (a metric went down or the epoch changed).
	Reset bool
}

type base struct {
	epoch  string
	values metric.Values
	gen    uint64 // the Update that last saw this instance
}

// Differ keeps the previous sums per instance, to take each new reading's
// difference from them. It is not safe for concurrent use; the agent loop
// owns it.
type Differ struct {
	prev map[string]*base
	gen  uint64
}

// NewDiffer returns a Differ that has seen no instance yet.
func NewDiffer() *Differ {
	return &Differ{prev: make(map[string]*base)}
}

// Update records the instances' sums and returns one Delta per instance
// that had a previous reading. Instances absent from insts are forgotten,
// so an instance that comes back later starts afresh (a remount).
func (d *Differ) Update(insts []Instance) []Delta {
	d.gen++
	out := make([]Delta, 0, len(insts))
	for i := range insts {
		in := &insts[i]
		b, ok := d.prev[in.Key]
		if !ok {
			b = &base{}
			d.prev[in.Key] = b
		} else {
			out = append(out, b.diff(in))
		}
		b.gen, b.epoch, b.values = d.gen, in.Epoch, in.Values
	}
	for k, b := range d.prev {
		if b.gen != d.gen {
			delete(d.prev, k)
		}
	}
	return out
}

// Known reports how many instances have a base reading.
func (d *Differ) Known() int { return len(d.prev) }

func (b *base) diff(in *Instance) Delta {
	d := Delta{Key: in.Key, Values: in.Values, Reset: b.epoch != in.Epoch}
	for i, v := range in.Values {
		if v < b.values[i] {
			d.Reset = true
		}
	}
	if !d.Reset {
		for i := range d.Values {
			d.Values[i] -= b.values[i]
		}
	}
	return d
}
