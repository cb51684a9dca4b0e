package baseline_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/stat/distuv"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// profile is one metric's made-up but plausible day: a share of idle
// windows, and non-idle rates that are log-normal around a median with a
// 5% Pareto tail starting two sigmas up. The numbers are rules of thumb
// for a batch cluster (common practice), not measurements; what matters for
// the tests is that they are heavy-tailed and span several decades.
type profile struct {
	idle   float64 // share of windows that are idle (rate 0)
	median float64 // median of the log-normal body, bytes/s or ops/s
	sigma  float64 // sigma of log(rate) in the body
}

var profiles = [metric.Count]profile{
	metric.ReadBytes:   {0.3, 2e6, 2.3},
	metric.WriteBytes:  {0.3, 1e6, 2.3},
	metric.ReadOps:     {0.3, 50, 2},
	metric.WriteOps:    {0.3, 50, 2},
	metric.Opens:       {0.5, 5, 2},
	metric.Closes:      {0.5, 5, 2},
	metric.Creates:     {0.8, 2, 2},
	metric.Removes:     {0.85, 2, 2},
	metric.StatOps:     {0.4, 20, 2},
	metric.MetaUpdates: {0.8, 2, 2},
	metric.Syncs:       {0.9, 2, 1.5},
	metric.OtherOps:    {0.6, 5, 2},
}

// windowSource draws window values for one metric from its profile.
type windowSource struct {
	r    *rand.Rand
	p    profile
	body distuv.LogNormal
	tail distuv.Pareto
}

func newWindowSource(seed uint64, id metric.ID) *windowSource {
	src := rand.NewPCG(seed, uint64(id)+1)
	p := profiles[id]
	mu := math.Log(p.median)
	return &windowSource{
		r:    rand.New(src),
		p:    p,
		body: distuv.LogNormal{Mu: mu, Sigma: p.sigma, Src: src},
		tail: distuv.Pareto{Xm: p.median * math.Exp(2*p.sigma), Alpha: 1.5, Src: src},
	}
}

func (w *windowSource) next() float64 {
	u := w.r.Float64()
	switch {
	case u < w.p.idle:
		return 0
	case u < w.p.idle+(1-w.p.idle)*0.95:
		return w.body.Rand()
	}
	return w.tail.Rand()
}

// realisticDay returns a day of n windows per metric drawn from profiles.
func realisticDay(t testing.TB, seed uint64, n int) *baseline.Day {
	t.Helper()
	d := baseline.NewDay()
	for id := range metric.Count {
		w := newWindowSource(seed, id)
		for range n {
			require.NoError(t, d.Add(id, w.next()))
		}
	}
	return d
}

type bin struct {
	Value float64
	Count uint64
}

// binsOf collects a day's bins of one metric.
func binsOf(d *baseline.Day, id metric.ID) []bin {
	var bs []bin
	for v, c := range d.Bins(id) {
		bs = append(bs, bin{v, c})
	}
	return bs
}

// requireSameDay checks two days hold the same bins and idle counts.
func requireSameDay(t *testing.T, want, got *baseline.Day) {
	t.Helper()
	for id := range metric.Count {
		require.Equal(t, want.Idle(id), got.Idle(id), "%s idle", id)
		require.Equal(t, want.Windows(id), got.Windows(id), "%s windows", id)
		require.Equal(t, binsOf(want, id), binsOf(got, id), "%s bins", id)
	}
}

// apply is the level cut points and bases coding.Assemble gives for th
// over seed.
func apply(th baseline.Thresholds, seed coding.Cuts) (coding.Cuts, coding.Bases) {
	c, bases := coding.Assemble(seed, th.Learned())
	return c.Levels, bases
}
