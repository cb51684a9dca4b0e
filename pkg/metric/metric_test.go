package metric_test

import (
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/metric"
)

// wireTable is wire format v1's metric table, written out literally: the
// numeric code of each metric and its configuration/API name. The package
// doc says codes are never renumbered, so any change here breaks old
// agents talking to new aggregators.
var wireTable = []struct {
	id   metric.ID
	code uint8
	name string
}{
	{metric.ReadBytes, 0, "read_bytes"},
	{metric.WriteBytes, 1, "write_bytes"},
	{metric.ReadOps, 2, "read_ops"},
	{metric.WriteOps, 3, "write_ops"},
	{metric.Opens, 4, "opens"},
	{metric.Closes, 5, "closes"},
	{metric.Creates, 6, "creates"},
	{metric.Removes, 7, "removes"},
	{metric.StatOps, 8, "stat_ops"},
	{metric.MetaUpdates, 9, "meta_updates"},
	{metric.Syncs, 10, "syncs"},
	{metric.OtherOps, 11, "other_ops"},
}

func TestWireCodesAndNames(t *testing.T) {
	require.Equal(t, len(wireTable), int(metric.Count), "a metric was added or removed: extend wireTable")
	for _, tt := range wireTable {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.code, uint8(tt.id))
			assert.Equal(t, tt.name, tt.id.String())
			assert.True(t, tt.id.Valid())
		})
	}
}

func TestAll(t *testing.T) {
	var want []metric.ID
	for _, tt := range wireTable {
		want = append(want, tt.id)
	}
	assert.Equal(t, want, metric.All(), "All lists every metric in wire order")
}

func TestParseStringRoundTrip(t *testing.T) {
	for _, id := range metric.All() {
		t.Run(id.String(), func(t *testing.T) {
			got, err := metric.Parse(id.String())
			require.NoError(t, err)
			assert.Equal(t, id, got)
		})
	}
}

func TestParse(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		want    metric.ID
		wantErr bool
	}{
		{name: "first", input: "read_bytes", want: metric.ReadBytes},
		{name: "last", input: "other_ops", want: metric.OtherOps},
		{name: "empty", input: "", wantErr: true},
		{name: "case matters", input: "Read_Bytes", wantErr: true},
		{name: "surrounding space", input: " opens", wantErr: true},
		{name: "raw counter name is not a metric", input: "open", wantErr: true},
		{name: "String of an invalid id", input: metric.Count.String(), wantErr: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := metric.Parse(tt.input)
			if tt.wantErr {
				require.Error(t, err)
				assert.Contains(t, err.Error(), "unknown metric")
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
		})
	}
}

func TestInvalidID(t *testing.T) {
	for _, id := range []metric.ID{metric.Count, 200, math.MaxUint8} {
		assert.False(t, id.Valid(), "%d", id)
	}
	assert.Equal(t, "metric(12)", metric.Count.String())
	assert.Equal(t, "metric(255)", metric.ID(255).String())
}

func TestClassesAndUnits(t *testing.T) {
	// The classes follow the comments on the constants: byte metrics are
	// read_bytes and write_bytes; metadata metrics are those served by a
	// parallel filesystem's metadata servers (open, close, create, remove,
	// stat, attribute/namespace updates).
	tests := []struct {
		name     string
		input    metric.ID
		bytes    bool
		metadata bool
		unit     string
	}{
		{name: "read_bytes", input: metric.ReadBytes, bytes: true, unit: "bytes/s"},
		{name: "write_bytes", input: metric.WriteBytes, bytes: true, unit: "bytes/s"},
		{name: "read_ops", input: metric.ReadOps, unit: "ops/s"},
		{name: "write_ops", input: metric.WriteOps, unit: "ops/s"},
		{name: "opens", input: metric.Opens, metadata: true, unit: "ops/s"},
		{name: "closes", input: metric.Closes, metadata: true, unit: "ops/s"},
		{name: "creates", input: metric.Creates, metadata: true, unit: "ops/s"},
		{name: "removes", input: metric.Removes, metadata: true, unit: "ops/s"},
		{name: "stat_ops", input: metric.StatOps, metadata: true, unit: "ops/s"},
		{name: "meta_updates", input: metric.MetaUpdates, metadata: true, unit: "ops/s"},
		{name: "syncs", input: metric.Syncs, unit: "ops/s"},
		{name: "other_ops", input: metric.OtherOps, unit: "ops/s"},
	}
	require.Len(t, tests, int(metric.Count))
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.bytes, tt.input.IsBytes(), "IsBytes")
			assert.Equal(t, tt.metadata, tt.input.IsMetadata(), "IsMetadata")
			assert.Equal(t, tt.unit, tt.input.Unit(), "Unit")
		})
	}
}

func TestValuesAdd(t *testing.T) {
	v := metric.Values{metric.ReadBytes: 10, metric.Opens: 1}
	v.Add(metric.Values{metric.ReadBytes: 5, metric.OtherOps: 7})
	assert.Equal(t, metric.Values{metric.ReadBytes: 15, metric.Opens: 1, metric.OtherOps: 7}, v)
	assert.False(t, v.IsZero())
	assert.True(t, metric.Values{}.IsZero())
	assert.False(t, metric.Values{metric.OtherOps: 1}.IsZero(), "the last metric counts too")
}

func TestRatesOf(t *testing.T) {
	v := metric.Values{metric.ReadBytes: 1000, metric.Opens: 3, metric.OtherOps: 1}
	tests := []struct {
		name  string
		input float64 // seconds
		want  metric.Rates
	}{
		{name: "ten seconds", input: 10, want: metric.Rates{metric.ReadBytes: 100, metric.Opens: 0.3, metric.OtherOps: 0.1}},
		{name: "half a second", input: 0.5, want: metric.Rates{metric.ReadBytes: 2000, metric.Opens: 6, metric.OtherOps: 2}},
		{name: "zero seconds gives zero rates", input: 0, want: metric.Rates{}},
		{name: "negative seconds gives zero rates", input: -1, want: metric.Rates{}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := metric.RatesOf(v, tt.input)
			for i := range got {
				assert.InDelta(t, tt.want[i], got[i], 1e-12, metric.ID(i).String())
			}
		})
	}
}
