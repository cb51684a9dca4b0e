package bus

import (
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"sluice/pkg/report"
)

// Delivery says how samples and job events travel from the agents to the
// aggregator.
type Delivery string

// The deliveries.
const (
	// Stream is JetStream, the default: the broker stores every sample and
	// job event in a stream before it acknowledges it, the agent keeps a
	// message until then, and the aggregator acknowledges what it read
	// only once the state it changed is saved. Nothing is lost when the
	// aggregator, the broker or an agent dies.
	Stream Delivery = "stream"
	// Core is plain NATS, an explicit choice: at most once. What is
	// published while no aggregator listens is lost, and what the
	// aggregator had not saved when it died is lost with it.
	Core Delivery = "core"
)

// ParseDelivery reads "stream" or "core"; empty means Stream.
func ParseDelivery(s string) (Delivery, error) {
	switch Delivery(s) {
	case "", Stream:
		return Stream, nil
	case Core:
		return Core, nil
	}
	return "", fmt.Errorf("delivery %q: want stream or core", s)
}

// StreamName is the name of the stream that keeps the samples and job
// events of this prefix and cluster, e.g. "SLUICE_DEFAULT".
func (s Subjects) StreamName() string {
	return strings.ToUpper(strings.ReplaceAll(s.Prefix, ".", "_") + "_" + s.Cluster)
}

// StreamOptions bound the stream. Zero values mean the defaults.
type StreamOptions struct {
	// MaxAge is how long a message is kept: the longest outage of the
	// aggregator the site plans for. Zero means 24 hours.
	MaxAge time.Duration
	// MaxBytes bounds the stream's size; the oldest messages go first.
	// Zero means 8 GiB (at 200 bytes a sample, 20,000 nodes at 5 s for
	// about a day).
	MaxBytes int64
	// Duplicates is how long the broker remembers a message id, so that a
	// publish retried after a lost acknowledgement is stored once. Zero
	// means 10 minutes; the aggregator's own (node, sequence) check drops
	// what comes later.
	Duplicates time.Duration
}

func (o StreamOptions) withDefaults() StreamOptions {
	if o.MaxAge == 0 {
		o.MaxAge = 24 * time.Hour
	}
	if o.MaxBytes == 0 {
		o.MaxBytes = 8 << 30
	}
	if o.Duplicates == 0 {
		o.Duplicates = 10 * time.Minute
	}
	return o
}

// StreamConfig is the configuration of the stream that keeps the samples
// and job events, on disk.
func (s Subjects) StreamConfig(o StreamOptions) jetstream.StreamConfig {
	o = o.withDefaults()
	return jetstream.StreamConfig{
		Name:        s.StreamName(),
		Description: "Sluice samples and job events of cluster " + s.Cluster,
		Subjects:    []string{s.AllSamples(), s.AllJobs()},
		Storage:     jetstream.FileStorage,
		Retention:   jetstream.LimitsPolicy,
		Discard:     jetstream.DiscardOld,
		MaxAge:      o.MaxAge,
		MaxBytes:    o.MaxBytes,
		Duplicates:  o.Duplicates,
	}
}

// SampleID is the de-duplication key of a sample: its node and sequence.
func SampleID(node string, seq uint64) string {
	return "sample/" + node + "/" + strconv.FormatUint(seq, 10)
}

// JobEventID is the de-duplication key of a job event: the node that
// reported it, the job and whether it started or ended. Every node of a
// job reports its start; each report is kept, once.
func JobEventID(e *report.JobEvent) string {
	return "job/" + e.Node + "/" + e.Job + "/" + e.Type.String()
}

// MsgIDHeader is the header that carries a message's de-duplication key.
const MsgIDHeader = nats.MsgIdHdr
