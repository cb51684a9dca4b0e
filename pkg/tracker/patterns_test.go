package tracker_test

import (
	"strings"
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

// burstExample is an example pattern of one window: creates at grade 6.
const burstExample = `schema: 1
name: create_burst
title: Create burst
severity: warning
description: d
rationale: r
advice: follow your site's policy
raise_after: 1
clear_after: 2
example:
  method: sellers
  metrics: [creates]
  grades:
    creates: "6"
`

// TestExampleFlagsCountClosedWindowsOnly: the live evaluations between
// two closed windows repeat an example's latest closed-window verdict;
// they may raise (provisionally) but must not count as windows, so the
// flag clears after clear_after closed windows that do not match, not
// after as many ticks.
func TestExampleFlagsCountClosedWindowsOnly(t *testing.T) {
	p, err := pattern.Parse("burst.yaml", strings.NewReader(burstExample))
	require.NoError(t, err)
	lib, err := matcher.Compile([]*pattern.Pattern{p})
	require.NoError(t, err)
	tr := newTracker(t, tracker.Options{Window: time.Minute, Live: 10 * time.Second, Grace: time.Second, Patterns: lib})
	startJob(t, tr, "81236", "bw011")
	var cleared []time.Time
	raised := 0
	for step := range 30 { // 10 s samples: window 0 a burst, then quiet
		from := time.Duration(step) * 10 * time.Second
		creates := 0
		if step < 6 {
			creates = 50_000 // 5,000/s, above the critical seed of 1,000/s
		}
		require.NoError(t, tr.Sample(sample("bw011", uint64(step+1), from, from+10*time.Second, []string{"81236"}, vals(metric.Creates, creates))))
		tr.Tick()
		for _, e := range tr.Drain() {
			if e.Flag != nil && e.Flag.Pattern == "create_burst" {
				switch e.Kind {
				case tracker.FlagRaised:
					raised++
				case tracker.FlagCleared:
					cleared = append(cleared, e.Flag.Cleared)
				}
			}
		}
	}
	assert.Equal(t, 1, raised)
	require.Len(t, cleared, 1)
	// Window 0 matches; windows 1 and 2 do not. Window 2 closes at 3 min
	// plus the grace, with the first sample after it.
	assert.Equal(t, t0.Add(3*time.Minute), cleared[0], "cleared when the second quiet window closed, not after two quiet ticks")
}
