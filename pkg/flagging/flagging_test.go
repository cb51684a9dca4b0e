package flagging_test

import (
	"math"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/flagging"
	"sluice/pkg/metric"
	"sluice/pkg/model"
)

var t0 = time.Date(2026, 12, 2, 14, 0, 0, 0, time.UTC)

// step feeds one evaluation per rune of script: 'H' holds, '.' does not,
// 'h' holds provisionally, ',' does not, provisionally. It returns the
// index of each raise and clear.
func step(t *testing.T, o flagging.Options, script string) (raised, cleared []int) {
	t.Helper()
	ss := flagging.Streaks{}
	r := model.PatternOf("metadata_storm")
	n := 0
	for i, c := range script {
		e := flagging.Evaluation{Holds: c == 'H' || c == 'h', Provisional: c == 'h' || c == ',',
			At: t0.Add(time.Duration(i) * time.Minute), Score: 0.5, Value: math.NaN()}
		f, change := ss.Step(r, o, e, func(*flagging.Streak) *model.Flag { n++; return &model.Flag{ID: flagging.FlagID("81234", n)} })
		switch change {
		case flagging.Raise:
			require.NotNil(t, f)
			assert.Equal(t, r, f.Reason)
			raised = append(raised, i)
		case flagging.Clear:
			require.NotNil(t, f)
			assert.Equal(t, e.At, f.Cleared)
			cleared = append(cleared, i)
		}
	}
	return raised, cleared
}

func TestStreaks(t *testing.T) {
	tests := []struct {
		name            string
		opts            flagging.Options
		script          string
		raised, cleared []int
	}{
		{"raise after 2, clear after 3", flagging.Options{RaiseAfter: 2, ClearAfter: 3}, "H H . . .", []int{2}, []int{8}},
		{"a rate wavering around the cut raises one flag", flagging.Options{RaiseAfter: 2, ClearAfter: 3}, "HH.H..H..H..H", []int{1}, nil},
		{"one in a row is not two", flagging.Options{RaiseAfter: 2, ClearAfter: 1}, "H.H.H.", nil, nil},
		{"a provisional hold completes a run", flagging.Options{RaiseAfter: 2, ClearAfter: 2}, "Hh", []int{1}, nil},
		{"but does not count as one more", flagging.Options{RaiseAfter: 3, ClearAfter: 2}, "Hhhhh", nil, nil},
		{"provisional misses never clear", flagging.Options{RaiseAfter: 1, ClearAfter: 2}, "H,,,,,,.", []int{0}, nil},
		{"closed misses do", flagging.Options{RaiseAfter: 1, ClearAfter: 2}, "H,.,.", []int{0}, []int{4}},
		{"zero options mean 1", flagging.Options{}, "H.", []int{0}, []int{1}},
		{"raised again after a clear, as a new flag", flagging.Options{RaiseAfter: 1, ClearAfter: 1}, "H.H", []int{0, 2}, []int{1}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			script := ""
			for _, c := range tt.script {
				if c != ' ' {
					script += string(c)
				}
			}
			raised, cleared := step(t, tt.opts, script)
			// the script's spaces are for reading: count indexes without them
			assert.Equal(t, tt.raised, squeeze(tt.script, raised), "raised")
			assert.Equal(t, tt.cleared, squeeze(tt.script, cleared), "cleared")
		})
	}
}

// squeeze maps indexes in the spaceless script back to the script as
// written, so a test lists positions as the reader sees them.
func squeeze(script string, idx []int) []int {
	var pos []int
	for i, c := range script {
		if c != ' ' {
			pos = append(pos, i)
		}
	}
	var out []int
	for _, k := range idx {
		out = append(out, pos[k])
	}
	return out
}

func TestStreakValueAndPeak(t *testing.T) {
	ss := flagging.Streaks{}
	r := model.HighRateOf(metric.Creates)
	o := flagging.Options{RaiseAfter: 1, ClearAfter: 1}
	raise := func(*flagging.Streak) *model.Flag { return &model.Flag{Value: 1500, Peak: 1500} }
	f, _ := ss.Step(r, o, flagging.Evaluation{Holds: true, At: t0, Score: 1, Value: 1500}, raise)
	require.NotNil(t, f)
	ss.Step(r, o, flagging.Evaluation{Holds: true, At: t0.Add(time.Minute), Score: 1, Value: 2500}, raise)
	ss.Step(r, o, flagging.Evaluation{Holds: true, At: t0.Add(2 * time.Minute), Score: 1, Value: 1800}, raise)
	active := ss.Active()
	require.Len(t, active, 1)
	assert.Equal(t, 1800.0, active[0].Value)
	assert.Equal(t, 2500.0, active[0].Peak)
	assert.Equal(t, t0, active[0].Since)
	assert.Equal(t, t0, active[0].Raised)
	cleared := ss.ClearAll(t0.Add(time.Hour))
	require.Len(t, cleared, 1)
	assert.Equal(t, t0.Add(time.Hour), cleared[0].Cleared)
	assert.Empty(t, ss)
}

