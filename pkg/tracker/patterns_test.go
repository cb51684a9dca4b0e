package tracker_test

import (
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/metric"
	"sluice/pkg/model"
	"sluice/pkg/pattern"
	"sluice/pkg/report"
	"sluice/pkg/tracker"
)

func builtinLibrary(t *testing.T) *matcher.Library {
	ps, err := pattern.Builtin()
	require.NoError(t, err)
	lib, err := matcher.Compile(ps)
	require.NoError(t, err)
	return lib
}

// TestMetadataStormRaisesOnePatternFlag runs a 4-node job creating 2,000
// files per second per node (twice the critical seed cut of 1,000/s) with
// little data, over 1-minute windows: the built-in metadata_storm rule (2
// of 3 windows) raises one flag, with creates as its driver and the cut in
// force beside it, and the flag clears when the job ends.
func TestMetadataStormRaisesOnePatternFlag(t *testing.T) {
	tr := newTracker(t, tracker.Options{Window: time.Minute, Live: 20 * time.Second, Grace: time.Second, Patterns: builtinLibrary(t)})
	nodes := []string{"bw007", "bw008", "bw009", "bw010"}
	startJob(t, tr, "81234", nodes...)
	var raised []*model.Flag
	seq := uint64(0)
	for step := range 24 { // 4 minutes of 10 s samples
		seq++
		from := time.Duration(step) * 10 * time.Second
		for _, n := range nodes {
			require.NoError(t, tr.Sample(sample(n, seq, from, from+10*time.Second, []string{"81234"},
				vals(metric.Creates, 20000, metric.StatOps, 30000, metric.WriteBytes, 100_000))))
		}
		tr.Tick()
		for _, e := range tr.Drain() {
			if e.Kind == tracker.FlagRaised && e.Flag.Pattern != "" {
				raised = append(raised, e.Flag)
			}
		}
	}
	require.Len(t, raised, 1)
	f := raised[0]
	assert.Equal(t, model.PatternOf("metadata_storm"), f.Reason)
	assert.Equal(t, "pattern:metadata_storm", f.Reason.String())
	assert.Equal(t, model.SeverityCritical, f.Severity)
	assert.Contains(t, f.Advice, "policy")
	assert.Equal(t, 4, f.Nodes)
	require.NotEmpty(t, f.Drivers)
	assert.Equal(t, metric.Creates, f.Drivers[0].Metric)
	assert.InDelta(t, 2000, f.Drivers[0].Rate, 1e-9)
	assert.Equal(t, coding.Critical, f.Drivers[0].Level)
	assert.Equal(t, 1000.0, f.Drivers[0].Critical)
	// Window 0 closes at 1 min + grace; with it closed and the live window
	// matching, the rule holds 2 of 3 during window 1.
	assert.True(t, f.Raised.Before(t0.Add(2*time.Minute)), "raised at %s", f.Raised)
	assert.Equal(t, t0, f.Since)
	assert.Equal(t, "Metadata storm on 4 nodes", f.Summary, "nothing in the summary changes later")

	s, ok := tr.Job("81234")
	require.True(t, ok)
	assert.Greater(t, s.PatternScores["metadata_storm"], 0.6)

	require.NoError(t, tr.JobEvent(jobEnd("81234", t0.Add(4*time.Minute))))
	require.NoError(t, tr.Sample(sample("bw007", seq+1, 240*time.Second, 250*time.Second, nil, metric.Values{})))
	tr.Tick()
	cleared := 0
	for _, e := range tr.Drain() {
		if e.Kind == tracker.FlagCleared && e.Flag.Pattern == "metadata_storm" {
			cleared++
		}
	}
	assert.Equal(t, 1, cleared)
}

func jobEnd(id string, at time.Time) *report.JobEvent {
	return &report.JobEvent{Type: report.JobEnd, Job: id, Node: "bw007", Time: at}
}
