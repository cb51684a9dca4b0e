package coding

import (
	"fmt"
	"math"
	"strings"
)

// Grade is one window's code for one metric.
type Grade uint8

// The named grades. Grades 1 to 6 are ordinal; see the package doc.
const (
	GradeIdle Grade = 0
	GradeLow  Grade = 1 // at or below the median of non-idle windows
	GradeTop  Grade = 6 // above the critical quantile
	// GradeCount is the number of grades.
	GradeCount = 7
)

// defaultQuantiles are the quantiles of the non-idle baseline that separate grades
// 1..6 when the level quantiles are the defaults (p99, p99.9).
var defaultQuantiles = [5]float64{0.5, 0.75, 0.9, 0.99, 0.999}

// GradeQuantiles returns the five quantiles that separate grades 1 to 6, with the
// top two replaced by the elevated and critical level quantiles in force.
func GradeQuantiles(elevated, critical float64) [5]float64 {
	q := defaultQuantiles
	q[3], q[4] = elevated, critical
	return q
}

// GradeCuts are the five rates (one metric, ascending) that separate grades 1..6.
type GradeCuts [5]float64

// Code returns the grade of rate against cuts; idle says whether the rate is
// below the metric's idle floor.
func (c GradeCuts) Code(rate float64, idle bool) Grade {
	if idle {
		return GradeIdle
	}
	g := GradeLow
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
	if g >= GradeCount {
		return fmt.Sprintf("grade(%d)", uint8(g))
	}
	return string(g.Byte())
}

// ParseGrades reads a string of grade digits, e.g. "0012566"; spaces are ignored
// so long sequences can be grouped for reading.
func ParseGrades(s string) ([]Grade, error) {
	out := make([]Grade, 0, len(s))
	for i, r := range s {
		switch {
		case r == ' ':
			continue
		case r >= '0' && r < '0'+GradeCount:
			out = append(out, Grade(r-'0'))
		default:
			return nil, fmt.Errorf("grade string %q: character %d is %q, want a digit 0-%d", s, i+1, r, GradeCount-1)
		}
	}
	return out, nil
}

// FormatGrades writes grades as a digit string, the inverse of ParseGrades.
func FormatGrades(gs []Grade) string {
	var b strings.Builder
	b.Grow(len(gs))
	for _, g := range gs {
		b.WriteByte(g.Byte())
	}
	return b.String()
}

// SeedGradeCuts returns grade cuts for a metric the baseline has not learned yet:
// the elevated and critical seed cut points on top, and below them three
// cuts that split the span from the idle floor to the elevated cut evenly
// on a log scale, standing in for p50, p75 and p90 (common practice: I/O
// rates spread over orders of magnitude).
func SeedGradeCuts(floor, elevated, critical float64) GradeCuts {
	var c GradeCuts
	for i := range 3 {
		c[i] = floor * math.Pow(elevated/floor, float64(i+1)/4)
	}
	c[3], c[4] = elevated, critical
	return c
}
