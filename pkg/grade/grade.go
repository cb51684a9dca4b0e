// Package grade codes a per-node rate into a small ordinal grade against a
// metric's baseline quantiles. Grades are the letters signatures are written
// in and what similarity compares.
//
// # Basics
//
// There are seven grades. [Idle] (0) is a window with no activity worth the
// name (below the metric's idle floor, see level.Idle); grades 1 to 6 split
// the centre's non-idle windows at five quantiles of the baseline:
//
//	grade  rate r against the baseline's non-idle windows
//	0      idle
//	1      r <= p50
//	2      p50  < r <= p75
//	3      p75  < r <= p90
//	4      p90  < r <= p99     (the elevated quantile)
//	5      p99  < r <= p99.9   (elevated)
//	6      r > p99.9           (critical)
//
// The two top cuts are the level quantiles in force, so grades 5 and 6 mean
// exactly "elevated" and "critical" and a signature can be read as levels.
// The bulk of the distribution gets coarse grades (half, quarter, tenth)
// because jobs that differ inside it are alike for every purpose staff care
// about; resolution is spent in the tail, where problems live.
//
// # Caveats
//
// Grades are site-relative and unit-free: grade 6 means "rarer than one
// window in a thousand at this centre", not any fixed rate. A pattern
// written in grades therefore moves between centres, but two centres'
// grades for the same rate differ.
package grade

import (
	"fmt"
	"math"
	"strings"
)

// Grade is one window's code for one metric.
type Grade uint8

// The named grades. Grades 1 to 6 are ordinal; see the package doc.
const (
	Idle Grade = 0
	Low  Grade = 1 // at or below the median of non-idle windows
	Top  Grade = 6 // above the critical quantile
	// Count is the number of grades.
	Count = 7
)

// Quantiles are the quantiles of the non-idle baseline that separate grades
// 1..6 when the level quantiles are the defaults (p99, p99.9).
var defaultQuantiles = [5]float64{0.5, 0.75, 0.9, 0.99, 0.999}

// Quantiles returns the five quantiles that separate grades 1 to 6, with the
// top two replaced by the elevated and critical level quantiles in force.
func Quantiles(elevated, critical float64) [5]float64 {
	q := defaultQuantiles
	q[3], q[4] = elevated, critical
	return q
}

// Cuts are the five rates (one metric, ascending) that separate grades 1..6.
type Cuts [5]float64

// Code returns the grade of rate against cuts; idle says whether the rate is
// below the metric's idle floor.
func (c Cuts) Code(rate float64, idle bool) Grade {
	if idle {
		return Idle
	}
	g := Low
	for _, cut := range c {
		if rate <= cut {
			return g
		}
		g++
	}
	return g
}

// Byte returns the grade's one-character form, '0'..'6', used in the
// compact text of signatures and patterns.
func (g Grade) Byte() byte { return '0' + byte(g) }

// String returns the grade as a digit.
func (g Grade) String() string {
	if g >= Count {
		return fmt.Sprintf("grade(%d)", uint8(g))
	}
	return string(g.Byte())
}

// Parse reads a string of grade digits, e.g. "0012566"; spaces are ignored
// so long sequences can be grouped for reading.
func Parse(s string) ([]Grade, error) {
	out := make([]Grade, 0, len(s))
	for i, r := range s {
		switch {
		case r == ' ':
			continue
		case r >= '0' && r < '0'+Count:
			out = append(out, Grade(r-'0'))
		default:
			return nil, fmt.Errorf("grade string %q: character %d is %q, want a digit 0-%d", s, i+1, r, Count-1)
		}
	}
	return out, nil
}

// Format writes grades as a digit string, the inverse of Parse.
func Format(gs []Grade) string {
	var b strings.Builder
	b.Grow(len(gs))
	for _, g := range gs {
		b.WriteByte(g.Byte())
	}
	return b.String()
}

// Seed returns grade cuts for a metric the baseline has not learned yet:
// the elevated and critical seed cut points on top, and below them three
// cuts that split the span from the idle floor to the elevated cut evenly
// on a log scale, standing in for p50, p75 and p90 (common practice: I/O
// rates spread over orders of magnitude).
func Seed(floor, elevated, critical float64) Cuts {
	var c Cuts
	for i := range 3 {
		c[i] = floor * math.Pow(elevated/floor, float64(i+1)/4)
	}
	c[3], c[4] = elevated, critical
	return c
}
