package matcher_test

import (
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
)

// library is a centre's pattern set: 100 patterns of 6–12 windows over
// 3–5 metrics, 60 matched with Sellers, 20 with KS and 20 with Shape.
type library struct {
	sellers, ks, shapes []*matcher.Template
}

func newLibrary(t testing.TB, seed uint64) library {
	r := rand.New(rand.NewPCG(seed, 1))
	draw := func(n int) []*matcher.Template {
		out := make([]*matcher.Template, n)
		for i := range out {
			out[i] = randPattern(t, r, 6+r.IntN(7), 3+r.IntN(3), 6)
		}
		return out
	}
	return library{sellers: draw(60), ks: draw(20), shapes: draw(20)}
}

// job is one running job's matching state against a library: one
// Histograms over its last day (144 ten-minute windows) for all KS
// patterns, and one Sellers or Shape per ordered pattern.
type job struct {
	lib     *library
	hist    *matcher.Histograms
	sellers []*matcher.Sellers
	shapes  []*matcher.Shape
}

func newJob(t testing.TB, lib *library) *job {
	h, err := matcher.NewHistograms(144)
	require.NoError(t, err)
	j := &job{lib: lib, hist: h,
		sellers: make([]*matcher.Sellers, len(lib.sellers)),
		shapes:  make([]*matcher.Shape, len(lib.shapes)),
	}
	for i, p := range lib.sellers {
		j.sellers[i] = matcher.NewSellers(p)
	}
	for i, p := range lib.shapes {
		j.shapes[i] = matcher.NewShape(p)
	}
	return j
}

// push feeds one closed window to every matcher and returns the best score.
func (j *job) push(w []coding.Grade) float64 {
	best := 0.0
	j.hist.Push(w)
	for _, s := range j.sellers {
		s.Push(w)
		best = max(best, s.Last().Score)
	}
	for _, p := range j.lib.ks {
		best = max(best, p.KSScore(j.hist))
	}
	for _, s := range j.shapes {
		if _, ok := s.Push(w); ok {
			m, _ := s.Last()
			best = max(best, m.Score)
		}
	}
	return best
}
