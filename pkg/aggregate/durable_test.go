package aggregate_test

import (
	"context"
	"net/http"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/ingest"
	"sluice/pkg/metric"
)

// ackFloor is the last stream sequence the aggregator has acknowledged,
// and the stream's last sequence.
func (r *rig) ackFloor() (acked, last uint64) {
	js, err := jetstream.New(r.nc)
	require.NoError(r.t, err)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	cons, err := js.Consumer(ctx, "SLUICE_DEFAULT", ingest.ConsumerName)
	require.NoError(r.t, err)
	info, err := cons.Info(ctx)
	require.NoError(r.t, err)
	st, err := js.Stream(ctx, "SLUICE_DEFAULT")
	require.NoError(r.t, err)
	si, err := st.Info(ctx)
	require.NoError(r.t, err)
	return info.AckFloor.Stream, si.State.LastSeq
}

func (r *rig) health() int {
	resp, err := http.Get("http://" + r.svc.HTTPAddr() + "/healthz")
	require.NoError(r.t, err)
	resp.Body.Close()
	return resp.StatusCode
}

// TestFailingDiskAcknowledgesNothingUnsaved: while the state file cannot
// be written, /healthz says so and the aggregator acknowledges nothing
// more of the stream, though it goes on reading; once the disk takes
// writes again everything is saved and acknowledged, and a restart finds
// every sample, counted once.
func TestFailingDiskAcknowledgesNothingUnsaved(t *testing.T) {
	r := newRig(t)
	r.advance(3)
	require.Eventually(t, func() bool { a, l := r.ackFloor(); return a == l }, 5*time.Second, 10*time.Millisecond, "saved and acknowledged")
	before, _ := r.ackFloor()

	r.diskFails.Store(true)
	r.advance(4)
	assert.Equal(t, http.StatusServiceUnavailable, r.health(), "/healthz says the state file cannot be written")
	acked, last := r.ackFloor()
	assert.Equal(t, before, acked, "nothing acknowledged that was not saved")
	assert.Greater(t, last, acked, "though the stream has more, and the aggregator read it")
	assert.Positive(t, r.svc.Snapshot().Ingest.StoreErrors)

	r.diskFails.Store(false)
	r.svc.Tick()
	assert.Equal(t, http.StatusOK, r.health())
	require.Eventually(t, func() bool { a, l := r.ackFloor(); return a == l }, 5*time.Second, 10*time.Millisecond, "saved and acknowledged once writable")

	r.stopService()
	r.startService()
	last7 := len(r.totals) - 1
	var creates uint64
	for _, n := range []string{"bw001", "bw002"} {
		creates += r.totals[last7][n]["create"] - r.totals[0][n]["create"]
	}
	require.Positive(t, creates)
	assert.Equal(t, creates, r.jobs()["4101"].Totals[metric.Creates], "every sample, once")
}
