package nodeagent

// queue holds encoded messages, oldest first, up to a bound; pushing past
// the bound drops the oldest and counts it.
type queue struct {
	items   []queued
	limit   int
	dropped uint64
}

// queued is one message waiting to be delivered: its subject, its
// de-duplication key (bus.SampleID, bus.JobEventID) and its body.
type queued struct {
	subject string
	id      string
	data    []byte
}

func newQueue(limit int) *queue { return &queue{limit: limit} }

func (q *queue) push(m queued) {
	if len(q.items) >= q.limit {
		q.items = q.items[1:]
		q.dropped++
	}
	q.items = append(q.items, m)
}

func (q *queue) len() int { return len(q.items) }

// remove drops the n oldest messages, once they are known to be delivered.
func (q *queue) remove(n int) {
	clear(q.items[:n])
	q.items = q.items[n:]
}
