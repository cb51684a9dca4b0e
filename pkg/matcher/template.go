package matcher

import (
	"errors"
	"fmt"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// ErrTemplate is wrapped by every error NewTemplate returns.
var ErrTemplate = errors.New("matcher: invalid example")

// Template is an immutable example example signature: m windows over k metrics.
// Build it once with [NewTemplate] and share it between all jobs; matchers
// keep their per-job state apart ([NewSellers], [NewShape], [Template.KS]).
type Template struct {
	metrics []int
	grades  []coding.Grade // m·k, window after window, metrics in pattern order
	hist    []Histogram    // per pattern metric, over the m windows
	m, k    int
}

// NewTemplate builds a pattern from its metric indexes (distinct, each below
// metric.Count) and its windows, oldest first; windows[i][t] is the grade of
// metric metrics[t] in window i. It copies its arguments.
func NewTemplate(metrics []int, windows [][]coding.Grade) (*Template, error) {
	if err := checkMetrics(metrics); err != nil {
		return nil, err
	}
	if len(windows) == 0 {
		return nil, fmt.Errorf("%w: no windows", ErrTemplate)
	}
	p := &Template{
		metrics: append([]int(nil), metrics...),
		grades:  make([]coding.Grade, 0, len(windows)*len(metrics)),
		hist:    make([]Histogram, len(metrics)),
		m:       len(windows),
		k:       len(metrics),
	}
	for i, w := range windows {
		if err := p.addWindow(i, w); err != nil {
			return nil, err
		}
	}
	return p, nil
}

// checkMetrics validates a pattern's metric indexes.
func checkMetrics(metrics []int) error {
	if len(metrics) == 0 {
		return fmt.Errorf("%w: no metrics", ErrTemplate)
	}
	var seen [metric.Count]bool
	for _, mi := range metrics {
		if mi < 0 || mi >= int(metric.Count) {
			return fmt.Errorf("%w: metric index %d, want 0..%d", ErrTemplate, mi, metric.Count-1)
		}
		if seen[mi] {
			return fmt.Errorf("%w: metric index %d given twice", ErrTemplate, mi)
		}
		seen[mi] = true
	}
	return nil
}

// addWindow appends window i, checking its width and grades.
func (p *Template) addWindow(i int, w []coding.Grade) error {
	if len(w) != p.k {
		return fmt.Errorf("%w: window %d has %d grades, want one per metric (%d)", ErrTemplate, i, len(w), p.k)
	}
	for t, g := range w {
		if g >= coding.GradeCount {
			return fmt.Errorf("%w: window %d metric %d: %v is not a grade", ErrTemplate, i, p.metrics[t], g)
		}
		p.hist[t][g]++
	}
	p.grades = append(p.grades, w...)
	return nil
}

// Len returns m, the number of windows.
func (p *Template) Len() int { return p.m }

// Metrics returns a copy of the pattern's metric indexes, in window order.
func (p *Template) Metrics() []int { return append([]int(nil), p.metrics...) }

// pick copies the pattern's metrics of a full job window into dst and
// returns the k grades.
func (p *Template) pick(window []coding.Grade, dst *[metric.Count]coding.Grade) []coding.Grade {
	for t, mi := range p.metrics {
		dst[t] = window[mi]
	}
	return dst[:p.k]
}

// sub returns Σ_t |pattern[i][t] − g[t]|, the substitution cost of pattern
// window i against g in units of 1/(6k) window.
func (p *Template) sub(i int, g []coding.Grade) int {
	row := p.grades[i*p.k : (i+1)*p.k]
	g = g[:len(row)]
	d := 0
	for t, a := range row {
		d += absDiff(a, g[t])
	}
	return d
}

// absDiff returns |a − b|, without a branch: grades are random enough
// for a branch to be mispredicted half the time.
func absDiff(a, b coding.Grade) int {
	v := int(a) - int(b)
	sign := v >> 63
	return (v ^ sign) - sign
}

// Match is an occurrence of a pattern in a job's windows, counted from 0 at
// the first window pushed since the matcher was made or Reset.
type Match struct {
	// Cost is the matcher's dissimilarity: the edit cost in windows for
	// Sellers, the Euclidean distance in grades for Shape.
	Cost float64
	// Score is in [0, 1], 1 for an exact occurrence; see the package doc.
	Score float64
	// Start is the index of the occurrence's first window ("since when");
	// Start == End for an empty Sellers occurrence.
	Start int
	// End is one past the index of its last window: the number of windows
	// pushed when it was seen.
	End int
}
