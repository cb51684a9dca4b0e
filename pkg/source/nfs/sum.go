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
	p := &plan{ops: map[string]source.Slot{}}
	for i, key := range bytesKeys {
		p.bytes[i] = source.SlotOf(row, key)
	}
	for i, key := range eventKeys {
		p.events[i] = source.SlotOf(row, key)
	}
	for key, id := range row {
		if name, ok := strings.CutPrefix(key, "op."); ok {
			p.ops[name] = source.Slot{ID: id, OK: true}
		}
	}
	s.plan = p
}

// plan is the metric, if any, of each bytes and events field and of each
// operation by its name as printed.
type plan struct {
	bytes  [NumBytes]source.Slot
	events [NumEvents]source.Slot
	ops    map[string]source.Slot
}

func (p *plan) sum(m *Mount, r *source.Reading) {
	for i, v := range m.Bytes {
		p.bytes[i].Add(r, v)
	}
	if m.HasEvents {
		for i, v := range m.Events {
			p.events[i].Add(r, v)
		}
	}
	for name, op := range m.Ops {
		p.ops[name].Add(r, op.Ops)
	}
}
