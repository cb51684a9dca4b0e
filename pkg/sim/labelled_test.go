package sim_test

import (
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/sim"
)

func reference() sim.Reference {
	c := coding.Seed(coding.DefaultCuts())
	return sim.Reference{Cuts: c.Levels, Grades: c.Grades}
}

func values(j *sim.LabelledJob) [][]metric.Values {
	var out [][]metric.Values
	s := j.Stream()
	for {
		v, ok := s.Next()
		if !ok {
			return out
		}
		out = append(out, append([]metric.Values(nil), v...))
	}
}

func TestLabelledIsDeterministic(t *testing.T) {
	o := sim.LabelledOptions{Jobs: 40, Seed: 7, Reference: reference()}
	a, b := sim.Labelled(o), sim.Labelled(o)
	require.Len(t, a, 40)
	for i := range a {
		assert.Equal(t, a[i].ID, b[i].ID)
		assert.Equal(t, a[i].Class, b[i].Class)
		assert.Equal(t, a[i].Onset, b[i].Onset)
	}
	assert.Equal(t, values(&a[3]), values(&a[3]), "two streams of one job agree")
	assert.Equal(t, values(&a[3]), values(&b[3]))
	o.Seed = 8
	c := sim.Labelled(o)
	assert.NotEqual(t, values(&a[3]), values(&c[3]), "another seed, other jobs")
}

func TestLabelledMixAndLabels(t *testing.T) {
	jobs := sim.Labelled(sim.LabelledOptions{Jobs: 500, Seed: 1, Reference: reference()})
	require.Len(t, jobs, 500)
	count := map[string]int{}
	nodes := map[string]bool{}
	late, offWindow := 0, 0
	for _, j := range jobs {
		count[j.Class]++
		for _, n := range j.NodeNames {
			assert.False(t, nodes[n], "node %s in two jobs", n)
			nodes[n] = true
		}
		assert.Len(t, j.NodeNames, j.Nodes)
		assert.True(t, j.Length >= 6*10*time.Minute && j.Length <= 36*10*time.Minute, "%s: %s", j.ID, j.Length)
		assert.Zero(t, j.Length%time.Minute)
		switch j.Class {
		case sim.ClassOrdinary, sim.ClassBurst, sim.ClassNoisyStart:
			assert.Empty(t, j.Label, j.Class)
		case sim.ClassStreaming:
			assert.Equal(t, sim.LabelHeavyStreaming, j.Label)
		default:
			assert.Equal(t, j.Class, j.Label)
		}
		if j.Class == sim.ClassOrdinary {
			continue
		}
		assert.True(t, j.Onset < j.Until && j.Until <= j.Length, "%s: %s..%s of %s", j.ID, j.Onset, j.Until, j.Length)
		assert.Equal(t, int(j.Onset/(10*time.Minute)), j.OnsetWindow)
		if j.Label != "" {
			min := 6 * 10 * time.Minute
			if j.Label == sim.LabelStatPolling {
				min = 8 * 10 * time.Minute
			}
			assert.GreaterOrEqual(t, j.Until-j.Onset, min, "%s %s lasts at least %s", j.ID, j.Label, min)
			assert.GreaterOrEqual(t, j.Intensity, 1.0, "%s %s", j.ID, j.Label)
			if j.Onset > 0 {
				late++
			}
			if j.Onset%(10*time.Minute) != 0 {
				offWindow++
			}
		}
		if j.Class == sim.LabelImbalancedIO {
			assert.GreaterOrEqual(t, j.Nodes, 4)
		}
		if j.Class == sim.ClassBurst {
			assert.LessOrEqual(t, j.Until-j.Onset, 4*time.Minute, "a burst is shorter than half a window")
		}
	}
	assert.Equal(t, 115, count[sim.ClassOrdinary])
	for _, l := range sim.Labels() {
		c := l
		if l == sim.LabelHeavyStreaming {
			c = sim.ClassStreaming
		}
		assert.Equal(t, 35, count[c], l)
	}
	assert.Greater(t, late, 200, "onsets are not all at the start")
	assert.Greater(t, offWindow, 200, "nor on window boundaries")
}

// TestOrdinaryIsPlausible checks the everyday jobs against rules of thumb
// for a Lustre client node (common practice): transfer sizes between
// 64 bytes and 64 MiB, no node above 10 GB/s or 100,000 metadata ops/s,
// closes never far above opens.
func TestOrdinaryIsPlausible(t *testing.T) {
	for _, j := range sim.Ordinary(sim.LabelledOptions{Jobs: 60, Seed: 2}) {
		assert.Equal(t, sim.ClassOrdinary, j.Class)
		var total metric.Values
		for _, step := range values(&j) {
			for _, v := range step {
				total.Add(v)
				secs := j.Step().Seconds()
				assert.Less(t, float64(v[metric.ReadBytes]+v[metric.WriteBytes])/secs, 10e9)
				assert.Less(t, float64(v[metric.StatOps]+v[metric.Opens]+v[metric.Creates])/secs, 1e5)
			}
		}
		for _, p := range [][2]metric.ID{{metric.ReadBytes, metric.ReadOps}, {metric.WriteBytes, metric.WriteOps}} {
			if total[p[1]] > 100 {
				size := float64(total[p[0]]) / float64(total[p[1]])
				assert.True(t, size >= 64 && size <= 64<<20, "job %s: mean %s of %.0f bytes", j.ID, p[0], size)
			}
		}
		assert.LessOrEqual(t, float64(total[metric.Closes]), 1.01*float64(total[metric.Opens])+10, j.ID)
	}
}

// TestInjectionIsVisible checks that a problem's driving metric, per node,
// runs at about its intensity times the reference cut during the injected
// span.
func TestInjectionIsVisible(t *testing.T) {
	ref := reference()
	jobs := sim.Labelled(sim.LabelledOptions{Jobs: 300, Seed: 4, Reference: ref})
	checked := 0
	for _, j := range jobs {
		var id metric.ID
		switch {
		case j.Class == sim.LabelSmallWriteFlood:
			id = metric.WriteOps
		case j.Class == sim.LabelFsyncStorm:
			id = metric.Syncs
		case j.Class == sim.LabelMetadataStorm && j.Variant == "create":
			id = metric.Creates
		default:
			continue
		}
		var sum float64
		steps := 0
		for i, step := range values(&j) {
			at := time.Duration(i) * j.Step()
			if at < j.Onset || at >= j.Until {
				continue
			}
			for _, v := range step {
				sum += float64(v[id]) / j.Step().Seconds()
			}
			steps += len(step)
		}
		mean := sum / float64(steps)
		want := j.Intensity * ref.Cuts[id].Critical
		// Within a factor of 2: each node's share of an injection varies
		// by a log-normal factor of spread 0.2 (a job of one node has one).
		assert.True(t, mean > want/2 && mean < 2*want, "job %s %s: %s %.4g per node, want about %.4g", j.ID, j.Class, id, mean, want)
		checked++
	}
	assert.Greater(t, checked, 40)
}
