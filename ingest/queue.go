package ingest

import "context"

// Queue is the bounded, counted queue of sample batches between the sources
// and the evaluation. Sources with at-most-once delivery (core NATS, OPC UA)
// use Offer and lose the batch when the queue is full (counted as
// queue_full); JetStream uses Put, which blocks, so that back-pressure reaches
// the broker instead of losing acknowledged data.
type Queue struct {
	ch      chan []Sample
	metrics *Metrics
}

// NewQueue returns a queue holding at most capacity batches (minimum 1).
func NewQueue(capacity int, m *Metrics) *Queue {
	if capacity < 1 {
		capacity = 1
	}
	return &Queue{ch: make(chan []Sample, capacity), metrics: m}
}

// Offer enqueues the batch without blocking. When the queue is full it drops
// the batch, releases its acknowledgement handles, counts it and returns
// false.
func (q *Queue) Offer(batch []Sample) bool {
	select {
	case q.ch <- batch:
		if q.metrics != nil {
			q.metrics.QueueDepth.Add(1)
		}
		return true
	default:
		if q.metrics != nil {
			q.metrics.QueueDropped.Add(1)
			q.metrics.Count(ReasonQueueFull, uint64(len(batch)))
		}
		for i := range batch {
			batch[i].Ack.Done()
		}
		return false
	}
}

// Put enqueues the batch, blocking while the queue is full.
func (q *Queue) Put(ctx context.Context, batch []Sample) error {
	select {
	case q.ch <- batch:
		if q.metrics != nil {
			q.metrics.QueueDepth.Add(1)
		}
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// C is the channel the evaluation reads from; call Took after each receive.
func (q *Queue) C() <-chan []Sample { return q.ch }

// Took records that one batch was taken from C.
func (q *Queue) Took() {
	if q.metrics != nil {
		q.metrics.QueueDepth.Add(-1)
	}
}

// Len returns the number of batches waiting.
func (q *Queue) Len() int { return len(q.ch) }

// Cap returns the capacity in batches.
func (q *Queue) Cap() int { return cap(q.ch) }
