package coding_test

import (
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/coding"
)

// Hand-computed examples: cuts at p50=10, p75=20, p90=40, p99=100, p99.9=500.
func TestCode(t *testing.T) {
	cuts := coding.GradeCuts{10, 20, 40, 100, 500}
	tests := []struct {
		name string
		rate float64
		idle bool
		want coding.Grade
	}{
		{"idle wins over any rate", 900, true, coding.GradeIdle},
		{"below the median", 3, false, 1},
		{"exactly the median is grade 1", 10, false, 1},
		{"just above the median", 10.0001, false, 2},
		{"at p75", 20, false, 2},
		{"between p75 and p90", 30, false, 3},
		{"between p90 and p99", 99, false, 4},
		{"at the elevated cut is still grade 4", 100, false, 4},
		{"elevated", 101, false, 5},
		{"at the critical cut is elevated", 500, false, 5},
		{"critical", 501, false, coding.GradeTop},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.want, cuts.Code(tt.rate, tt.idle))
		})
	}
}

func TestQuantilesFollowTheLevels(t *testing.T) {
	assert.Equal(t, [5]float64{0.5, 0.75, 0.9, 0.99, 0.999}, coding.GradeQuantiles(0.99, 0.999))
	assert.Equal(t, [5]float64{0.5, 0.75, 0.9, 0.95, 0.995}, coding.GradeQuantiles(0.95, 0.995))
}

func TestParseFormat(t *testing.T) {
	gs, err := coding.ParseGrades("0012 566")
	require.NoError(t, err)
	assert.Equal(t, []coding.Grade{0, 0, 1, 2, 5, 6, 6}, gs)
	assert.Equal(t, "0012566", coding.FormatGrades(gs))

	_, err = coding.ParseGrades("0017")
	assert.ErrorContains(t, err, `character 4 is '7'`)
	assert.Equal(t, "grade(9)", coding.Grade(9).String())
}

// Seed cuts for floor 1, elevated 10000: 10, 100, 1000 (10000^(1/4) = 10,
// worked by hand), then the seed level cuts.
func TestSeed(t *testing.T) {
	c := coding.SeedGradeCuts(1, 1e4, 1e5)
	assert.InDeltaSlice(t, []float64{10, 100, 1000, 1e4, 1e5}, c[:], 1e-9)
}
