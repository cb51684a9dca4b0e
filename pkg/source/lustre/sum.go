package lustre

import (
	"strings"

	"sluice/pkg/metric"
	"sluice/pkg/source"
)

// SumWith makes the source sum its counters into metrics as it reads, by
// the mapping row of source kind "lustre" (see source.Summer). The sums are
// those of mapping.Table.Apply over Stats.Raw, including "the later line
// wins" for a name that repeats.
func (s *Source) SumWith(row map[string]metric.ID) {
	p := &plan{targets: make(map[string]*target, len(row))}
	for key, id := range row {
		name, isSum := strings.CutSuffix(key, ".sum")
		t := p.targets[name]
		if t == nil {
			t = &target{}
			p.targets[name] = t
		}
		if isSum {
			t.sum, t.hasSum = id, true
		} else {
			t.count, t.hasCount = id, true
		}
	}
	s.plan = p
	for _, m := range s.mounts {
		m.slots = nil // the old plan's targets
	}
}

// plan says where each counter line goes. One map lookup per line replaces
// building a counter map and looking every entry up again.
type plan struct {
	targets map[string]*target
	gen     uint64 // reads summed so far
}

// target is where one counter's sample count and size sum are added, and
// what it added in the current read (to take back when its name repeats).
type target struct {
	count, sum       metric.ID
	hasCount, hasSum bool
	gen              uint64 // read in which samples and total were added
	samples, total   uint64
	totalGen         uint64 // read in which total was added
}

// slot is the target, nil for none, of the counter name at one position
// of a mount's file.
type slot struct {
	name string
	t    *target
}

// sum adds each counter as Stats.Raw would give it: a repeated name's later
// line replaces the count, and its sum when it has one. slots are the
// mount's targets by position from its last read; a counter whose name is
// the one at its position (usually the same string, so the compare is a
// pointer check) skips the map lookup. sum returns the slots of this read.
func (p *plan) sum(counters []Counter, slots []slot, r *source.Reading) []slot {
	p.gen++
	slots = slots[:min(len(slots), len(counters))]
	for i := range counters {
		c := &counters[i]
		var t *target
		if i < len(slots) && slots[i].name == c.Name {
			t = slots[i].t
		} else {
			t = p.targets[c.Name]
			if i < len(slots) {
				slots[i] = slot{c.Name, t}
			} else {
				slots = append(slots, slot{c.Name, t})
			}
		}
		if t == nil {
			continue
		}
		if t.hasCount {
			if t.gen == p.gen {
				r.Sums[t.count] -= t.samples
			}
			r.Sums[t.count] += c.Samples
			r.Present.Add(t.count)
		}
		t.gen, t.samples = p.gen, c.Samples
		if !t.hasSum || c.Fields < 3 || !isSizeUnit(c.Unit) {
			continue
		}
		if t.totalGen == p.gen {
			r.Sums[t.sum] -= t.total
		}
		r.Sums[t.sum] += c.Sum
		r.Present.Add(t.sum)
		t.totalGen, t.total = p.gen, c.Sum
	}
	return slots
}
