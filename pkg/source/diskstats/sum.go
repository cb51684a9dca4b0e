package diskstats

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
		p.field[i].id, p.field[i].ok = row[name]
	}
	p.field[idxInFlight].ok = false // a gauge, never a counter
	p.readBytes.id, p.readBytes.ok = row[readBytes]
	p.writeBytes.id, p.writeBytes.ok = row[writeBytes]
	s.plan = &p
}

// plan is the metric, if any, of each field and of the two byte counters.
type plan struct {
	field                 [numValues]slot
	readBytes, writeBytes slot
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

func (p *plan) sum(ds *devState, r *source.Reading) {
	for i := range ds.nvals {
		p.field[i].add(r, ds.value[i])
	}
	p.readBytes.add(r, sectorBytes(ds.value[idxSectorsRead]))
	p.writeBytes.add(r, sectorBytes(ds.value[idxSectorsWritten]))
}
