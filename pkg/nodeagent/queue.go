package nodeagent

// queue holds encoded messages, oldest first, up to a bound; pushing past
// the bound drops the oldest and counts it.
type queue struct {
	items   []queued
	limit   int
	dropped uint64
}

type queued struct {
	subject string
	data    []byte
}

func newQueue(limit int) *queue { return &queue{limit: limit} }

func (q *queue) push(subject string, data []byte) {
	if len(q.items) >= q.limit {
		q.items = q.items[1:]
		q.dropped++
	}
	q.items = append(q.items, queued{subject, data})
}

func (q *queue) len() int { return len(q.items) }

// drain offers the messages to send in order and stops at the first it
// refuses, which stays at the head.
func (q *queue) drain(send func(subject string, data []byte) error) error {
	for len(q.items) > 0 {
		if err := send(q.items[0].subject, q.items[0].data); err != nil {
			return err
		}
		q.items[0] = queued{}
		q.items = q.items[1:]
	}
	return nil
}
