package tracker

import (
	"sluice/pkg/grade"
	"sluice/pkg/level"
	"sluice/pkg/metric"
	"sluice/pkg/signature"
)

// Coding is what windows and live windows are coded against: the level cut
// points and the grade cuts of each metric. The aggregator replaces it
// whenever the baseline is recomputed (Tracker.SetCoding); windows already
// closed keep the coding they were closed with.
type Coding struct {
	Levels level.Cuts
	Grades [metric.Count]grade.Cuts
}

// SeedCoding is the coding before the baseline has learned anything: the
// seed cut points, and grade cuts from grade.Seed.
func SeedCoding(cuts level.Cuts) Coding {
	c := Coding{Levels: cuts}
	for i, cut := range cuts {
		c.Grades[i] = grade.Seed(level.Floor(metric.ID(i)), cut.Elevated, cut.Critical)
	}
	return c
}

// code returns the levels and grades of rates.
func (c *Coding) code(rates metric.Rates) (level.Levels, signature.Grades) {
	var lv level.Levels
	var gr signature.Grades
	for i, r := range rates {
		id := metric.ID(i)
		lv[i] = c.Levels.Classify(id, r)
		gr[i] = c.Grades[i].Code(r, level.Idle(id, r))
	}
	return lv, gr
}
