package block

import (
	"sluice/pkg/metric"
	"sluice/pkg/source"
)

// SumWith makes the source sum each device's counters into metrics as it
// reads, by the mapping row of source kind "block" (see source.Summer): the
// same sums as mapping.Table.Apply over the counter map, without building
// it.
func (s *Source) SumWith(row map[string]metric.ID) {
	var p plan
	for i, name := range counterNames {
		p.field[i] = source.SlotOf(row, name)
	}
	p.field[idxInFlight].OK = false // a gauge, never a counter
	p.readBytes = source.SlotOf(row, readBytes)
	p.writeBytes = source.SlotOf(row, writeBytes)
	s.plan = &p
}

// plan is the metric, if any, of each field and of the two byte counters.
type plan struct {
	field                 [numValues]source.Slot
	readBytes, writeBytes source.Slot
}

func (p *plan) sum(ds *devState, r *source.Reading) {
	for i := range ds.nvals {
		p.field[i].Add(r, ds.value[i])
	}
	p.readBytes.Add(r, sectorBytes(ds.value[idxSectorsRead]))
	p.writeBytes.Add(r, sectorBytes(ds.value[idxSectorsWritten]))
}
