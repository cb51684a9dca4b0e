package matcher

import (
	"math"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// Shape is one job's streaming state for the Euclidean distance between a
// [Template] and the job's last m windows, grades taken as numbers:
// dist = sqrt(Σ_i Σ_t (pattern[i][t] − job[n−m+i][t])²) over the pattern's
// metrics, score = 1 − dist/(6·sqrt(m·k)). It keeps a ring of the last m
// windows' k grades. Make it with [NewShape].
type Shape struct {
	p      *Template
	ring   []coding.Grade // m·k grades; window slot head is the oldest
	head   int
	n      int
	lastSq int // squared distance at the newest window, once n ≥ m
	bestSq int
	bestN  int
}

// NewShape returns a matcher for p with no windows pushed.
func NewShape(p *Template) *Shape {
	return &Shape{p: p, ring: make([]coding.Grade, p.m*p.k)}
}

// Reset forgets every pushed window.
func (s *Shape) Reset() {
	s.head, s.n, s.lastSq, s.bestSq, s.bestN = 0, 0, 0, 0, 0
}

// Push adds the job's newest window (a full metric.Count vector) and returns
// the Euclidean distance of the pattern to the last m windows; ok is false,
// and dist 0, until m windows have been pushed. It takes O(m·k) time and
// does not allocate.
func (s *Shape) Push(window []coding.Grade) (dist float64, ok bool) {
	var buf [metric.Count]coding.Grade
	k := s.p.k
	copy(s.ring[s.head*k:(s.head+1)*k], s.p.pick(window, &buf))
	s.head++
	if s.head == s.p.m {
		s.head = 0
	}
	s.n++
	if s.n < s.p.m {
		return 0, false
	}
	s.lastSq = s.squared()
	if s.bestN == 0 || s.lastSq <= s.bestSq {
		s.bestSq, s.bestN = s.lastSq, s.n
	}
	return math.Sqrt(float64(s.lastSq)), true
}

// squared returns the squared distance between the pattern and the ring,
// oldest ring window against pattern window 0.
func (s *Shape) squared() int {
	k := s.p.k
	older, newer := s.ring[s.head*k:], s.ring[:s.head*k]
	return sqDiff(s.p.grades[:len(older)], older) + sqDiff(s.p.grades[len(older):], newer)
}

// sqDiff returns Σ (a[i] − b[i])² over equal-length a and b.
func sqDiff(a, b []coding.Grade) int {
	b = b[:len(a)]
	d := 0
	for i, x := range a {
		v := int(x) - int(b[i])
		d += v * v
	}
	return d
}

// Last returns the alignment with the last m windows; ok is false until m
// windows have been pushed.
func (s *Shape) Last() (m Match, ok bool) {
	if s.n < s.p.m {
		return Match{}, false
	}
	return s.match(s.lastSq, s.n), true
}

// Best returns the closest alignment since the last Reset, of equally close
// ones the latest; ok is false until m windows have been pushed.
func (s *Shape) Best() (m Match, ok bool) {
	if s.bestN == 0 {
		return Match{}, false
	}
	return s.match(s.bestSq, s.bestN), true
}

// match builds a Match ending after window end from a squared distance.
func (s *Shape) match(sq, end int) Match {
	dist := math.Sqrt(float64(sq))
	maxDist := 6 * math.Sqrt(float64(s.p.m*s.p.k))
	return Match{Cost: dist, Score: max(0, 1-dist/maxDist), Start: end - s.p.m, End: end}
}
