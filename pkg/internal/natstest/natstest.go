// Package natstest starts a real NATS server inside a test process.
package natstest

import (
	"testing"

	"github.com/nats-io/nats.go"
	"github.com/stretchr/testify/require"

	"sluice/pkg/bus/broker"
)

// Start runs an embedded broker on a free loopback port for the test's
// lifetime and returns it.
func Start(t testing.TB) *broker.Embedded {
	t.Helper()
	srv, err := broker.Start(broker.Options{Listen: "127.0.0.1:0"})
	require.NoError(t, err)
	t.Cleanup(srv.Shutdown)
	return srv
}

// StartAt runs an embedded broker on listen (host:port) for the test's
// lifetime; a test restarts a broker by shutting one down and starting
// another on the same address.
func StartAt(t testing.TB, listen string) *broker.Embedded {
	t.Helper()
	srv, err := broker.Start(broker.Options{Listen: listen})
	require.NoError(t, err)
	t.Cleanup(srv.Shutdown)
	return srv
}

// Connect dials url and closes the connection at cleanup.
func Connect(t testing.TB, url string) *nats.Conn {
	t.Helper()
	nc, err := nats.Connect(url)
	require.NoError(t, err)
	t.Cleanup(nc.Close)
	return nc
}
