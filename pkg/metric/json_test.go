package metric_test

import (
	"encoding/json"
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/metric"
)

func TestRatesJSON(t *testing.T) {
	r := metric.Rates{metric.ReadBytes: 1.5e9, metric.Creates: 1520.5, metric.OtherOps: 0.25}
	b, err := json.Marshal(r)
	require.NoError(t, err)
	// encoding/json sorts map keys, so the object is deterministic.
	assert.JSONEq(t, `{"read_bytes":1.5e9,"write_bytes":0,"read_ops":0,"write_ops":0,
		"opens":0,"closes":0,"creates":1520.5,"removes":0,"stat_ops":0,
		"meta_updates":0,"syncs":0,"other_ops":0.25}`, string(b))

	var back metric.Rates
	require.NoError(t, json.Unmarshal(b, &back))
	assert.Equal(t, r, back)
}

func TestRatesUnmarshalJSON(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		want    metric.Rates
		wantErr string
	}{
		{name: "missing names are zero", input: `{"opens": 2}`, want: metric.Rates{metric.Opens: 2}},
		{name: "empty object", input: `{}`, want: metric.Rates{}},
		{name: "unknown name", input: `{"opens": 2, "open": 1}`, wantErr: `unknown metric "open"`},
		{name: "not an object", input: `[1, 2]`, wantErr: "rates"},
		{name: "string value", input: `{"opens": "2"}`, wantErr: "rates"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := metric.Rates{metric.Syncs: 99} // must be overwritten, not merged
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

func TestValuesJSON(t *testing.T) {
	v := metric.Values{metric.ReadBytes: math.MaxUint64, metric.Syncs: 3}
	b, err := json.Marshal(v)
	require.NoError(t, err)
	// MaxUint64 must survive exactly: a float64 detour would round it.
	assert.Contains(t, string(b), `"read_bytes":18446744073709551615`)

	var back metric.Values
	require.NoError(t, json.Unmarshal(b, &back))
	assert.Equal(t, v, back)
}

func TestValuesUnmarshalJSON(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		want    metric.Values
		wantErr string
	}{
		{name: "missing names are zero", input: `{"removes": 4}`, want: metric.Values{metric.Removes: 4}},
		{name: "unknown name", input: `{"bogus": 1}`, wantErr: `unknown metric "bogus"`},
		{name: "negative value", input: `{"opens": -1}`, wantErr: "values"},
		{name: "fraction", input: `{"opens": 1.5}`, wantErr: "values"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := metric.Values{metric.Syncs: 99}
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

func TestIDText(t *testing.T) {
	// IDs read as names both as map keys and as fields.
	type doc struct {
		Metric metric.ID            `json:"metric"`
		Counts map[metric.ID]uint64 `json:"counts"`
	}
	in := doc{Metric: metric.StatOps, Counts: map[metric.ID]uint64{metric.Opens: 1, metric.WriteBytes: 2}}
	b, err := json.Marshal(in)
	require.NoError(t, err)
	assert.JSONEq(t, `{"metric":"stat_ops","counts":{"opens":1,"write_bytes":2}}`, string(b))

	var out doc
	require.NoError(t, json.Unmarshal(b, &out))
	assert.Equal(t, in, out)

	var id metric.ID
	err = json.Unmarshal([]byte(`"stat_op"`), &id)
	require.Error(t, err)
	assert.Contains(t, err.Error(), "unknown metric")
}
