package coding_test

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/internal/fixture"
	"sluice/pkg/metric"
)

func readFixture(t testing.TB, name string) []byte {
	t.Helper()
	return fixture.Read(t, "coding", name)
}

// uniform returns cuts with the same pair for every metric.
func uniform(elevated, critical float64) coding.Cuts {
	var c coding.Cuts
	for i := range c {
		c[i] = coding.Cut{Elevated: elevated, Critical: critical}
	}
	return c
}

func TestClassify(t *testing.T) {
	cuts := coding.DefaultCuts()
	// The package doc: "A rate strictly above the critical cut is
	// Critical, above the elevated cut Elevated, otherwise Normal", so a
	// rate equal to a cut is not above it. The opens defaults are 200/2000
	// and the read_bytes defaults 1e9/3e9 (DefaultCuts).
	tests := []struct {
		name   string
		metric metric.ID
		input  float64
		want   coding.Level
	}{
		{name: "zero", metric: metric.Opens, input: 0, want: coding.Normal},
		{name: "negative", metric: metric.Opens, input: -5, want: coding.Normal},
		{name: "just below elevated", metric: metric.Opens, input: math.Nextafter(200, 0), want: coding.Normal},
		{name: "equal to elevated", metric: metric.Opens, input: 200, want: coding.Normal},
		{name: "just above elevated", metric: metric.Opens, input: math.Nextafter(200, math.Inf(1)), want: coding.Elevated},
		{name: "equal to critical", metric: metric.Opens, input: 2000, want: coding.Elevated},
		{name: "just above critical", metric: metric.Opens, input: math.Nextafter(2000, math.Inf(1)), want: coding.Critical},
		{name: "infinite", metric: metric.Opens, input: math.Inf(1), want: coding.Critical},
		{name: "NaN is not above anything", metric: metric.Opens, input: math.NaN(), want: coding.Normal},
		{name: "bytes equal to critical", metric: metric.ReadBytes, input: 3e9, want: coding.Elevated},
		{name: "bytes above critical", metric: metric.ReadBytes, input: 3e9 + 1, want: coding.Critical},
		{name: "per-metric cuts: 250 opens/s is elevated", metric: metric.Opens, input: 250, want: coding.Elevated},
		{name: "per-metric cuts: 250 stat ops/s is normal", metric: metric.StatOps, input: 250, want: coding.Normal},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.want, cuts.Classify(tt.metric, tt.input))
		})
	}
}

func TestClassifyEqualCuts(t *testing.T) {
	// elevated == critical is allowed by Validate; there is no Elevated band.
	c := uniform(10, 10)
	require.NoError(t, c.Validate())
	assert.Equal(t, coding.Normal, c.Classify(metric.Syncs, 10))
	assert.Equal(t, coding.Critical, c.Classify(metric.Syncs, 10.5))
}

func TestDefaultCuts(t *testing.T) {
	// Rule-of-thumb seed values ("common practice", see the package doc):
	// a node can sustain a few GB/s of streaming I/O, so 1 and 3 GB/s for
	// bytes; the op counts are the table in DefaultCuts itself. Writing
	// them out catches an accidental edit.
	want := coding.Cuts{
		metric.ReadBytes:   {Elevated: 1e9, Critical: 3e9},
		metric.WriteBytes:  {Elevated: 1e9, Critical: 3e9},
		metric.ReadOps:     {Elevated: 2000, Critical: 20000},
		metric.WriteOps:    {Elevated: 2000, Critical: 20000},
		metric.Opens:       {Elevated: 200, Critical: 2000},
		metric.Closes:      {Elevated: 200, Critical: 2000},
		metric.Creates:     {Elevated: 100, Critical: 1000},
		metric.Removes:     {Elevated: 100, Critical: 1000},
		metric.StatOps:     {Elevated: 1000, Critical: 10000},
		metric.MetaUpdates: {Elevated: 100, Critical: 1000},
		metric.Syncs:       {Elevated: 50, Critical: 500},
		metric.OtherOps:    {Elevated: 1000, Critical: 10000},
	}
	got := coding.DefaultCuts()
	assert.Equal(t, want, got)
	require.NoError(t, got.Validate())
	for _, id := range metric.All() {
		// Every seed cut must sit above the idle floor, or an idle node
		// would be flagged.
		assert.False(t, coding.IsIdle(id, got[id].Elevated), "%s elevated cut is below the idle floor", id)
	}
}

