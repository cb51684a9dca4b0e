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

// sum adds each counter as Stats.Raw would give it: a repeated name's later
// line replaces the count, and its sum when it has one.
func (p *plan) sum(counters []Counter, r *source.Reading) {
	p.gen++
	for i := range counters {
		c := &counters[i]
		t := p.targets[c.Name]
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
}
