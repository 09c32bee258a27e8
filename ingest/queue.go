package ingest

import "context"

// Queue is the bounded, counted queue of sample batches between the sources
// and the evaluation. Sources with at-most-once delivery (core NATS, OPC UA)
// use Offer and lose the batch when the queue is full (counted as
// queue_full); JetStream uses Put, which blocks, so that back-pressure reaches
// the broker instead of losing acknowledged data.
type Queue struct {
	ch      chan []Sample
	free    chan []Sample // consumed batches for reuse (Recycle, Buffer)
	metrics *Metrics
}

// NewQueue returns a queue holding at most capacity batches (minimum 1).
func NewQueue(capacity int, m *Metrics) *Queue {
	if capacity < 1 {
		capacity = 1
	}
	return &Queue{ch: make(chan []Sample, capacity), free: make(chan []Sample, min(capacity, 8)), metrics: m}
}

// Buffer returns an empty batch with room for at least n samples: a
// recycled one when there is one, else a new one. Sources fill it and hand
// it to Offer or Put.
func (q *Queue) Buffer(n int) []Sample {
	select {
	case b := <-q.free:
		if cap(b) >= n {
			return b
		}
	default:
	}
	return make([]Sample, 0, n)
}

// Recycle gives back a batch taken from C once nothing refers to its
// samples any more (the engine copies what it keeps), so that sources can
// reuse the memory instead of allocating a new batch each time. The batch
// is cleared first, so it keeps no tag, payload or acknowledgement alive.
// Optional: a batch never recycled is simply collected.
func (q *Queue) Recycle(b []Sample) {
	if cap(b) == 0 {
		return
	}
	clear(b)
	select {
	case q.free <- b[:0]:
	default:
	}
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
