package nodeagent

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"sluice/pkg/bus"
)

// publisher delivers queued messages over one connection and says how
// many of the oldest are delivered: stored by the stream (bus.Stream), or
// taken by the broker (bus.Core).
type publisher interface {
	deliver(ctx context.Context, items []queued) (int, error)
}

// streamPublisher publishes into the JetStream stream, each message with
// its de-duplication key, and counts a message delivered once the stream
// has acknowledged it. A message whose acknowledgement was lost is sent
// again and stored once (the stream's duplicate window, then the
// aggregator's (node, sequence) check).
type streamPublisher struct {
	js     jetstream.JetStream
	stream string
}

func newStreamPublisher(nc *nats.Conn, stream string) (*streamPublisher, error) {
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncTimeout(deliverTimeout))
	if err != nil {
		return nil, fmt.Errorf("jetstream: %w", err)
	}
	return &streamPublisher{js: js, stream: stream}, nil
}

// deliver publishes every item asynchronously, then waits for the
// acknowledgements; the delivered ones are the acknowledged prefix, so a
// message is never taken for delivered while an older one is not.
func (p *streamPublisher) deliver(ctx context.Context, items []queued) (int, error) {
	futures := make([]jetstream.PubAckFuture, 0, len(items))
	var err error
	for _, m := range items {
		msg := &nats.Msg{Subject: m.subject, Data: m.data, Header: nats.Header{bus.MsgIDHeader: []string{m.id}}}
		f, perr := p.js.PublishMsgAsync(msg, jetstream.WithExpectStream(p.stream))
		if perr != nil {
			err = perr
			break
		}
		futures = append(futures, f)
	}
	for i, f := range futures {
		select {
		case <-f.Ok():
		case ferr := <-f.Err():
			return i, fmt.Errorf("stream %s did not store %s: %w", p.stream, items[i].id, ferr)
		case <-ctx.Done():
			return i, fmt.Errorf("stream %s: no acknowledgement: %w", p.stream, ctx.Err())
		}
	}
	return len(futures), err
}

// corePublisher publishes on plain NATS and counts messages delivered once
// a flush round trip says the broker took them.
type corePublisher struct{ nc *nats.Conn }

func (p corePublisher) deliver(ctx context.Context, items []queued) (int, error) {
	for i, m := range items {
		if err := p.nc.Publish(m.subject, m.data); err != nil {
			return i, err
		}
	}
	if len(items) == 0 {
		return 0, nil
	}
	if err := p.nc.FlushWithContext(ctx); err != nil {
		return 0, err
	}
	return len(items), nil
}

// newPublisher returns the publisher of delivery d over nc.
func newPublisher(nc *nats.Conn, d bus.Delivery, subj bus.Subjects) (publisher, error) {
	if d == bus.Core {
		return corePublisher{nc}, nil
	}
	return newStreamPublisher(nc, subj.StreamName())
}

// deliverTimeout bounds the wait for the broker's answer.
const deliverTimeout = 2 * time.Second

// isTimeout reports whether err means the broker did not answer in time.
func isTimeout(err error) bool {
	return errors.Is(err, context.DeadlineExceeded) || errors.Is(err, nats.ErrTimeout) || errors.Is(err, jetstream.ErrAsyncPublishTimeout)
}