func TestIdle(t *testing.T) {
	// The idle floors are the package doc's rule of thumb (common
	// practice): under about 10 kB/s or 1 metadata op/s a node is not
	// I/O-relevant. "Below" is strict.
	tests := []struct {
		name   string
		metric metric.ID
		input  float64
		want   bool
	}{
		{name: "no bytes", metric: metric.WriteBytes, input: 0, want: true},
		{name: "bytes just under 10 kB/s", metric: metric.WriteBytes, input: 9999.9, want: true},
		{name: "bytes at 10 kB/s", metric: metric.WriteBytes, input: 10000, want: false},
		{name: "ops just under 1/s", metric: metric.Opens, input: 0.99, want: true},
		{name: "ops at 1/s", metric: metric.Opens, input: 1, want: false},
		{name: "50 ops/s is not idle", metric: metric.ReadOps, input: 50, want: false},
		{name: "50 bytes/s is idle", metric: metric.ReadBytes, input: 50, want: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.want, coding.IsIdle(tt.metric, tt.input))
		})
	}
	assert.Equal(t, 10e3, float64(coding.IdleBytesPerSecond))
	assert.Equal(t, 1.0, float64(coding.IdleOpsPerSecond))
}

func TestValidate(t *testing.T) {
	with := func(id metric.ID, cut coding.Cut) coding.Cuts {
		c := coding.DefaultCuts()
		c[id] = cut
		return c
	}
	tests := []struct {
		name    string
		input   coding.Cuts
		wantErr string
	}{
		{name: "defaults", input: coding.DefaultCuts()},
		{name: "elevated equal to critical", input: with(metric.Syncs, coding.Cut{Elevated: 5, Critical: 5})},
		{name: "tiny positive", input: with(metric.Syncs, coding.Cut{Elevated: 1e-300, Critical: 1e-300})},
		{name: "zero value", input: coding.Cuts{}, wantErr: "read_bytes must be positive"},
		{name: "zero elevated", input: with(metric.Creates, coding.Cut{Elevated: 0, Critical: 10}), wantErr: "creates must be positive"},
		{name: "negative critical", input: with(metric.Removes, coding.Cut{Elevated: 1, Critical: -10}), wantErr: "removes must be positive"},
		{name: "elevated above critical", input: with(metric.OtherOps, coding.Cut{Elevated: 11, Critical: 10}), wantErr: "other_ops: elevated 11 is above critical 10"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.input.Validate()
			if tt.wantErr != "" {
				require.Error(t, err)
				assert.Contains(t, err.Error(), tt.wantErr)
				return
			}
			require.NoError(t, err)
		})
	}
}

func TestValidateRejectsNaN(t *testing.T) {
	c := coding.DefaultCuts()
	c[metric.Opens] = coding.Cut{Elevated: math.NaN(), Critical: math.NaN()}
	require.Error(t, c.Validate(), "NaN is not a positive cut point")

	_, err := coding.LoadCuts(strings.NewReader("opens: {elevated: .nan, critical: .nan}\n"), coding.DefaultCuts())
	require.Error(t, err)
}

func TestLevelText(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		want    coding.Level
		wantErr bool
	}{
		{name: "normal", input: "normal", want: coding.Normal},
		{name: "elevated", input: "elevated", want: coding.Elevated},
		{name: "critical", input: "critical", want: coding.Critical},
		{name: "case matters", input: "Critical", wantErr: true},
		{name: "empty", input: "", wantErr: true},
		{name: "out of range name", input: "level(3)", wantErr: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var got coding.Level
			err := got.UnmarshalText([]byte(tt.input))
			if tt.wantErr {
				require.Error(t, err)
				assert.Contains(t, err.Error(), "unknown level")
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
			text, err := got.MarshalText()
			require.NoError(t, err)
			assert.Equal(t, tt.input, string(text))
		})
	}
	assert.Equal(t, "level(3)", coding.Level(3).String())
	assert.True(t, coding.Normal < coding.Elevated && coding.Elevated < coding.Critical, "levels are ordered by severity")
}

func TestLevelsJSON(t *testing.T) {
	ls := coding.Levels{metric.WriteBytes: coding.Critical, metric.Opens: coding.Elevated}
	b, err := json.Marshal(ls)
	require.NoError(t, err)
	assert.JSONEq(t, `{"read_bytes":"normal","write_bytes":"critical","read_ops":"normal",
		"write_ops":"normal","opens":"elevated","closes":"normal","creates":"normal",
		"removes":"normal","stat_ops":"normal","meta_updates":"normal","syncs":"normal",
		"other_ops":"normal"}`, string(b))

	var back coding.Levels
	require.NoError(t, json.Unmarshal(b, &back))
	assert.Equal(t, ls, back)

	// A single Level is a JSON string too.
	b, err = json.Marshal(coding.Elevated)
	require.NoError(t, err)
	assert.Equal(t, `"elevated"`, string(b))
}

