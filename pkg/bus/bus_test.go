package bus_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/bus"
	"sluice/pkg/bus/broker"
)

// The subject rules checked against below are nats-server's own
// (server/sublist.go at v2.15.2: IsValidSubject, IsValidPublishSubject,
// SubjectMatchesFilter): tokens are separated by '.', must be non-empty,
// '*' and '>' are wildcards, and " \t\n\r\f" are not allowed.

func TestNewSubjects(t *testing.T) {
	tests := []struct {
		name    string
		input   [2]string // prefix, cluster
		want    bus.Subjects
		wantErr string
	}{
		{name: "defaults", input: [2]string{"", ""}, want: bus.Subjects{Prefix: "sluice", Cluster: "default"}},
		{name: "prefix only", input: [2]string{"hpc", ""}, want: bus.Subjects{Prefix: "hpc", Cluster: "default"}},
		{name: "cluster only", input: [2]string{"", "c1"}, want: bus.Subjects{Prefix: "sluice", Cluster: "c1"}},
		{name: "multi-token prefix", input: [2]string{"site.hpc", "c-1_a"}, want: bus.Subjects{Prefix: "site.hpc", Cluster: "c-1_a"}},

		{name: "empty prefix token", input: [2]string{"a..b", ""}, wantErr: "subject prefix"},
		{name: "leading dot", input: [2]string{".a", ""}, wantErr: "subject prefix"},
		{name: "trailing dot", input: [2]string{"a.", ""}, wantErr: "subject prefix"},
		{name: "wildcard prefix", input: [2]string{"*", ""}, wantErr: "subject prefix"},
		{name: "full wildcard prefix", input: [2]string{"a.>", ""}, wantErr: "subject prefix"},
		{name: "star inside prefix", input: [2]string{"a*b", ""}, wantErr: "subject prefix"},
		{name: "space in prefix", input: [2]string{"a b", ""}, wantErr: "subject prefix"},
		{name: "tab in prefix", input: [2]string{"a\tb", ""}, wantErr: "subject prefix"},
		{name: "dotted cluster", input: [2]string{"", "a.b"}, wantErr: "cluster name"},
		{name: "wildcard cluster", input: [2]string{"", "*"}, wantErr: "cluster name"},
		{name: "full wildcard cluster", input: [2]string{"", ">"}, wantErr: "cluster name"},
		{name: "space in cluster", input: [2]string{"", "c 1"}, wantErr: "cluster name"},
		{name: "newline in cluster", input: [2]string{"", "c\n"}, wantErr: "cluster name"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := bus.NewSubjects(tt.input[0], tt.input[1])
			if tt.wantErr != "" {
				require.Error(t, err)
				assert.Contains(t, err.Error(), tt.wantErr)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
		})
	}
	assert.Equal(t, "sluice", bus.DefaultPrefix)
	assert.Equal(t, "default", bus.DefaultCluster)
}

func TestSubjectsLayout(t *testing.T) {
	def, err := bus.NewSubjects("", "")
	require.NoError(t, err)
	site, err := bus.NewSubjects("site.hpc", "c1")
	require.NoError(t, err)
	// The layout is the package doc's: <prefix>.<cluster>.<kind>.<node>.
	tests := []struct {
		name  string
		input string // the built subject
		want  string
	}{
		{name: "sample", input: def.Sample("cn001"), want: "sluice.default.sample.cn001"},
		{name: "job", input: def.Job("cn001"), want: "sluice.default.job.cn001"},
		{name: "beat", input: def.Beat("cn001"), want: "sluice.default.beat.cn001"},
		{name: "all samples", input: def.AllSamples(), want: "sluice.default.sample.>"},
		{name: "all jobs", input: def.AllJobs(), want: "sluice.default.job.>"},
		{name: "all beats", input: def.AllBeats(), want: "sluice.default.beat.>"},
		{name: "dotted node name", input: def.Sample("cn001.hpc.example.org"), want: "sluice.default.sample.cn001_hpc_example_org"},
		{name: "empty node name", input: def.Beat(""), want: "sluice.default.beat._"},
		{name: "multi-token prefix sample", input: site.Sample("cn001"), want: "site.hpc.c1.sample.cn001"},
		{name: "multi-token prefix jobs", input: site.AllJobs(), want: "site.hpc.c1.job.>"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			assert.Equal(t, tt.want, tt.input)
			assert.True(t, server.IsValidSubject(tt.input), "nats-server rejects %q", tt.input)
		})
	}

	// Each per-node subject is a literal one that only its own kind's
	// wildcard matches (nats-server SubjectMatchesFilter).
	for _, s := range []bus.Subjects{def, site} {
		per := map[string]string{s.Sample("n"): s.AllSamples(), s.Job("n"): s.AllJobs(), s.Beat("n"): s.AllBeats()}
		for subj, own := range per {
			assert.True(t, server.IsValidPublishSubject(subj), subj)
			for _, filter := range per {
				assert.Equal(t, filter == own, server.SubjectMatchesFilter(subj, filter), "%s vs %s", subj, filter)
			}
		}
	}
}

