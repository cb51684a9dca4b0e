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

// offer sends the messages in order, from the oldest, and stops at the
// first that send refuses. It returns how many were sent; they stay
// queued until remove takes them.
func (q *queue) offer(send func(subject string, data []byte) error) (int, error) {
	for i, m := range q.items {
		if err := send(m.subject, m.data); err != nil {
			return i, err
		}
	}
	return len(q.items), nil
}

// remove drops the n oldest messages, once they are known to be delivered.
func (q *queue) remove(n int) {
	clear(q.items[:n])
	q.items = q.items[n:]
}
