package matcher_test

import (
	"math/rand/v2"
	"runtime"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
)

// inUnit asserts 0 ≤ v ≤ 1.
func inUnit(t *testing.T, v float64, msg string, args ...any) {
	t.Helper()
	assert.GreaterOrEqual(t, v, 0.0, append([]any{msg}, args...)...)
	assert.LessOrEqual(t, v, 1.0, append([]any{msg}, args...)...)
}

// Property: every score of every matcher stays in [0, 1].
func TestScoresInUnitInterval(t *testing.T) {
	r := rand.New(rand.NewPCG(21, 22))
	for c := range 300 {
		p := randPattern(t, r, 1+r.IntN(12), 1+r.IntN(5), r.IntN(7))
		sel, sh := matcher.NewSellers(p), matcher.NewShape(p)
		h, err := matcher.NewHistograms(r.IntN(30))
		require.NoError(t, err)
		inUnit(t, p.KSScore(h), "case %d empty KS", c)
		for j, w := range randText(r, r.IntN(50), r.IntN(7)) {
			sel.Push(w)
			h.Push(w)
			sh.Push(w)
			inUnit(t, sel.Last().Score, "case %d window %d sellers", c, j)
			inUnit(t, sel.Best().Score, "case %d window %d sellers best", c, j)
			inUnit(t, p.KSScore(h), "case %d window %d KS", c, j)
			if m, ok := sh.Last(); ok {
				inUnit(t, m.Score, "case %d window %d shape", c, j)
			}
		}
	}
}

// The scale's ends: the pattern itself scores 1 with every matcher, its
// opposite (0 against 6 everywhere) scores 0.
func TestScoreEnds(t *testing.T) {
	metrics := []int{0, 4, 7}
	p := mustPattern(t, metrics, "666", "666", "666")
	tests := []struct {
		name string
		g    coding.Grade
		want float64
	}{{"exact", 6, 1}, {"opposite", 0, 0}}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			sel, sh := matcher.NewSellers(p), matcher.NewShape(p)
			h, err := matcher.NewHistograms(0)
			require.NoError(t, err)
			w := jobWindow(metrics, tt.g, tt.g, tt.g)
			for range 5 {
				sel.Push(w)
				sh.Push(w)
				h.Push(w)
			}
			assert.Equal(t, tt.want, sel.Last().Score)
			m, ok := sh.Last()
			require.True(t, ok)
			assert.Equal(t, tt.want, m.Score)
			assert.Equal(t, tt.want, p.KSScore(h))
		})
	}
}

// Memory of the example states of one job with 100 templates (the library of job_test.go),
// measured as live heap growth over 1000 jobs: at most 64 KiB a job. The
// patterns are shared and built before the first reading.
func TestTemplateStatesMemoryPerJob(t *testing.T) {
	lib := newLibrary(t, 23)
	const jobs = 1000
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	all := make([]*job, jobs)
	for i := range all {
		all[i] = newJob(t, &lib)
	}
	runtime.GC()
	runtime.ReadMemStats(&after)
	perJob := (int64(after.HeapAlloc) - int64(before.HeapAlloc)) / jobs
	t.Logf("live heap per job with %d matchers: %d bytes", len(lib.sellers)+len(lib.ks)+len(lib.shapes), perJob)
	assert.LessOrEqual(t, perJob, int64(64<<10))
	w := make([]coding.Grade, metric.Count)
	for _, j := range all {
		j.push(w)
	}
	runtime.KeepAlive(all)
}

// One job window into the 100 matchers allocates nothing.
func TestJobPushDoesNotAllocate(t *testing.T) {
	lib := newLibrary(t, 24)
	j := newJob(t, &lib)
	text := randText(rand.New(rand.NewPCG(25, 26)), 64, 6)
	i := 0
	assert.Zero(t, testing.AllocsPerRun(200, func() { j.push(text[i%len(text)]); i++ }))
}
