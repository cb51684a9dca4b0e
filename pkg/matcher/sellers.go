package matcher

import (
	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// Sellers is one job's streaming state for Sellers' semi-global
// approximate matching of one [Template] (P. H. Sellers, "The theory and
// computation of evolutionary distances: pattern recognition", J.
// Algorithms 1 (1980) 359–373). It keeps one column of the
// (m+1)-row dynamic-programming matrix, row 0 all zeros (the occurrence may
// start at any window), and each cell's start window. Costs are as in the
// package doc; internally they are exact integers in units of 1/(6k)
// window. Make it with [NewSellers].
type Sellers struct {
	p     *Template
	col   []cell // D[0..m][n] for the n windows pushed
	n     int
	best  cell
	bestN int
}

// cell is one matrix entry: its cost and the start window of its cheapest
// alignment.
type cell struct {
	cost, start int
}

// NewSellers returns a matcher for p with no windows pushed.
func NewSellers(p *Template) *Sellers {
	s := &Sellers{p: p, col: make([]cell, p.m+1)}
	s.Reset()
	return s
}

// Reset forgets every pushed window.
func (s *Sellers) Reset() {
	unit := s.unit()
	for i := range s.col {
		s.col[i] = cell{cost: i * unit}
	}
	s.n = 0
	s.best, s.bestN = s.col[s.p.m], 0
}

// unit is the cost of one window in internal units.
func (s *Sellers) unit() int { return 6 * s.p.k }

// Push adds the job's newest window (a full metric.Count vector) and returns
// the least cost, in windows, of matching the whole pattern against a
// stretch of windows ending with this one. It takes O(m·k) time and does
// not allocate.
func (s *Sellers) Push(window []coding.Grade) (best float64) {
	var buf [metric.Count]coding.Grade
	g := s.p.pick(window, &buf)
	unit := s.unit()
	s.n++
	diag := s.col[0]
	s.col[0] = cell{start: s.n}
	for i := 1; i < len(s.col); i++ {
		left := s.col[i]
		c := better(cell{diag.cost + s.p.sub(i-1, g), diag.start},
			cell{s.col[i-1].cost + unit, s.col[i-1].start})
		s.col[i] = better(c, cell{left.cost + unit, left.start})
		diag = left
	}
	if last := s.col[s.p.m]; last.cost <= s.best.cost {
		s.best, s.bestN = last, s.n
	}
	return s.toCost(s.col[s.p.m].cost)
}

// better returns the cheaper of a and b, on equal cost the later start.
func better(a, b cell) cell {
	if b.cost < a.cost || (b.cost == a.cost && b.start > a.start) {
		return b
	}
	return a
}

// toCost converts internal units to windows.
func (s *Sellers) toCost(units int) float64 {
	return float64(units) / float64(s.unit())
}

// Last returns the cheapest occurrence ending at the newest window (before
// any push: the empty occurrence, cost m, score 0).
func (s *Sellers) Last() Match { return s.match(s.col[s.p.m], s.n) }

// Best returns the cheapest occurrence over every end since the last Reset;
// of equally cheap ends, the latest.
func (s *Sellers) Best() Match { return s.match(s.best, s.bestN) }

// match builds a Match from an internal cell.
func (s *Sellers) match(c cell, end int) Match {
	cost := s.toCost(c.cost)
	return Match{Cost: cost, Score: editScore(cost, s.p.m), Start: c.start, End: end}
}

// editScore is max(0, 1 − cost/m).
func editScore(cost float64, m int) float64 {
	return max(0, 1-cost/float64(m))
}

// SellersBatch computes, from the full matrix, what a fresh [Sellers] for p
// reports after each prefix of text: entry j is Last() after text[:j] was
// pushed, so the result has len(text)+1 entries. It allocates the
// (m+1)·(len(text)+1) matrix and is meant for tests and offline use.
func SellersBatch(p *Template, text [][]coding.Grade) []Match {
	d := newMatrix(p, len(text))
	var buf [metric.Count]coding.Grade
	unit := 6 * p.k
	for j := 1; j <= len(text); j++ {
		g := p.pick(text[j-1], &buf)
		for i := 1; i <= p.m; i++ {
			c := better(cell{d[i-1][j-1].cost + p.sub(i-1, g), d[i-1][j-1].start},
				cell{d[i-1][j].cost + unit, d[i-1][j].start})
			d[i][j] = better(c, cell{d[i][j-1].cost + unit, d[i][j-1].start})
		}
	}
	s := &Sellers{p: p}
	out := make([]Match, len(text)+1)
	for j := range out {
		out[j] = s.match(d[p.m][j], j)
	}
	return out
}

// newMatrix returns Sellers' matrix for n text windows with row 0 (free
// start) and column 0 (pattern deleted) filled in.
func newMatrix(p *Template, n int) [][]cell {
	d := make([][]cell, p.m+1)
	for i := range d {
		d[i] = make([]cell, n+1)
		d[i][0] = cell{cost: i * 6 * p.k}
	}
	for j := range d[0] {
		d[0][j] = cell{start: j}
	}
	return d
}