func TestRecordsRoundTrip(t *testing.T) {
	ss := flagging.Streaks{}
	o := flagging.Options{RaiseAfter: 1, ClearAfter: 3}
	ss.Step(model.PatternOf("stat_storm"), o, flagging.Evaluation{Holds: true, At: t0, Score: 0.67},
		func(*flagging.Streak) *model.Flag {
			return &model.Flag{ID: "81234-1", Drivers: []model.Driver{{Metric: metric.StatOps}}}
		})
	back := flagging.FromRecords(ss.Records())
	assert.Equal(t, ss.Active(), back.Active())
	back.Active()[0].Drivers[0].Rate = 9 // a copy
	assert.Zero(t, ss.Active()[0].Drivers[0].Rate)
}

func TestSilenceCovers(t *testing.T) {
	storm := model.Flag{ID: "81234-2", Job: "81234", Reason: model.PatternOf("metadata_storm"), Pattern: "metadata_storm"}
	creates := model.Flag{ID: "81234-1", Job: "81234", Reason: model.HighRateOf(metric.Creates)}
	other := model.Flag{ID: "81240-1", Job: "81240", Reason: model.PatternOf("metadata_storm"), Pattern: "metadata_storm"}
	until := t0.Add(time.Hour)
	tests := []struct {
		name    string
		silence model.Silence
		covers  []bool // storm, creates, other
	}{
		{"a job", model.Silence{Job: "81234", Until: until}, []bool{true, true, false}},
		{"a pattern", model.Silence{Pattern: "metadata_storm", Until: until}, []bool{true, false, true}},
		{"a job's pattern", model.Silence{Job: "81234", Pattern: "metadata_storm", Until: until}, []bool{true, false, false}},
		{"a reason", model.Silence{Pattern: "high_rate:creates", Until: until}, []bool{false, true, false}},
		{"a reason as schema 1 wrote it", model.Silence{Pattern: "critical:creates", Until: until}, []bool{false, true, false}},
		{"a pattern's reason", model.Silence{Pattern: "pattern:metadata_storm", Until: until}, []bool{true, false, true}},
		{"expired", model.Silence{Job: "81234", Until: t0}, []bool{false, false, false}},
	}
	for _, tt := range tests {
		for i, f := range []model.Flag{storm, creates, other} {
			assert.Equal(t, tt.covers[i], flagging.Covers(tt.silence, &f, t0), "%s covers %s", tt.name, f.ID)
		}
	}
}

func TestAttentionDecides(t *testing.T) {
	a := flagging.NewAttention(nil, nil)
	s, err := flagging.NewSilence("81234", "metadata_storm", 2*time.Hour, "keswin", "user contacted", t0)
	require.NoError(t, err)
	a.AddSilence(s)
	ack, err := flagging.NewAck("81234-1", "keswin", "on it", t0)
	require.NoError(t, err)
	a.AddAck(ack)
	fs := []model.Flag{
		{ID: "81234-2", Job: "81234", Reason: model.PatternOf("metadata_storm"), Pattern: "metadata_storm"},
		{ID: "81234-1", Job: "81234", Reason: model.HighRateOf(metric.Creates)},
		{ID: "81234-0", Job: "81234", Reason: model.HighRateOf(metric.Opens), Cleared: t0},
	}
	a.DecideAll(fs, t0.Add(time.Minute))
	assert.Equal(t, []model.FlagState{model.FlagSilenced, model.FlagActive, model.FlagCleared}, []model.FlagState{fs[0].State, fs[1].State, fs[2].State})
	require.NotNil(t, fs[1].Ack)
	assert.Equal(t, "keswin", fs[1].Ack.By)
	a.Decide(&fs[0], t0.Add(3*time.Hour))
	assert.Equal(t, model.FlagActive, fs[0].State, "the silence has expired")
	assert.Len(t, a.Silences(t0), 1)
	assert.Empty(t, a.Silences(t0.Add(3*time.Hour)))
	assert.True(t, a.Unsilence(s.ID))
	assert.False(t, a.Unsilence(s.ID))
}

func TestNewSilenceRefuses(t *testing.T) {
	for _, tt := range []struct {
		job, pattern, by, why string
		d                     time.Duration
	}{
		{"81234", "", "keswin", "why", 30 * time.Second},
		{"81234", "", "keswin", "why", 31 * 24 * time.Hour},
		{"", "", "keswin", "why", time.Hour},
		{"81234", "", " ", "why", time.Hour},
		{"81234", "", "keswin", "", time.Hour},
	} {
		_, err := flagging.NewSilence(tt.job, tt.pattern, tt.d, tt.by, tt.why, t0)
		assert.Error(t, err, "%+v", tt)
	}
	_, err := flagging.NewAck("81234-1", "", "x", t0)
	assert.Error(t, err)
}
