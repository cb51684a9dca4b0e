package matcher_test

import (
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
)

// randGrade draws a grade below top+1.
func randGrade(r *rand.Rand, top int) coding.Grade { return coding.Grade(r.IntN(top + 1)) }

// randMetrics draws k distinct metric indexes in random order.
func randMetrics(r *rand.Rand, k int) []int {
	return r.Perm(int(metric.Count))[:k]
}

// randWindows draws n windows of width grades below top+1.
func randWindows(r *rand.Rand, n, width, top int) [][]coding.Grade {
	out := make([][]coding.Grade, n)
	for i := range out {
		out[i] = make([]coding.Grade, width)
		for t := range out[i] {
			out[i][t] = randGrade(r, top)
		}
	}
	return out
}

// randPattern draws a pattern of m windows over k metrics.
func randPattern(t testing.TB, r *rand.Rand, m, k, top int) *matcher.Template {
	t.Helper()
	p, err := matcher.NewTemplate(randMetrics(r, k), randWindows(r, m, k, top))
	require.NoError(t, err)
	return p
}

// randText draws n full job windows.
func randText(r *rand.Rand, n, top int) [][]coding.Grade {
	return randWindows(r, n, int(metric.Count), top)
}

// mustPattern builds a pattern from per-window digit strings, e.g.
// mustPattern(t, []int{0, 1}, "01", "66") is two windows over metrics 0, 1.
func mustPattern(t testing.TB, metrics []int, windows ...string) *matcher.Template {
	t.Helper()
	ws := make([][]coding.Grade, len(windows))
	for i, s := range windows {
		g, err := coding.ParseGrades(s)
		require.NoError(t, err)
		ws[i] = g
	}
	p, err := matcher.NewTemplate(metrics, ws)
	require.NoError(t, err)
	return p
}

// jobWindow returns a full window with the given grades at the given
// metrics and 0 elsewhere.
func jobWindow(metrics []int, gs ...coding.Grade) []coding.Grade {
	w := make([]coding.Grade, metric.Count)
	for t, mi := range metrics {
		w[mi] = gs[t]
	}
	return w
}

// column returns metric mi's grades over a text.
func column(text [][]coding.Grade, mi int) []coding.Grade {
	out := make([]coding.Grade, len(text))
	for j, w := range text {
		out[j] = w[mi]
	}
	return out
}
