package broker_test

import (
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/bus"
	"sluice/pkg/bus/broker"
)

// start runs an embedded broker on a free loopback port.
func start(t *testing.T) *broker.Embedded {
	t.Helper()
	e, err := broker.Start(broker.Options{Listen: "127.0.0.1:0"})
	require.NoError(t, err)
	t.Cleanup(e.Shutdown) // a second Shutdown must be harmless
	return e
}

func TestStartEmbeddedPubSub(t *testing.T) {
	e := start(t)
	url := e.URL()
	require.True(t, strings.HasPrefix(url, "nats://127.0.0.1:"), url)
	require.NotEqual(t, "nats://127.0.0.1:0", url, "port 0 means a free port, not port 0")

	sub, err := nats.Connect(url)
	require.NoError(t, err)
	defer sub.Close()
	pub, err := nats.Connect(url)
	require.NoError(t, err)
	defer pub.Close()

	s, err := bus.NewSubjects("", "")
	require.NoError(t, err)
	other, err := bus.NewSubjects("", "other")
	require.NoError(t, err)
	samples, err := sub.SubscribeSync(s.AllSamples())
	require.NoError(t, err)
	beats, err := sub.SubscribeSync(s.AllBeats())
	require.NoError(t, err)
	require.NoError(t, sub.Flush(), "subscriptions are registered before publishing")

	require.NoError(t, pub.Publish(other.Sample("cn001"), []byte("other cluster")))
	require.NoError(t, pub.Publish(s.Beat("cn001"), []byte("beat")))
	require.NoError(t, pub.Publish(s.Sample("cn001.example"), []byte("sample")))
	require.NoError(t, pub.Flush())

	msg, err := samples.NextMsg(5 * time.Second)
	require.NoError(t, err)
	assert.Equal(t, "sluice.default.sample.cn001_example", msg.Subject)
	assert.Equal(t, "sample", string(msg.Data), "the other cluster's sample is not delivered")

	msg, err = beats.NextMsg(5 * time.Second)
	require.NoError(t, err)
	assert.Equal(t, "beat", string(msg.Data))

	// Nothing else is pending once a round trip to the server has passed.
	require.NoError(t, sub.Flush())
	n, _, err := samples.Pending()
	require.NoError(t, err)
	assert.Zero(t, n)
}

func TestStartEmbeddedDefaultListen(t *testing.T) {
	e, err := broker.Start(broker.Options{})
	require.NoError(t, err)
	defer e.Shutdown()
	assert.True(t, strings.HasPrefix(e.URL(), "nats://127.0.0.1:"), e.URL())
	nc, err := nats.Connect(e.URL())
	require.NoError(t, err)
	nc.Close()
}

func TestShutdown(t *testing.T) {
	e, err := broker.Start(broker.Options{Listen: "127.0.0.1:0"})
	require.NoError(t, err)
	url := e.URL()
	nc, err := nats.Connect(url, nats.NoReconnect())
	require.NoError(t, err)
	defer nc.Close()

	e.Shutdown()
	_, err = nats.Connect(url, nats.Timeout(time.Second))
	require.Error(t, err, "no server listens after Shutdown")
	assert.Eventually(t, func() bool { return nc.IsClosed() }, 5*time.Second, 10*time.Millisecond,
		"existing clients are disconnected")
}

func TestStartEmbeddedBadListen(t *testing.T) {
	tests := []struct {
		name    string
		input   string
		wantErr string
	}{
		{name: "no port", input: "127.0.0.1", wantErr: "embedded broker listen"},
		{name: "port not a number", input: "127.0.0.1:nats", wantErr: "port"},
		{name: "not an address", input: "::::", wantErr: "embedded broker listen"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			e, err := broker.Start(broker.Options{Listen: tt.input})
			require.Error(t, err)
			assert.Nil(t, e)
			assert.Contains(t, err.Error(), tt.wantErr)
		})
	}
}
