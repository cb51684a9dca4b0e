// Package delta turns successive readings of cumulative counters into
// per-interval differences that are never negative.
//
// # Basics
//
// A [Tracker] remembers the previous reading of every source instance (by
// reading key). [Tracker.Update] returns, per instance, the increase of each
// counter since the previous reading. A counter that went down, a changed
// epoch (for Lustre, a new stats start_time) or a counter line that vanished
// and came back are resets: the delta is then the new value, which is what
// accumulated since the reset. A reset applies to the whole instance.
//
// # Caveats
//
// The first reading of an instance only sets the base and yields no delta:
// an instance seen for the first time may have counted for days, and
// reporting that as one interval would be a spike. The cost is that I/O done
// between a remount and the first reading of the new instance is not seen.
// The only true wrap-around the sources have is handled by the source
// (diskstats millisecond fields), not here.
package delta

import "sluice/pkg/source"

// Delta is the increase of one instance's counters over one interval.
type Delta struct {
	// Key is the reading key of the instance.
	Key string
	// Counters maps raw counter names to their non-negative increase.
	Counters map[string]uint64
	// Reset reports that the instance's counters restarted during the
	// interval (a value went down or the epoch changed).
	Reset bool
}

type base struct {
	epoch    string
	counters map[string]uint64
	out      map[string]uint64 // the last Delta's counters, reused
	gen      uint64            // the Update that last saw this instance
}

// Tracker keeps the previous reading per instance. It is not safe for
// concurrent use; the agent loop owns it.
type Tracker struct {
	prev map[string]*base
	gen  uint64
}

// NewTracker returns an empty tracker.
func NewTracker() *Tracker {
	return &Tracker{prev: make(map[string]*base)}
}

// Update records readings and returns one Delta per instance that had a
// previous reading. Instances absent from readings are forgotten, so an
// instance that comes back later starts afresh (a remount). The returned
// Counters maps are reused: they are valid until the next Update.
func (t *Tracker) Update(readings []source.Reading) []Delta {
	t.gen++
	out := make([]Delta, 0, len(readings))
	for _, r := range readings {
		b, ok := t.prev[r.Key]
		if !ok {
			b = &base{counters: make(map[string]uint64, len(r.Counters)), out: make(map[string]uint64, len(r.Counters))}
			t.prev[r.Key] = b
		} else {
			out = append(out, b.diff(r))
		}
		b.gen = t.gen
		b.epoch = r.Epoch
		clear(b.counters)
		for k, v := range r.Counters {
			b.counters[k] = v
		}
	}
	for k, b := range t.prev {
		if b.gen != t.gen {
			delete(t.prev, k)
		}
	}
	return out
}

// Known reports how many instances have a base reading.
func (t *Tracker) Known() int { return len(t.prev) }

func (b *base) diff(r source.Reading) Delta {
	clear(b.out)
	d := Delta{Key: r.Key, Counters: b.out, Reset: isReset(b, r)}
	for name, v := range r.Counters {
		if d.Reset {
			d.Counters[name] = v
			continue
		}
		d.Counters[name] = v - b.counters[name] // absent before means zero
	}
	return d
}

// isReset reports whether the instance's counters restarted since b. The
// sources reset a whole instance at once (writing to a Lustre stats file
// clears every counter in it), so one counter going down means all did.
func isReset(b *base, r source.Reading) bool {
	if b.epoch != r.Epoch {
		return true
	}
	for name, old := range b.counters {
		if r.Counters[name] < old { // an absent counter is zero
			return true
		}
	}
	return false
}
