package matcher_test

import (
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/matcher"
)

// One closed window into a job's 100 matchers: 60 Sellers and 20 Shape
// patterns of 6–12 windows over 3–5 metrics, and 20 KS patterns against
// the job's histograms over its last 144 windows (job_test.go).
// Target: at most 50 µs and no allocation per window.
func BenchmarkJobPush100Patterns(b *testing.B) {
	lib := newLibrary(b, 31)
	j := newJob(b, &lib)
	text := randText(rand.New(rand.NewPCG(32, 33)), 1024, 6)
	for _, w := range text[:200] { // fill the 144-window histograms and rings
		j.push(w)
	}
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		j.push(text[i&1023])
		i++
	}
}

// One window into one Sellers matcher of the largest size (12 windows, 5
// metrics).
func BenchmarkSellersPush12x5(b *testing.B) {
	r := rand.New(rand.NewPCG(34, 35))
	s := matcher.NewSellers(randPattern(b, r, 12, 5, 6))
	text := randText(r, 1024, 6)
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		s.Push(text[i&1023])
		i++
	}
}

// One window into one Shape matcher (12 windows, 5 metrics).
func BenchmarkShapePush12x5(b *testing.B) {
	r := rand.New(rand.NewPCG(36, 37))
	s := matcher.NewShape(randPattern(b, r, 12, 5, 6))
	text := randText(r, 1024, 6)
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		s.Push(text[i&1023])
		i++
	}
}

// One window into a job's histograms (last 144 windows) and one 5-metric
// KS pattern read against them.
func BenchmarkHistogramsPushKS5(b *testing.B) {
	r := rand.New(rand.NewPCG(38, 39))
	p := randPattern(b, r, 12, 5, 6)
	h, err := matcher.NewHistograms(144)
	require.NoError(b, err)
	text := randText(r, 1024, 6)
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		h.Push(text[i&1023])
		p.KS(h)
		i++
	}
}
