// Package natstest starts a real NATS server, with JetStream, inside a
// test process.
package natstest

import (
	"context"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/stretchr/testify/require"

	"sluice/pkg/bus"
	"sluice/pkg/bus/broker"
)

// Start runs an embedded broker with JetStream (its store in a temporary
// directory) on a free loopback port for the test's lifetime, with the
// default cluster's stream created, and returns it.
func Start(t testing.TB) *broker.Embedded {
	t.Helper()
	srv := StartAt(t, "127.0.0.1:0", t.TempDir())
	Stream(t, srv.URL())
	return srv
}

// StartAt runs an embedded broker with JetStream, its store in storeDir,
// on listen (host:port) for the test's lifetime; a test restarts a broker
// by shutting one down and starting another on the same address and store,
// which keeps the stream and what it holds.
func StartAt(t testing.TB, listen, storeDir string) *broker.Embedded {
	t.Helper()
	srv, err := broker.Start(broker.Options{Listen: listen, StoreDir: storeDir})
	require.NoError(t, err)
	t.Cleanup(srv.Shutdown)
	return srv
}

// Stream creates (or updates) the default cluster's stream on the broker
// at url, as the aggregator does.
func Stream(t testing.TB, url string) {
	t.Helper()
	nc := Connect(t, url)
	js, err := jetstream.New(nc)
	require.NoError(t, err)
	subj, err := bus.NewSubjects("", "")
	require.NoError(t, err)
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	_, err = js.CreateOrUpdateStream(ctx, subj.StreamConfig(bus.StreamOptions{}))
	require.NoError(t, err)
}

// Connect dials url and closes the connection at cleanup.
func Connect(t testing.TB, url string) *nats.Conn {
	t.Helper()
	nc, err := nats.Connect(url)
	require.NoError(t, err)
	t.Cleanup(nc.Close)
	return nc
}