func TestLevelsUnmarshalJSON(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		want    coding.Levels
		wantErr string
	}{
		{name: "missing names are normal", input: `{"syncs":"critical"}`, want: coding.Levels{metric.Syncs: coding.Critical}},
		{name: "unknown metric", input: `{"sync":"critical"}`, wantErr: `unknown metric "sync"`},
		{name: "unknown level", input: `{"syncs":"severe"}`, wantErr: `unknown level "severe"`},
		{name: "level as number", input: `{"syncs":2}`, wantErr: "levels"},
		{name: "not an object", input: `["critical"]`, wantErr: "levels"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := coding.Levels{metric.Opens: coding.Critical} // replaced, not merged
			err := json.Unmarshal([]byte(tt.input), &got)
			if tt.wantErr != "" {
				require.Error(t, err)
				assert.Contains(t, err.Error(), tt.wantErr)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
		})
	}
}

func TestLevelsMax(t *testing.T) {
	assert.Equal(t, coding.Normal, coding.Levels{}.Max())
	assert.Equal(t, coding.Elevated, coding.Levels{metric.OtherOps: coding.Elevated}.Max())
	assert.Equal(t, coding.Critical, coding.Levels{metric.ReadBytes: coding.Critical, metric.Opens: coding.Elevated}.Max())
}

func TestLoadCuts(t *testing.T) {
	def := coding.DefaultCuts()
	with := func(pairs map[metric.ID]coding.Cut) coding.Cuts {
		c := coding.DefaultCuts()
		for id, cut := range pairs {
			c[id] = cut
		}
		return c
	}
	tests := []struct {
		name    string
		input   string // fixture in testdata/level
		want    coding.Cuts
		wantErr string
	}{
		{name: "override", input: "override.yaml", want: with(map[metric.ID]coding.Cut{
			metric.Creates:    {Elevated: 50, Critical: 400},
			metric.WriteBytes: {Elevated: 2e9, Critical: 5e9},
		})},
		{name: "elevated equal to critical", input: "equal.yaml", want: with(map[metric.ID]coding.Cut{metric.Syncs: {Elevated: 10, Critical: 10}})},
		{name: "no overrides", input: "empty.yaml", want: def},
		{name: "missing critical", input: "missing_critical.yaml", wantErr: "cut points for opens: give both elevated and critical"},
		{name: "unknown metric", input: "unknown_metric.yaml", wantErr: `unknown metric "open"`},
		{name: "elevated above critical", input: "inverted.yaml", wantErr: "removes: elevated 500 is above critical 50"},
		{name: "not positive", input: "not_positive.yaml", wantErr: "stat_ops must be positive"},
		{name: "unknown field", input: "unknown_field.yaml", wantErr: "warning"},
		{name: "not a map", input: "not_a_map.yaml", wantErr: "cut points"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := coding.LoadCuts(bytes.NewReader(readFixture(t, tt.input)), def)
			if tt.wantErr != "" {
				require.Error(t, err)
				assert.Contains(t, err.Error(), tt.wantErr)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
		})
	}
}

func TestLoadCutsBase(t *testing.T) {
	base := uniform(7, 70)
	got, err := coding.LoadCuts(strings.NewReader(""), base)
	require.NoError(t, err, "empty input keeps the base")
	assert.Equal(t, base, got)

	got, err = coding.LoadCuts(strings.NewReader("opens: {elevated: 1, critical: 2}"), base)
	require.NoError(t, err)
	assert.Equal(t, coding.Cut{Elevated: 1, Critical: 2}, got[metric.Opens])
	assert.Equal(t, coding.Cut{Elevated: 7, Critical: 70}, got[metric.Closes], "other metrics keep the base")
	assert.Equal(t, uniform(7, 70), base, "the caller's base is not modified")

	_, err = coding.LoadCuts(strings.NewReader(""), coding.Cuts{})
	require.Error(t, err, "the result is validated even with no overrides")
}

func FuzzLoadCuts(f *testing.F) {
	entries, err := os.ReadDir(fixture.Path(f, "coding"))
	require.NoError(f, err)
	for _, e := range entries {
		f.Add(readFixture(f, e.Name()))
	}
	f.Add([]byte("opens: {elevated: 1e308, critical: .inf}\n"))
	f.Add([]byte("opens: {elevated: -.inf, critical: 1}\n"))
	f.Add([]byte("opens: {elevated: 1, critical: 2}\nopens: {elevated: 1, critical: 2}\n"))
	f.Add([]byte("? [a]\n: {}\n"))
	f.Add([]byte("---\n---\ncreates: {elevated: 1, critical: 0}\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := coding.LoadCuts(bytes.NewReader(data), coding.DefaultCuts())
		if err != nil {
			return
		}
		require.NoError(t, got.Validate())
	})
}
