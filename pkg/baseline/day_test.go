package baseline_test

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

func TestDayKey(t *testing.T) {
	tests := []struct {
		name string
		in   time.Time
		want string
	}{
		{"epoch", time.Unix(0, 0), "1970-01-01"},
		{"last second of a day", time.Date(2026, 12, 1, 23, 59, 59, 999, time.UTC), "2026-12-01"},
		{"midnight", time.Date(2026, 12, 2, 0, 0, 0, 0, time.UTC), "2026-12-02"},
		{"zone is ignored, UTC counts", time.Date(2026, 12, 2, 0, 30, 0, 0, time.FixedZone("CET", 3600)), "2026-12-01"},
		{"before 1970", time.Date(1969, 12, 31, 23, 0, 0, 0, time.UTC), "1969-12-31"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			k := baseline.DayOf(tt.in)
			assert.Equal(t, tt.want, k.String())
			back, err := baseline.ParseDayKey(tt.want)
			require.NoError(t, err)
			assert.Equal(t, k, back)
			assert.True(t, k.Time().Equal(tt.in.Truncate(0).UTC().Truncate(24*time.Hour)))
		})
	}
	_, err := baseline.ParseDayKey("2026-13-01")
	assert.Error(t, err)

	b, err := json.Marshal(map[string]baseline.DayKey{"day": baseline.DayOf(time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC))})
	require.NoError(t, err)
	assert.JSONEq(t, `{"day":"2026-12-01"}`, string(b))
	var back map[string]baseline.DayKey
	require.NoError(t, json.Unmarshal(b, &back))
	assert.Equal(t, "2026-12-01", back["day"].String())
}

func TestDayAdd(t *testing.T) {
	tests := []struct {
		name     string
		id       metric.ID
		rate     float64
		wantErr  error
		wantIdle uint64
		wantWin  uint64
	}{
		{"zero is idle", metric.ReadBytes, 0, nil, 1, 0},
		{"below the byte floor is idle", metric.ReadBytes, coding.IdleBytesPerSecond - 1, nil, 1, 0},
		{"the byte floor is not idle", metric.ReadBytes, coding.IdleBytesPerSecond, nil, 0, 1},
		{"below the op floor is idle", metric.Opens, 0.99, nil, 1, 0},
		{"the op floor is not idle", metric.Opens, coding.IdleOpsPerSecond, nil, 0, 1},
		{"a large rate", metric.WriteBytes, 1e11, nil, 0, 1},
		{"negative", metric.Opens, -1, baseline.ErrInvalidValue, 0, 0},
		{"negative zero is zero", metric.Opens, math.Copysign(0, -1), nil, 1, 0},
		{"NaN", metric.Opens, math.NaN(), baseline.ErrInvalidValue, 0, 0},
		{"+Inf", metric.Opens, math.Inf(1), baseline.ErrInvalidValue, 0, 0},
		{"-Inf", metric.Opens, math.Inf(-1), baseline.ErrInvalidValue, 0, 0},
		{"too large for the sketch", metric.Opens, math.MaxFloat64, baseline.ErrInvalidValue, 0, 0},
		{"unknown metric", metric.Count, 5, baseline.ErrUnknownMetric, 0, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d := baseline.NewDay()
			err := d.Add(tt.id, tt.rate)
			if tt.wantErr != nil {
				require.ErrorIs(t, err, tt.wantErr)
			} else {
				require.NoError(t, err)
			}
			assert.Equal(t, tt.wantIdle, d.Idle(tt.id))
			assert.Equal(t, tt.wantWin, d.Windows(tt.id))
			assert.Equal(t, tt.wantErr != nil, d.IsEmpty())
		})
	}
}

// TestIdleFloorMatchesLevel pins the floor Bins raises representatives to
// against coding.IsIdle, so the two cannot drift apart unnoticed.
func TestIdleFloorMatchesLevel(t *testing.T) {
	for id := range metric.Count {
		floor := float64(coding.IdleOpsPerSecond)
		if id.IsBytes() {
			floor = coding.IdleBytesPerSecond
		}
		require.False(t, coding.IsIdle(id, floor), "%s", id)
		require.True(t, coding.IsIdle(id, math.Nextafter(floor, 0)), "%s", id)

		// A window at the floor lands in a bin whose representative is
		// below it; Bins must report a value that is not idle.
		d := baseline.NewDay()
		require.NoError(t, d.Add(id, floor))
		bs := binsOf(d, id)
		require.Len(t, bs, 1)
		assert.False(t, coding.IsIdle(id, bs[0].Value), "%s: bin value %g", id, bs[0].Value)
		assert.InEpsilon(t, floor, bs[0].Value, baseline.RelativeAccuracy)
	}
}