func TestToken(t *testing.T) {
	tests := []struct {
		name  string
		input string
		want  string
	}{
		{name: "plain", input: "cn001", want: "cn001"},
		{name: "dash and underscore kept", input: "cn-01_a", want: "cn-01_a"},
		{name: "non-ASCII kept", input: "nœud", want: "nœud"},
		{name: "empty", input: "", want: "_"},
		{name: "dot", input: "cn001.example", want: "cn001_example"},
		{name: "star", input: "a*b", want: "a_b"},
		{name: "greater than", input: "a>b", want: "a_b"},
		{name: "space", input: "a b", want: "a_b"},
		{name: "tab, CR and LF", input: "\ta\r\n", want: "_a__"},
		{name: "only wildcards", input: "*", want: "_"},
		{name: "every replaced character", input: ".*> \t\r\n", want: "_______"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := bus.Token(tt.input)
			assert.Equal(t, tt.want, got)
			assert.True(t, server.IsValidPublishSubject("x."+got+".y"), "nats-server rejects token %q", got)
		})
	}
}

func TestTokenEveryByte(t *testing.T) {
	// Whatever a node is called, its subject must be a valid literal
	// subject by nats-server's rules. '\f' is left to TestTokenFormFeed.
	s, err := bus.NewSubjects("", "")
	require.NoError(t, err)
	for c := rune(0); c < 0x100; c++ {
		if c == '\f' {
			continue
		}
		for _, node := range []string{string(c), "a" + string(c) + "b"} {
			subj := s.Sample(node)
			assert.True(t, server.IsValidPublishSubject(subj), "node %q gives %q", node, subj)
			assert.True(t, server.SubjectMatchesFilter(subj, s.AllSamples()), "node %q gives %q", node, subj)
		}
	}
}

func TestTokenFormFeed(t *testing.T) {
	assert.Equal(t, "a_b", bus.Token("a\fb"))
	_, err := bus.NewSubjects("a\fb", "")
	assert.Error(t, err)
}

// start runs an embedded broker on a free loopback port.
func start(t *testing.T) *broker.Embedded {
	t.Helper()
	e, err := broker.Start(broker.Options{Listen: "127.0.0.1:0"})
	require.NoError(t, err)
	t.Cleanup(e.Shutdown)
	return e
}

func TestConnectWaitConnected(t *testing.T) {
	e := start(t)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	nc, err := bus.Connect(ctx, e.URL(), "sluice-test")
	require.NoError(t, err)
	defer nc.Close()
	require.NoError(t, bus.WaitConnected(ctx, nc))
	assert.Equal(t, "sluice-test", nc.Opts.Name)
	assert.Equal(t, -1, nc.Opts.MaxReconnect, "reconnects are unlimited")
}

func TestWaitConnectedNoBroker(t *testing.T) {
	// A URL nothing listens on: a broker that has been shut down.
	e, err := broker.Start(broker.Options{Listen: "127.0.0.1:0"})
	require.NoError(t, err)
	url := e.URL()
	e.Shutdown()

	nc, err := bus.Connect(context.Background(), url, "sluice-test")
	require.NoError(t, err, "Connect retries in the background instead of failing")
	defer nc.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 100*time.Millisecond)
	defer cancel()
	err = bus.WaitConnected(ctx, nc)
	require.Error(t, err)
	assert.True(t, errors.Is(err, bus.ErrNoBroker), "%v", err)
	assert.ErrorIs(t, err, context.DeadlineExceeded)
}
