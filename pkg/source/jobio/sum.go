package jobio

import (
	"sluice/pkg/metric"
	"sluice/pkg/source"
)

// SumWith makes the source sum each job's counters into metrics as it
// reads, by the mapping row of source kind "jobio" (see source.Summer): the
// same sums as mapping.Table.Apply over the counter map, without building
// it.
func (s *Source) SumWith(row map[string]metric.ID) {
	var p plan
	for i, name := range counterNames {
		p[i] = source.SlotOf(row, name)
	}
	s.plan = &p
}

// plan is the metric, if any, of each counter in counterNames order.
type plan [nCounters]source.Slot

func (p *plan) sum(totals [nCounters]uint64, r *source.Reading) {
	for i, v := range totals {
		p[i].Add(r, v)
	}
}