func TestBinsAreAscendingAndWithinAccuracy(t *testing.T) {
	d := baseline.NewDay()
	vs := []float64{1.5, 1e3, 2e3, 2.01e3, 7.7e6, 1e9}
	for _, v := range vs {
		require.NoError(t, d.Add(metric.StatOps, v))
	}
	bs := binsOf(d, metric.StatOps)
	require.Len(t, bs, 5, "2000 and 2010 share a 2%% bin")
	for i, b := range bs {
		if i > 0 {
			assert.Greater(t, b.Value, bs[i-1].Value)
		}
	}
	assert.Equal(t, uint64(2), bs[2].Count)
	for i, v := range []float64{1.5, 1e3, 2e3, 7.7e6, 1e9} {
		assert.InEpsilon(t, v, bs[i].Value, baseline.RelativeAccuracy)
	}
	// Stopping early is allowed.
	n := 0
	for range d.Bins(metric.StatOps) {
		n++
		break
	}
	assert.Equal(t, 1, n)
	assert.Empty(t, binsOf(d, metric.Count))
}

func TestAddWithCount(t *testing.T) {
	d := baseline.NewDay()
	require.NoError(t, d.AddWithCount(metric.Syncs, 10, 5))
	require.NoError(t, d.AddWithCount(metric.Syncs, 0, 7))
	require.NoError(t, d.AddWithCount(metric.Syncs, 10, 0))
	assert.Equal(t, uint64(5), d.Windows(metric.Syncs))
	assert.Equal(t, uint64(7), d.Idle(metric.Syncs))
	require.ErrorIs(t, d.AddWithCount(metric.Syncs, -3, 1), baseline.ErrInvalidValue)
}

// TestExportImportReproducesTheDay writes a day as CSV rows (metric, value,
// count; the idle windows as value 0), reads them back with AddWithCount
// and expects the very same sketches and encoding.
func TestExportImportReproducesTheDay(t *testing.T) {
	d := realisticDay(t, 11, 20_000)
	csv := exportCSV(d)
	imported := importCSV(t, csv)
	requireSameDay(t, d, imported)
	want, err := d.MarshalBinary()
	require.NoError(t, err)
	got, err := imported.MarshalBinary()
	require.NoError(t, err)
	assert.Equal(t, want, got)
}

func exportCSV(d *baseline.Day) string {
	var b strings.Builder
	for id := range metric.Count {
		if n := d.Idle(id); n > 0 {
			fmt.Fprintf(&b, "%s,0,%d\n", id, n)
		}
		for v, c := range d.Bins(id) {
			fmt.Fprintf(&b, "%s,%s,%d\n", id, strconv.FormatFloat(v, 'g', -1, 64), c)
		}
	}
	return b.String()
}

func importCSV(t *testing.T, csv string) *baseline.Day {
	t.Helper()
	d := baseline.NewDay()
	for line := range strings.Lines(csv) {
		f := strings.Split(strings.TrimSpace(line), ",")
		require.Len(t, f, 3)
		id, err := metric.Parse(f[0])
		require.NoError(t, err)
		v, err := strconv.ParseFloat(f[1], 64)
		require.NoError(t, err)
		c, err := strconv.ParseUint(f[2], 10, 64)
		require.NoError(t, err)
		require.NoError(t, d.AddWithCount(id, v, c))
	}
	return d
}

func TestClone(t *testing.T) {
	d := realisticDay(t, 2, 1000)
	c := d.Clone()
	requireSameDay(t, d, c)
	require.NoError(t, c.Add(metric.ReadOps, 100))
	assert.Equal(t, d.Windows(metric.ReadOps)+1, c.Windows(metric.ReadOps))
}

// Example_csv shows the export and import of a day as CSV rows.
func Example_csv() {
	d := baseline.NewDay()
	for _, v := range []float64{0, 0, 5, 5, 120} {
		_ = d.Add(metric.Opens, v)
	}
	fmt.Printf("%s,0,%d\n", metric.Opens, d.Idle(metric.Opens))
	for v, n := range d.Bins(metric.Opens) {
		fmt.Printf("%s,%.4g,%d\n", metric.Opens, v, n)
	}
	// Output:
	// opens,0,2
	// opens,5.003,2
	// opens,120.3,1
}
