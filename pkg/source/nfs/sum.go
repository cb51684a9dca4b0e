package nfs

import (
	"strings"

	"sluice/pkg/metric"
	"sluice/pkg/source"
)

// SumWith makes the source sum each mount's counters into metrics as it
// reads, by the mapping row of source kind "nfs" (see source.Summer): the
// same sums as mapping.Table.Apply over Mount.Raw, without building it.
func (s *Source) SumWith(row map[string]metric.ID) {
	p := &plan{ops: map[string]slot{}}
	for i, key := range bytesKeys {
		p.bytes[i].id, p.bytes[i].ok = row[key]
	}
	for i, key := range eventKeys {
		p.events[i].id, p.events[i].ok = row[key]
	}
	for key, id := range row {
		if name, ok := strings.CutPrefix(key, "op."); ok {
			p.ops[name] = slot{id, true}
		}
	}
	s.plan = p
}

// plan is the metric, if any, of each bytes and events field and of each
// operation by its name as printed.
type plan struct {
	bytes  [NumBytes]slot
	events [NumEvents]slot
	ops    map[string]slot
}

type slot struct {
	id metric.ID
	ok bool
}

func (sl slot) add(r *source.Reading, v uint64) {
	if sl.ok {
		r.Sums[sl.id] += v
		r.Present.Add(sl.id)
	}
}

func (p *plan) sum(m *Mount, r *source.Reading) {
	for i, v := range m.Bytes {
		p.bytes[i].add(r, v)
	}
	if m.HasEvents {
		for i, v := range m.Events {
			p.events[i].add(r, v)
		}
	}
	for name, op := range m.Ops {
		p.ops[name].add(r, op.Ops)
	}
}
