package natsrc

import (
	"container/heap"
	"sync"

	"github.com/exergywatch/exergywatch/ingest"
)

// ackTracker turns per-message completions into cumulative acknowledgements
// for a consumer with AckAll policy, which acknowledges every pending
// message with a stream sequence up to the acknowledged one. That is only
// safe up to the lowest stream sequence still in flight, so the tracker
// keeps:
//
//   - inOrder: messages delivered in increasing stream sequence, in
//     delivery order; completed ones are popped from the front, and the
//     newest popped becomes the candidate;
//   - redelivered: messages delivered with a stream sequence below one seen
//     before (redeliveries after AckWait or a restart), in a min-heap.
//
// flush acknowledges the candidate only if its stream sequence is below
// every redelivered message still in flight. One acknowledgement per flush
// replaces one per message.
type ackTracker struct {
	mu          sync.Mutex
	inOrder     []*tracked
	head        int
	redelivered seqHeap
	maxSeen     uint64
	candidate   *tracked
	sent        uint64 // stream sequence of the last cumulative ack
	covered     int    // messages completed since the last flush
}

// acker acknowledges one message (jetstream.Msg does).
type acker interface{ Ack() error }

// tracked is one delivered message. It also holds the acknowledgement
// handle its samples share (one allocation per message for all of it).
type tracked struct {
	sseq  uint64
	done  bool
	msg   acker
	index int // heap index, -1 when not in the heap
	t     *ackTracker
	ack   ingest.Ack
}

// Complete marks the message complete (ingest.Completer).
func (m *tracked) Complete() { m.t.complete(m) }

// add registers a delivered message; its Complete marks it complete.
func (t *ackTracker) add(sseq uint64, msg acker) *tracked {
	m := &tracked{sseq: sseq, msg: msg, index: -1, t: t}
	t.mu.Lock()
	if sseq > t.maxSeen {
		t.maxSeen = sseq
		t.inOrder = append(t.inOrder, m)
	} else {
		heap.Push(&t.redelivered, m)
	}
	t.mu.Unlock()
	return m
}

func (t *ackTracker) complete(m *tracked) {
	t.mu.Lock()
	defer t.mu.Unlock()
	if m.done {
		return
	}
	m.done = true
	t.covered++
	if m.index >= 0 {
		heap.Remove(&t.redelivered, m.index)
		return
	}
	for t.head < len(t.inOrder) && t.inOrder[t.head].done {
		t.candidate = t.inOrder[t.head]
		t.inOrder[t.head] = nil
		t.head++
	}
	if t.head > 1024 && t.head*2 > len(t.inOrder) {
		n := copy(t.inOrder, t.inOrder[t.head:])
		clear(t.inOrder[n:])
		t.inOrder = t.inOrder[:n]
		t.head = 0
	}
}

// flush sends the cumulative acknowledgement if it is safe and new. It
// returns the number of completed messages it stands for (for metrics).
func (t *ackTracker) flush() (int, error) {
	t.mu.Lock()
	c := t.candidate
	if c == nil || c.sseq <= t.sent || (t.redelivered.Len() > 0 && t.redelivered[0].sseq <= c.sseq) {
		t.mu.Unlock()
		return 0, nil
	}
	n := t.covered
	t.covered = 0
	t.sent = c.sseq
	t.mu.Unlock()
	return n, c.msg.Ack()
}

type seqHeap []*tracked

func (h seqHeap) Len() int           { return len(h) }
func (h seqHeap) Less(i, j int) bool { return h[i].sseq < h[j].sseq }
func (h seqHeap) Swap(i, j int) {
	h[i], h[j] = h[j], h[i]
	h[i].index, h[j].index = i, j
}
func (h *seqHeap) Push(x any) {
	m := x.(*tracked)
	m.index = len(*h)
	*h = append(*h, m)
}
func (h *seqHeap) Pop() any {
	old := *h
	m := old[len(old)-1]
	old[len(old)-1] = nil
	m.index = -1
	*h = old[:len(old)-1]
	return m
}

// streamSeq reads the stream sequence from a JetStream ack subject without
// building the full metadata (nats.go v1.55.0 internal/parser/parse.go
// documents both layouts):
//
//	v1 (9 tokens):   $JS.ACK.<stream>.<consumer>.<delivered>.<sseq>.<cseq>.<tm>.<pending>
//	v2 (11+ tokens): $JS.ACK.<domain>.<acchash>.<stream>.<consumer>.<delivered>.<sseq>.<cseq>.<tm>.<pending>[.<token>]
func streamSeq(reply string) (uint64, bool) {
	const prefix = "$JS.ACK."
	if len(reply) < len(prefix) || reply[:len(prefix)] != prefix {
		return 0, false
	}
	n := 1
	for i := 0; i < len(reply); i++ {
		if reply[i] == '.' {
			n++
		}
	}
	var pos int // token index of the stream sequence
	switch {
	case n == 9:
		pos = 5
	case n >= 11:
		pos = 7
	default:
		return 0, false
	}
	tok, start := 0, 0
	for i := 0; i <= len(reply); i++ {
		if i == len(reply) || reply[i] == '.' {
			if tok == pos {
				return parseUint(reply[start:i])
			}
			tok++
			start = i + 1
		}
	}
	return 0, false
}

func parseUint(s string) (uint64, bool) {
	if s == "" || len(s) > 19 {
		return 0, false
	}
	var u uint64
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c < '0' || c > '9' {
			return 0, false
		}
		u = u*10 + uint64(c-'0')
	}
	return u, true
}
