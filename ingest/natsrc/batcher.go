package natsrc

import (
	"context"
	"runtime"
	"sync"
	"sync/atomic"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/payload"
	"github.com/nats-io/nats.go/jetstream"
)

// batcher turns delivered messages into queue entries in three stages, so
// that the NATS callback (one goroutine per subscription, which also paces
// the JetStream pull requests) does as little as possible:
//
//  1. add (the callback): appends the message (subject, payload, ack
//     handle) to the open job; a job is handed on once it holds about
//     BatchSamples samples (estimated from the payload bytes per sample
//     seen so far) or BatchSamples messages, or after BatchLinger.
//  2. decode workers (GOMAXPROCS goroutines, one payload.Decoder each,
//     sharing one tag-name table): decode a whole job into one sample
//     batch and set up the acknowledgement handles of its messages. When
//     every worker is busy the callback decodes the job itself.
//  3. the emitter: hands the decoded batches to the queue in the order the
//     jobs were formed, one put per job, so samples reach the engine in
//     arrival order (alignment needs per-tag order).
//
// At most 4 x workers jobs are between stages 1 and 3; when the queue
// blocks (JetStream Put) the callback blocks with it, which stops the pull
// requests: back-pressure reaches the server.
type batcher struct {
	// now is the receive time stamped on samples, refreshed every linger
	// (reading the clock per message costs more than the whole decode of
	// a one-sample message on this VM; ms resolution is plenty here).
	now atomic.Int64
	// bps is the payload bytes per decoded sample, x16, of the last job.
	bps atomic.Int64
	s   *Source
	max int
	put func([]ingest.Sample)

	mu      sync.Mutex
	cur     *job
	closed  bool
	own     *payload.Decoder // the callback's decoder (under mu)
	jobs    chan *job        // to the workers
	order   chan *job        // to the emitter, in formation order
	free    chan *job
	workers sync.WaitGroup
	emitted chan struct{}
}

// rawMsg is one delivered message waiting for its decode.
type rawMsg struct {
	subject string
	data    []byte
	tm      *tracked      // ack policy all: the tracked message
	em      jetstream.Msg // ack policy explicit: the message
}

type job struct {
	recv  time.Time
	msgs  []rawMsg
	bytes int
	out   []ingest.Sample
	done  chan struct{} // one token when out is complete
}

func newBatcher(s *Source, put func([]ingest.Sample)) *batcher {
	n := runtime.GOMAXPROCS(0)
	b := &batcher{s: s, max: s.cfg.BatchSamples, put: put,
		jobs: make(chan *job, n), order: make(chan *job, 4*n), free: make(chan *job, 4*n+n+2),
		emitted: make(chan struct{})}
	names := payload.NewNames()
	newDec := func() *payload.Decoder {
		d := payload.NewDecoder(s.format)
		d.Precision = s.cfg.LinePrecision
		d.ShareNames(names)
		return d
	}
	b.own = newDec()
	b.bps.Store(32 * 16)
	b.now.Store(s.clock.Now().UnixNano())
	for i := 0; i < n; i++ {
		b.workers.Add(1)
		dec := newDec()
		go func() {
			defer b.workers.Done()
			for j := range b.jobs {
				b.decode(dec, j)
			}
		}()
	}
	go b.emit()
	return b
}

// add queues one message. tm (ack policy all) or em (explicit) carry its
// acknowledgement; both nil for core NATS. After stop the message is
// ignored (JetStream redelivers it).
func (b *batcher) add(subject string, data []byte, tm *tracked, em jetstream.Msg) {
	if b.s.metrics != nil {
		b.s.metrics.Messages.Add(1)
	}
	b.mu.Lock()
	defer b.mu.Unlock()
	if b.closed {
		return
	}
	j := b.cur
	if j == nil {
		j = b.newJob()
		b.cur = j
	}
	j.msgs = append(j.msgs, rawMsg{subject: subject, data: data, tm: tm, em: em})
	j.bytes += len(data)
	if len(j.msgs) >= b.max || int64(j.bytes)*16 >= int64(b.max)*b.bps.Load() {
		b.flushLocked()
	}
}

func (b *batcher) newJob() *job {
	var j *job
	select {
	case j = <-b.free:
	default:
		j = &job{done: make(chan struct{}, 1)}
	}
	j.recv = time.Unix(0, b.now.Load())
	return j
}

// flushLocked hands the open job on: to the emitter's order first (this
// may block: back-pressure), then to a free worker or, when all are busy,
// decoded here.
func (b *batcher) flushLocked() {
	j := b.cur
	if j == nil || len(j.msgs) == 0 {
		return
	}
	b.cur = nil
	j.out = b.s.q.Buffer(2 * b.max)
	b.order <- j
	select {
	case b.jobs <- j:
	default:
		b.decode(b.own, j)
	}
}

// decode decodes every message of j into j.out and sets up the
// acknowledgement handles, then marks j done.
func (b *batcher) decode(dec *payload.Decoder, j *job) {
	out := j.out
	for i := range j.msgs {
		m := &j.msgs[i]
		n0 := len(out)
		out = b.s.decodeInto(dec, m.subject, m.data, j.recv, out)
		added := out[n0:]
		switch {
		case m.tm != nil:
			if len(added) == 0 {
				// Nothing usable; a redelivery would fail the same way.
				m.tm.Complete()
				break
			}
			m.tm.ack.Init(len(added), m.tm)
			for k := range added {
				added[k].Ack = &m.tm.ack
			}
		case m.em != nil:
			if len(added) == 0 {
				_ = m.em.Term()
				break
			}
			ack := ingest.NewAck(len(added), b.s.explicitAck(m.em))
			for k := range added {
				added[k].Ack = ack
			}
		}
	}
	if len(out) > 0 {
		b.bps.Store(max(int64(j.bytes)*16/int64(len(out)), 16))
	}
	j.out = out
	j.done <- struct{}{}
}

// emit puts the decoded batches on the queue in job order.
func (b *batcher) emit() {
	defer close(b.emitted)
	for j := range b.order {
		<-j.done
		out := j.out
		clear(j.msgs) // keeps no payload or message alive
		j.msgs, j.out, j.bytes = j.msgs[:0], nil, 0
		select {
		case b.free <- j:
		default:
		}
		if len(out) > 0 {
			b.put(out)
		} else {
			b.s.q.Recycle(out)
		}
	}
}

// run refreshes the receive time and hands on the open job every linger
// until ctx ends, then stops the batcher: the open job is handed on and
// every job is decoded and put (put sees the ended context of Run, so
// JetStream batches are then dropped unacknowledged and redelivered).
func (b *batcher) run(ctx context.Context, linger time.Duration) {
	t := time.NewTicker(linger)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			b.mu.Lock()
			b.flushLocked()
			b.closed = true
			close(b.jobs)
			close(b.order)
			b.mu.Unlock()
			b.workers.Wait()
			<-b.emitted
			return
		case <-t.C:
			b.now.Store(b.s.clock.Now().UnixNano())
			b.mu.Lock()
			b.flushLocked()
			b.mu.Unlock()
		}
	}
}
