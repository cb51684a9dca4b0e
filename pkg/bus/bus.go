// Package bus holds the NATS side of the project that agents and
// aggregators share: the subject layout and the connection options. The
// embedded broker the aggregator starts when no broker URL is given is in
// bus/broker, so that the agent does not link the NATS server (whose
// process-statistics goroutine would wake the agent every second).
//
// # Basics
//
// Every subject starts with a configurable prefix (default "sluice") and a
// cluster name (default "default"), so several centres or test setups can
// share one broker:
//
//	<prefix>.<cluster>.sample.<node>   one sample per node per interval (wire KindSample)
//	<prefix>.<cluster>.job.<node>      job start and end events (wire KindJobEvent)
//	<prefix>.<cluster>.beat.<node>     agent heartbeats (wire KindHeartbeat)
//
// The aggregator subscribes to "<prefix>.<cluster>.sample.>" and likewise for
// the others. The node token is the node name with characters NATS does not
// allow in a token ('.', '*', '>', white space) replaced by '_'; the
// payload carries the exact node name.
//
// # Caveats
//
// Core NATS delivers at most once. What an agent publishes while the broker
// is away is held by the agent, not by the broker.
package bus

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"
	"unicode"

	"github.com/nats-io/nats.go"
)

// DefaultPrefix and DefaultCluster are the subject prefix and cluster name
// used when configuration leaves them empty.
const (
	DefaultPrefix  = "sluice"
	DefaultCluster = "default"
)

// Subjects builds the subject names for one prefix and cluster.
type Subjects struct {
	Prefix  string
	Cluster string
}

// NewSubjects validates prefix and cluster and fills in defaults.
func NewSubjects(prefix, cluster string) (Subjects, error) {
	if prefix == "" {
		prefix = DefaultPrefix
	}
	if cluster == "" {
		cluster = DefaultCluster
	}
	for _, part := range strings.Split(prefix, ".") {
		if part == "" || Token(part) != part {
			return Subjects{}, fmt.Errorf("subject prefix %q: tokens must be non-empty and free of '.*>' and spaces", prefix)
		}
	}
	if Token(cluster) != cluster {
		return Subjects{}, fmt.Errorf("cluster name %q: must be one subject token, free of '.*>' and spaces", cluster)
	}
	return Subjects{Prefix: prefix, Cluster: cluster}, nil
}

func (s Subjects) base(kind string) string { return s.Prefix + "." + s.Cluster + "." + kind }

// Sample is the subject a node publishes its samples on.
func (s Subjects) Sample(node string) string { return s.base("sample") + "." + Token(node) }

// Job is the subject a node publishes job events on.
func (s Subjects) Job(node string) string { return s.base("job") + "." + Token(node) }

// Beat is the subject a node publishes heartbeats on.
func (s Subjects) Beat(node string) string { return s.base("beat") + "." + Token(node) }

// AllSamples, AllJobs and AllBeats are the aggregator's subscriptions.
func (s Subjects) AllSamples() string { return s.base("sample") + ".>" }

// AllJobs is the wildcard subject for every node's job events.
func (s Subjects) AllJobs() string { return s.base("job") + ".>" }

// AllBeats is the wildcard subject for every node's heartbeats.
func (s Subjects) AllBeats() string { return s.base("beat") + ".>" }

// Token makes name usable as one subject token.
func Token(name string) string {
	if name == "" {
		return "_"
	}
	return strings.Map(func(r rune) rune {
		if r == '.' || r == '*' || r == '>' || unicode.IsSpace(r) || unicode.IsControl(r) {
			return '_'
		}
		return r
	}, name)
}

// ErrNoBroker means no broker answered within the connect timeout.
var ErrNoBroker = errors.New("no broker reachable")

// Connect dials url with the options both binaries use: a name, unlimited
// reconnects with a capped wait, and the reconnect buffer disabled so the
// caller (the agent's outage queue) decides what is kept while the broker is
// away.
func Connect(ctx context.Context, url, name string, extra ...nats.Option) (*nats.Conn, error) {
	opts := []nats.Option{
		nats.Name(name),
		nats.MaxReconnects(-1),
		nats.ReconnectWait(500 * time.Millisecond),
		nats.ReconnectJitter(250*time.Millisecond, time.Second),
		nats.ReconnectBufSize(-1),
		nats.RetryOnFailedConnect(true),
		nats.Timeout(2 * time.Second),
	}
	opts = append(opts, extra...)
	nc, err := nats.Connect(url, opts...)
	if err != nil {
		return nil, fmt.Errorf("connect %s: %w", url, err)
	}
	return nc, nil
}

// WaitConnected blocks until nc is connected or ctx ends.
func WaitConnected(ctx context.Context, nc *nats.Conn) error {
	t := time.NewTicker(10 * time.Millisecond)
	defer t.Stop()
	for !nc.IsConnected() {
		select {
		case <-ctx.Done():
			return fmt.Errorf("%w: %s: %w", ErrNoBroker, nc.Opts.Url, ctx.Err())
		case <-t.C:
		}
	}
	return nil
}
