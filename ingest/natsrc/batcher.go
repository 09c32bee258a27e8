package natsrc

import (
	"context"
	"sync"
	"sync/atomic"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/payload"
)

// batcher gathers the samples of many small messages into one queue entry
// (at most BatchSamples, or what arrived within BatchLinger), so that the
// queue and the engine pay their per-batch costs once per batch instead of
// once per message. Decoding happens under its lock, straight into the
// batch; hand-over (put) also happens under the lock, so batches keep the
// arrival order.
type batcher struct {
	// now is the receive time stamped on samples, refreshed every linger
	// (reading the clock per message costs more than the whole decode of
	// a one-sample message on this VM; ms resolution is plenty here).
	now atomic.Int64
	mu  sync.Mutex
	s   *Source
	dec *payload.Decoder
	buf []ingest.Sample
	max int
	put func([]ingest.Sample)
}

func newBatcher(s *Source, put func([]ingest.Sample)) *batcher {
	dec := payload.NewDecoder(s.format)
	dec.Precision = s.cfg.LinePrecision
	b := &batcher{s: s, dec: dec, max: s.cfg.BatchSamples, put: put}
	b.buf = s.q.Buffer(b.bufCap())
	b.now.Store(s.clock.Now().UnixNano())
	return b
}

// add decodes one message into the pending batch and returns the samples
// it added (valid until the lock is released: set their Ack in withAdded).
func (b *batcher) add(subject string, data []byte, withAdded func(added []ingest.Sample)) {
	b.mu.Lock()
	defer b.mu.Unlock()
	n0 := len(b.buf)
	b.buf = b.s.decodeInto(b.dec, subject, data, time.Unix(0, b.now.Load()), b.buf)
	if withAdded != nil {
		withAdded(b.buf[n0:])
	}
	if len(b.buf) >= b.max {
		b.flushLocked()
	}
}

func (b *batcher) flushLocked() {
	if len(b.buf) == 0 {
		return
	}
	batch := b.buf
	b.buf = b.s.q.Buffer(b.bufCap())
	b.put(batch)
}

// bufCap is the capacity of a batch buffer: the batch is handed on once it
// holds max samples, so twice that leaves room for the last message
// without growing (and copying) the batch, unless that message alone
// holds more than max samples.
func (b *batcher) bufCap() int { return 2 * b.max }

// run flushes every linger until ctx ends, then once more.
func (b *batcher) run(ctx context.Context, linger time.Duration) {
	t := time.NewTicker(linger)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			b.mu.Lock()
			b.flushLocked()
			b.mu.Unlock()
			return
		case <-t.C:
			b.now.Store(b.s.clock.Now().UnixNano())
			b.mu.Lock()
			b.flushLocked()
			b.mu.Unlock()
		}
	}
}
