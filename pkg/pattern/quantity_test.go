package pattern_test

import (
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
	"sluice/pkg/pattern"
)

func TestQuantities(t *testing.T) {
	qs := pattern.Quantities()
	require.Len(t, qs, 8)
	for _, q := range qs {
		p, err := pattern.ParseQuantity(q.String())
		require.NoError(t, err)
		assert.Equal(t, q, p)
	}
	_, err := pattern.ParseQuantity("quantity(0)")
	assert.Error(t, err)
	assert.Equal(t, "bytes", pattern.MeanWriteSize.Unit())
	assert.Equal(t, "bytes/s", pattern.DataBytes.Unit())
	assert.Empty(t, pattern.SyncPerWrite.Unit())
	assert.True(t, pattern.BusiestNodeShare.NeedsNodes())
	assert.False(t, pattern.DataBytes.NeedsNodes())
}

func TestConditionString(t *testing.T) {
	assert.Equal(t, "creates level >= critical", pattern.Condition{Op: pattern.LevelAtLeast, Metric: metric.Creates, Level: coding.Critical}.String())
	assert.Equal(t, "read_bytes level <= normal", pattern.Condition{Op: pattern.LevelAtMost, Metric: metric.ReadBytes}.String())
	assert.Equal(t, "stat_ops grade >= 4", pattern.Condition{Op: pattern.GradeAtLeast, Metric: metric.StatOps, Grade: 4}.String())
	assert.Equal(t, "mean_write_size < 65536 bytes", pattern.Condition{Op: pattern.Below, Quantity: pattern.MeanWriteSize, Value: 65536}.String())
	assert.Equal(t, "sync_per_write > 0.5", pattern.Condition{Op: pattern.Above, Quantity: pattern.SyncPerWrite, Value: 0.5}.String())
}
