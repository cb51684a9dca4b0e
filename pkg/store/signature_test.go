package store_test

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sluice/pkg/internal/storetest"
	"sluice/pkg/metric"
	"sluice/pkg/report"
	"sluice/pkg/signature"
	"sluice/pkg/store"
	"sluice/pkg/tracker"
)

// TestSignatureRebuiltFromWindowsEqualsIncremental runs randomized jobs
// through a tracker, persisting its changes batch by batch as the service
// does, and checks that the signature kept incrementally (stored and
// loaded) equals the one rebuilt from the stored windows.
func TestSignatureRebuiltFromWindowsEqualsIncremental(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 5))
	for trial := range 20 {
		s := storetest.MustOpen(t)
		tr, err := tracker.New(tracker.Options{Window: time.Minute, Live: 10 * time.Second, Grace: time.Second})
		require.NoError(t, err)
		job := fmt.Sprint(81000 + trial)
		nodes := 1 + r.IntN(4)
		var seq uint64
		for step := range 6 * (3 + r.IntN(40)) { // 10 s samples, 3 to 42 windows
			seq++
			from := t0.Add(time.Duration(step) * 10 * time.Second)
			for n := range nodes {
				var v metric.Values
				for id := range v {
					if r.IntN(3) > 0 {
						v[id] = uint64(r.ExpFloat64() * 1e4 * float64(r.IntN(1000)))
					}
				}
				require.NoError(t, tr.Sample(&report.Sample{Node: fmt.Sprintf("bw%03d", n+1), Seq: seq, Start: from, End: from.Add(10 * time.Second), Jobs: []string{job}, Values: v}))
			}
			tr.Tick()
			persist(t, s, tr)
		}
		st, err := s.Load()
		require.NoError(t, err)
		require.Len(t, st.Jobs, 1)
		rebuilt, err := s.Signature(job)
		require.NoError(t, err)
		var got signature.Signature
		require.NoError(t, got.UnmarshalBinary(st.Jobs[0].Signature))
		require.Positive(t, got.Windows)
		got.Live, got.HasLive = rebuilt.Live, rebuilt.HasLive // the live entry is not in the windows
		require.Equal(t, rebuilt, got, "trial %d", trial)
	}
}

func persist(t *testing.T, s *store.Store, tr *tracker.Tracker) {
	t.Helper()
	var b store.Batch
	for _, e := range tr.Drain() {
		if e.Kind == tracker.WindowClosed {
			b.Windows = append(b.Windows, *e.Window)
		}
	}
	b.Jobs, b.GoneJobs = tr.DirtyJobs()
	require.NoError(t, s.Apply(&b))
}
