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
	for _, st := range s.state {
		st.slots = nil // the old plan's slots
	}
}

// plan is the metric, if any, of each bytes and events field and of each
// operation by its name as printed.
type plan struct {
	bytes  [NumBytes]source.Slot
	events [NumEvents]source.Slot
	ops    map[string]source.Slot
}

// opSlot is the slot of the procedure name at one position of a mount's
// per-op section.
type opSlot struct {
	name string
	slot source.Slot
}

// sum adds m's counters. slots are the slots of m's per-op lines by
// position from the last read; a line whose name is the one at its
// position (the same string, so the compare is a pointer check) skips the
// map lookup. sum returns the slots of this read. Ops holds each name once,
// so no line's count replaces another's.
func (p *plan) sum(m *Mount, slots []opSlot, r *source.Reading) []opSlot {
	for i, v := range m.Bytes {
		p.bytes[i].Add(r, v)
	}
	if m.HasEvents {
		for i, v := range m.Events {
			p.events[i].Add(r, v)
		}
	}
	slots = slots[:min(len(slots), len(m.Ops))]
	for i := range m.Ops {
		op := &m.Ops[i]
		if i == len(slots) {
			slots = append(slots, opSlot{op.Name, p.ops[op.Name]})
		} else if slots[i].name != op.Name {
			slots[i] = opSlot{op.Name, p.ops[op.Name]}
		}
		slots[i].slot.Add(r, op.Ops)
	}
	return slots
}
