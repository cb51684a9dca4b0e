package delta_test

import (
	"testing"

	"github.com/stretchr/testify/assert"

	"sluice/pkg/delta"
	"sluice/pkg/metric"
)

func inst(key, epoch string, pairs ...any) delta.Instance {
	in := delta.Instance{Key: key, Epoch: epoch}
	for i := 0; i < len(pairs); i += 2 {
		in.Values[pairs[i].(metric.ID)] = uint64(pairs[i+1].(int))
	}
	return in
}

func vals(pairs ...any) metric.Values { return inst("", "", pairs...).Values }

func TestUpdate(t *testing.T) {
	// Reset semantics follow the counter table in the project's format
	// notes: writing to a Lustre stats file clears every counter
	// (lprocfs_stats_seq_write in lustre/obdclass/lprocfs_status.c), and
	// start_time changes with it from 2.15.2.
	o, g := metric.Opens, metric.StatOps
	tests := []struct {
		name      string
		steps     [][]delta.Instance
		want      []delta.Delta // for the last step
		wantKnown int
	}{
		{
			name:      "first reading only sets the base",
			steps:     [][]delta.Instance{{inst("lustre:a", "", o, 1000000000)}},
			want:      []delta.Delta{},
			wantKnown: 1,
		},
		{
			name: "plain increase",
			steps: [][]delta.Instance{
				{inst("lustre:a", "1.0", o, 10, g, 4)},
				{inst("lustre:a", "1.0", o, 15, g, 4)},
			},
			want:      []delta.Delta{{Key: "lustre:a", Values: vals(o, 5)}},
			wantKnown: 1,
		},
		{
			name: "a metric that goes down resets the whole instance",
			steps: [][]delta.Instance{
				{inst("lustre:a", "", o, 100, g, 7)},
				{inst("lustre:a", "", o, 3, g, 9)},
			},
			want:      []delta.Delta{{Key: "lustre:a", Values: vals(o, 3, g, 9), Reset: true}},
			wantKnown: 1,
		},
		{
			name: "a changed epoch is a reset even when values grew",
			steps: [][]delta.Instance{
				{inst("lustre:a", "100.0", o, 10)},
				{inst("lustre:a", "200.0", o, 12)},
			},
			want:      []delta.Delta{{Key: "lustre:a", Values: vals(o, 12), Reset: true}},
			wantKnown: 1,
		},
		{
			name: "a metric falling to zero (its counter lines vanished) is a reset",
			steps: [][]delta.Instance{
				{inst("lustre:a", "", o, 10, metric.Removes, 5)},
				{inst("lustre:a", "", o, 11)},
			},
			want:      []delta.Delta{{Key: "lustre:a", Values: vals(o, 11), Reset: true}},
			wantKnown: 1,
		},
		{
			name: "a metric appearing from zero counts in full",
			steps: [][]delta.Instance{
				{inst("lustre:a", "", o, 10)},
				{inst("lustre:a", "", o, 10, metric.Syncs, 4)},
			},
			want:      []delta.Delta{{Key: "lustre:a", Values: vals(metric.Syncs, 4)}},
			wantKnown: 1,
		},
		{
			name: "remount: a new instance sets a base, the old one is forgotten",
			steps: [][]delta.Instance{
				{inst("lustre:scratch-ffff0001", "", o, 500)},
				{inst("lustre:scratch-ffff0002", "", o, 20)},
			},
			want:      []delta.Delta{},
			wantKnown: 1,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			differ := delta.NewDiffer()
			var got []delta.Delta
			for _, step := range tt.steps {
				got = differ.Update(step)
			}
			assert.Equal(t, tt.want, got)
			assert.Equal(t, tt.wantKnown, differ.Known())
		})
	}
}

func TestRemountedInstanceComingBackStartsAfresh(t *testing.T) {
	differ := delta.NewDiffer()
	differ.Update([]delta.Instance{inst("lustre:a", "", metric.Opens, 5)})
	differ.Update(nil) // unmounted
	got := differ.Update([]delta.Instance{inst("lustre:a", "", metric.Opens, 900)})
	assert.Empty(t, got, "no spike from a base that was forgotten")
}

func FuzzNeverASpike(f *testing.F) {
	f.Add(uint64(10), uint64(3), uint64(7), "e1", "e1")
	f.Add(uint64(0), uint64(1<<63), uint64(1), "", "x")
	f.Fuzz(func(t *testing.T, a, b, c uint64, e1, e2 string) {
		differ := delta.NewDiffer()
		first := delta.Instance{Key: "k", Epoch: e1}
		first.Values[metric.Opens], first.Values[metric.Creates] = a, b
		second := delta.Instance{Key: "k", Epoch: e2}
		second.Values[metric.Opens], second.Values[metric.Creates] = b, c
		differ.Update([]delta.Instance{first})
		for _, d := range differ.Update([]delta.Instance{second}) {
			for i, v := range d.Values {
				if v > second.Values[i] {
					t.Fatalf("delta %s=%d exceeds the current value %d: a spike", metric.ID(i), v, second.Values[i])
				}
			}
		}
	})
}
