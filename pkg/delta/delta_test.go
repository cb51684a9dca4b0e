package delta_test

import (
	"testing"

	"github.com/stretchr/testify/assert"

	"sluice/pkg/delta"
	"sluice/pkg/source"
)

func reading(key, epoch string, counters map[string]uint64) source.Reading {
	return source.Reading{Key: key, Epoch: epoch, Counters: counters}
}

func TestUpdate(t *testing.T) {
	// Reset semantics follow the counter table in the project's format
	// notes: writing to a Lustre stats file clears every counter
	// (lprocfs_stats_seq_write in lustre/obdclass/lprocfs_status.c), and
	// start_time changes with it from 2.15.2.
	tests := []struct {
		name      string
		steps     [][]source.Reading
		want      []delta.Delta // for the last step
		wantKnown int
	}{
		{
			name:      "first reading only sets the base",
			steps:     [][]source.Reading{{reading("lustre:a", "", map[string]uint64{"open": 1e9})}},
			want:      []delta.Delta{},
			wantKnown: 1,
		},
		{
			name: "plain increase",
			steps: [][]source.Reading{
				{reading("lustre:a", "1.0", map[string]uint64{"open": 10, "close": 4})},
				{reading("lustre:a", "1.0", map[string]uint64{"open": 15, "close": 4})},
			},
			want:      []delta.Delta{{Key: "lustre:a", Counters: map[string]uint64{"open": 5, "close": 0}}},
			wantKnown: 1,
		},
		{
			name: "a counter that goes down resets the whole instance",
			steps: [][]source.Reading{
				{reading("lustre:a", "", map[string]uint64{"open": 100, "getattr": 7})},
				{reading("lustre:a", "", map[string]uint64{"open": 3, "getattr": 9})},
			},
			want:      []delta.Delta{{Key: "lustre:a", Counters: map[string]uint64{"open": 3, "getattr": 9}, Reset: true}},
			wantKnown: 1,
		},
		{
			name: "a changed epoch is a reset even when values grew",
			steps: [][]source.Reading{
				{reading("lustre:a", "100.0", map[string]uint64{"open": 10})},
				{reading("lustre:a", "200.0", map[string]uint64{"open": 12})},
			},
			want:      []delta.Delta{{Key: "lustre:a", Counters: map[string]uint64{"open": 12}, Reset: true}},
			wantKnown: 1,
		},
		{
			name: "a vanished counter line means zero, so it is a reset",
			steps: [][]source.Reading{
				{reading("lustre:a", "", map[string]uint64{"open": 10, "unlink": 5})},
				{reading("lustre:a", "", map[string]uint64{"open": 11})},
			},
			want:      []delta.Delta{{Key: "lustre:a", Counters: map[string]uint64{"open": 11}, Reset: true}},
			wantKnown: 1,
		},
		{
			name: "a counter appearing from zero counts in full",
			steps: [][]source.Reading{
				{reading("lustre:a", "", map[string]uint64{"open": 10})},
				{reading("lustre:a", "", map[string]uint64{"open": 10, "fsync": 4})},
			},
			want:      []delta.Delta{{Key: "lustre:a", Counters: map[string]uint64{"open": 0, "fsync": 4}}},
			wantKnown: 1,
		},
		{
			name: "remount: a new instance sets a base, the old one is forgotten",
			steps: [][]source.Reading{
				{reading("lustre:scratch-ffff0001", "", map[string]uint64{"open": 500})},
				{reading("lustre:scratch-ffff0002", "", map[string]uint64{"open": 20})},
			},
			want:      []delta.Delta{},
			wantKnown: 1,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			tr := delta.NewTracker()
			var got []delta.Delta
			for _, step := range tt.steps {
				got = tr.Update(step)
			}
			assert.Equal(t, tt.want, got)
			assert.Equal(t, tt.wantKnown, tr.Known())
		})
	}
}

func TestRemountedInstanceComingBackStartsAfresh(t *testing.T) {
	tr := delta.NewTracker()
	tr.Update([]source.Reading{reading("lustre:a", "", map[string]uint64{"open": 5})})
	tr.Update(nil) // unmounted
	got := tr.Update([]source.Reading{reading("lustre:a", "", map[string]uint64{"open": 900})})
	assert.Empty(t, got, "no spike from a base that was forgotten")
}

func FuzzNeverNegative(f *testing.F) {
	f.Add(uint64(10), uint64(3), uint64(7), "e1", "e1")
	f.Add(uint64(0), uint64(1<<63), uint64(1), "", "x")
	f.Fuzz(func(t *testing.T, a, b, c uint64, e1, e2 string) {
		tr := delta.NewTracker()
		tr.Update([]source.Reading{reading("k", e1, map[string]uint64{"x": a, "y": b})})
		ds := tr.Update([]source.Reading{reading("k", e2, map[string]uint64{"x": b, "y": c})})
		for _, d := range ds {
			for name, v := range d.Counters {
				now := map[string]uint64{"x": b, "y": c}[name]
				if v > now {
					t.Fatalf("delta %s=%d exceeds the current value %d: a spike", name, v, now)
				}
			}
		}
	})
}
