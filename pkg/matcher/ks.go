package matcher

import (
	"errors"
	"math"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// Histogram counts one metric's grades: entry g is the number of windows
// of grade g.
type Histogram [coding.GradeCount]uint32

// HistogramOf counts gs.
func HistogramOf(gs []coding.Grade) Histogram {
	var h Histogram
	for _, g := range gs {
		h[g]++
	}
	return h
}

// N returns the number of grades counted.
func (h *Histogram) N() int {
	n := 0
	for _, c := range h {
		n += int(c)
	}
	return n
}

// KS returns the two-sample Kolmogorov–Smirnov statistic
// D = sup_x |F_a(x) − F_b(x)| of the empirical distributions a and b count.
// Grades are discrete, so the supremum is taken at the seven grades, in
// O(7). As in gonum's stat.KolmogorovSmirnov, D is 0 when both are empty
// and 1 when only one is.
func KS(a, b *Histogram) float64 {
	na, nb := a.N(), b.N()
	if na == 0 || nb == 0 {
		if na == nb {
			return 0
		}
		return 1
	}
	var d float64
	ca, cb := 0, 0
	for g := range a {
		ca += int(a[g])
		cb += int(b[g])
		d = max(d, math.Abs(float64(ca)/float64(na)-float64(cb)/float64(nb)))
	}
	return d
}

// KS returns the pattern's Kolmogorov–Smirnov statistic against a job: the
// largest, over the pattern's metrics, of KS between the grades of the
// pattern's m windows and the windows h counts. It does not allocate.
func (p *Template) KS(h *Histograms) float64 {
	var d float64
	for t, mi := range p.metrics {
		d = max(d, KS(&p.hist[t], &h.hist[mi]))
	}
	return d
}

// KSScore returns 1 − p.KS(h), in [0, 1]: 1 when every metric's grades in
// h have exactly the pattern's distribution (order ignored), 0 when for
// some metric the two lie in disjoint grade ranges or h is empty.
func (p *Template) KSScore(h *Histograms) float64 { return 1 - p.KS(h) }

// ErrLast is returned by NewHistograms for a negative window count.
var ErrLast = errors.New("matcher: negative number of windows")

// Histograms is one job's per-metric grade histograms, updated as windows
// close, over every window since the last Reset or only the last n. One
// Histograms serves all of the job's KS patterns. Make it with
// [NewHistograms].
type Histograms struct {
	hist [metric.Count]Histogram
	ring []coding.Grade // last·metric.Count grades, nil when counting all
	next int            // ring slot the next window goes to
	n    int            // windows counted
}

// NewHistograms returns empty histograms over the last windows (0: every
// window since the last Reset). Counting only the last windows keeps them,
// last·metric.Count bytes.
func NewHistograms(last int) (*Histograms, error) {
	if last < 0 {
		return nil, ErrLast
	}
	h := &Histograms{}
	if last > 0 {
		h.ring = make([]coding.Grade, last*int(metric.Count))
	}
	return h, nil
}

// Push counts the job's newest window (a full metric.Count vector of valid
// grades), dropping the oldest when the last-n windows are full.
func (h *Histograms) Push(window []coding.Grade) {
	window = window[:metric.Count]
	if h.ring != nil {
		h.rotate(window)
	}
	for mi, g := range window {
		h.hist[mi][g]++
	}
	h.n++
}

// rotate stores window in the ring, uncounting the window it replaces.
func (h *Histograms) rotate(window []coding.Grade) {
	slot := h.ring[h.next*int(metric.Count) : (h.next+1)*int(metric.Count)]
	if h.n == len(h.ring)/int(metric.Count) {
		for mi, g := range slot {
			h.hist[mi][g]--
		}
		h.n--
	}
	copy(slot, window)
	h.next++
	if h.next*int(metric.Count) == len(h.ring) {
		h.next = 0
	}
}

// N returns the number of windows counted.
func (h *Histograms) N() int { return h.n }

// Metric returns the histogram of metric index mi (a metric.ID).
func (h *Histograms) Metric(mi int) Histogram { return h.hist[mi] }

// Reset forgets every window.
func (h *Histograms) Reset() {
	h.hist = [metric.Count]Histogram{}
	h.next, h.n = 0, 0
}

// KSCoefficient returns c(α) = sqrt(−ln(α/2)/2), the asymptotic two-sided
// Kolmogorov–Smirnov coefficient (the first term of Kolmogorov's series;
// 1.224, 1.358, 1.628, 1.949 for α = 0.10, 0.05, 0.01, 0.001). It is NaN
// unless 0 < α < 1.
func KSCoefficient(alpha float64) float64 {
	if !(alpha > 0 && alpha < 1) {
		return math.NaN()
	}
	return math.Sqrt(-math.Log(alpha/2) / 2)
}

// KSCritical returns the asymptotic critical value c(α)·sqrt((n+m)/(n·m))
// for samples of n and m windows: D above it rejects, at level α, that the
// two come from one distribution (see the package Caveats). For a pattern
// against a job that is KSCritical(α, p.Len(), h.N()). It is NaN unless
// 0 < α < 1 and n, m > 0.
func KSCritical(alpha float64, n, m int) float64 {
	if n <= 0 || m <= 0 {
		return math.NaN()
	}
	nf, mf := float64(n), float64(m)
	return KSCoefficient(alpha) * math.Sqrt((nf+mf)/(nf*mf))
}
