package matcher_test

import (
	"math/rand/v2"
	"os"
	"runtime"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
)

func parse(t testing.TB, name, text string) *pattern.Pattern {
	t.Helper()
	p, err := pattern.Parse(name, strings.NewReader(text))
	require.NoError(t, err)
	return p
}

func example(t testing.TB) *pattern.Pattern {
	f, err := os.Open("../../testdata/patterns/good/checkpoint_burst.yaml")
	require.NoError(t, err)
	defer f.Close()
	p, err := pattern.Parse("checkpoint_burst.yaml", f)
	require.NoError(t, err)
	return p
}

// windowOf codes write_bytes, write_ops, creates and syncs; the rest idle.
func windowOf(wb, wo, cr, sy coding.Grade) matcher.View {
	var g coding.Grades
	g[metric.WriteBytes], g[metric.WriteOps], g[metric.Creates], g[metric.Syncs] = wb, wo, cr, sy
	return matcher.View{Grades: g, Nodes: 1}
}

// TestSellersFindsTheExampleInsideAJob pushes a job whose windows contain
// the example exactly after noise: the score reaches 1 at the window that
// completes it, and the match starts where the example's first window is.
func TestSellersFindsTheExampleInsideAJob(t *testing.T) {
	lib, err := matcher.Compile([]*pattern.Pattern{example(t)})
	require.NoError(t, err)
	job := lib.NewMatch()
	noise := []matcher.View{windowOf(3, 3, 0, 0), windowOf(2, 2, 0, 0), windowOf(3, 3, 0, 0)}
	for _, v := range noise {
		job.Window(v)
	}
	// The example, window by window: "116611" "114411" "005500" "004400".
	var last matcher.Verdict
	for _, w := range [][4]coding.Grade{{1, 1, 0, 0}, {1, 1, 0, 0}, {6, 4, 5, 4}, {6, 4, 5, 4}, {1, 1, 0, 0}, {1, 1, 0, 0}} {
		last = job.Window(windowOf(w[0], w[1], w[2], w[3]))[0]
	}
	assert.InDelta(t, 1, last.Score, 1e-12)
	assert.True(t, last.Matched)
	assert.Equal(t, 3, last.Start)
	assert.Equal(t, 9, job.Windows())
}

const storm = `schema: 1
name: storm
title: Storm
severity: critical
description: d
rationale: r
advice: follow your site's policy
raise_after: 1
rule:
  hold: {k: 2, n: 3}
  all:
    - {metric: creates, level: critical}
`

// TestRuleKOfNAndLive: a rule of 2 in 3 windows matches on the second
// critical window; with one critical window closed, a critical live window
// matches provisionally without changing the state.
func TestRuleKOfNAndLive(t *testing.T) {
	lib, err := matcher.Compile([]*pattern.Pattern{parse(t, "storm.yaml", storm)})
	require.NoError(t, err)
	job := lib.NewMatch()
	crit := matcher.View{Nodes: 4}
	crit.Levels[metric.Creates] = coding.Critical
	calm := matcher.View{Nodes: 4}

	s := job.Window(crit)[0]
	assert.False(t, s.Matched)
	assert.InDelta(t, 1.0/3, s.Score, 1e-12)
	live := job.Open(matcher.Open{Low: crit, High: crit})[0]
	assert.True(t, live.Matched, "one closed and the live window: 2 of 3")
	assert.Equal(t, 0, live.Start)
	assert.False(t, job.Open(matcher.Open{Low: calm, High: calm})[0].Matched)

	s = job.Window(calm)[0]
	assert.False(t, s.Matched, "the live push was provisional")
	s = job.Window(crit)[0]
	assert.True(t, s.Matched)
	assert.Equal(t, 0, s.Start)
	s = job.Window(calm)[0]
	assert.False(t, s.Matched, "windows 1..3 hold 1 of 3")
}

// TestReplayGivesTheSameState: a job rebuilt from its windows scores the
// next window exactly as the original does.
func TestReplayGivesTheSameState(t *testing.T) {
	ps, err := pattern.Builtin()
	require.NoError(t, err)
	lib, err := matcher.Compile(append(ps, example(t)))
	require.NoError(t, err)
	r := rand.New(rand.NewPCG(4, 4))
	var windows []matcher.View
	for range 60 {
		windows = append(windows, randomView(r))
	}
	a := lib.NewMatch()
	for _, w := range windows {
		a.Window(w)
	}
	b := lib.NewMatch()
	for _, w := range windows {
		b.Window(w)
	}
	next := randomView(r)
	assert.Equal(t, a.Window(next), b.Window(next))
}

func randomView(r *rand.Rand) matcher.View {
	v := matcher.View{Nodes: 1 + r.IntN(64), BusiestShare: r.Float64(), NodeSpread: 2 * r.Float64()}
	for i := range v.Grades {
		v.Grades[i] = coding.Grade(r.IntN(coding.GradeCount))
		v.Levels[i] = coding.Level(max(0, int(v.Grades[i])-4))
		v.Rates[i] = r.ExpFloat64() * 1e3
	}
	return v
}

// library100 is the built-ins plus random examples (100 in all) of 6 to 12
// windows over 3 to 5 metrics, a third each Sellers, KS and Euclidean.
func library100(t testing.TB) *matcher.Library {
	ps, err := pattern.Builtin()
	require.NoError(t, err)
	r := rand.New(rand.NewPCG(9, 9))
	methods := []pattern.Method{pattern.Sellers, pattern.KS, pattern.Euclidean}
	for i := range 100 - len(ps) {
		p := &pattern.Pattern{Name: "p", Severity: model.SeverityWarning, RaiseAfter: 1, ClearAfter: 2, Threshold: 0.8,
			Example: &pattern.Example{Method: methods[i%3]}}
		n := 6 + r.IntN(7)
		for _, id := range r.Perm(int(metric.Count))[:3+r.IntN(3)] {
			gs := make([]coding.Grade, n)
			for k := range gs {
				gs[k] = coding.Grade(r.IntN(coding.GradeCount))
			}
			p.Example.Metrics = append(p.Example.Metrics, metric.ID(id))
			p.Example.Grades = append(p.Example.Grades, gs)
		}
		if p.Example.Method == pattern.KS {
			p.Example.Last = 36
		}
		ps = append(ps, p)
	}
	lib, err := matcher.Compile(ps)
	require.NoError(t, err)
	require.Equal(t, 100, lib.Len())
	return lib
}

// BenchmarkWindow100Patterns is one closed window scored against 100
// patterns (target <= 50 us).
func BenchmarkWindow100Patterns(b *testing.B) {
	lib := library100(b)
	job := lib.NewMatch()
	r := rand.New(rand.NewPCG(1, 1))
	views := make([]matcher.View, 64)
	for i := range views {
		views[i] = randomView(r)
	}
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		job.Window(views[i%len(views)])
		i++
	}
}

// TestMemoryPerJob measures the heap one job's state takes against 100
// patterns (target <= 64 KiB).
func TestMemoryPerJob(t *testing.T) {
	lib := library100(t)
	const jobs = 500
	keep := make([]*matcher.JobMatch, jobs)
	runtime.GC()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	v := randomView(rand.New(rand.NewPCG(2, 2)))
	for i := range keep {
		keep[i] = lib.NewMatch()
		keep[i].Window(v)
	}
	runtime.GC()
	runtime.ReadMemStats(&after)
	per := float64(after.HeapAlloc-before.HeapAlloc) / jobs
	t.Logf("%.0f bytes per job with 100 patterns", per)
	assert.Less(t, per, 64.0*1024)
	runtime.KeepAlive(keep)
}
