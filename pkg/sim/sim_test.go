package sim_test

import (
	"context"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/sim"
	"sluice/pkg/source/lustre"
)

var t0 = time.Date(2026, 3, 2, 14, 0, 0, 0, time.UTC)

func scenario() sim.Scenario {
	return sim.Scenario{
		Nodes: []string{"bw001", "bw002"},
		Jobs: []sim.Job{{
			ID: "1", Nodes: []string{"bw001"}, Start: 10 * time.Second, End: 40 * time.Second,
			Phases: []sim.Phase{
				{After: 0, Behaviour: sim.Behaviour{Creates: 10.5}},
				{After: 20 * time.Second, Behaviour: sim.Behaviour{WriteBytes: 4 << 20, WriteSize: 1 << 20}},
			},
		}},
	}
}

func TestCountersFollowTheScenario(t *testing.T) {
	s, err := sim.New(scenario(), t.TempDir(), t0)
	require.NoError(t, err)
	require.NoError(t, s.Step(t0.Add(60*time.Second)))
	// Hand-computed: creates at 10.5/s from 10 s to 30 s = 210; writes of
	// 1 MiB at 4 MiB/s from 30 s to 40 s = 40 calls and 40 MiB.
	got := s.Totals("bw001")
	assert.Equal(t, uint64(210), got["create"])
	assert.Equal(t, uint64(40), got["write_bytes"])
	assert.Equal(t, uint64(40<<20), got["write_bytes.sum"])
	assert.Empty(t, s.Totals("bw002"), "a node with no job does nothing")
}

func TestFilesParseBackToTheTotals(t *testing.T) {
	s, err := sim.New(scenario(), t.TempDir(), t0)
	require.NoError(t, err)
	require.NoError(t, s.Step(t0.Add(35*time.Second)))
	readings, err := lustre.NewSource(s.LliteRoot("bw001"), nil).Read(context.Background())
	require.NoError(t, err)
	require.Len(t, readings, 1)
	assert.Zero(t, readings[0].Malformed)
	for k, v := range s.Totals("bw001") {
		assert.Equal(t, v, readings[0].Counters[k], k)
	}
}

func TestUnknownNodeRefused(t *testing.T) {
	sc := scenario()
	sc.Jobs[0].Nodes = []string{"bw099"}
	_, err := sim.New(sc, t.TempDir(), t0)
	assert.ErrorContains(t, err, "bw099")
}

func TestDemoScenarioIsConsistent(t *testing.T) {
	sc := sim.Demo()
	_, err := sim.New(sc, t.TempDir(), t0)
	require.NoError(t, err)
	kinds := map[string]bool{}
	for _, j := range sc.Jobs {
		kinds[j.Kind] = true
		assert.NotEmpty(t, j.User)
		assert.NotEmpty(t, j.Name)
	}
	for _, k := range []string{"healthy streaming", "quiet compute", "metadata storm", "small-write flood"} {
		assert.True(t, kinds[k], k)
	}
}
