package ingest_test

import (
	"bytes"
	"context"
	"log/slog"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/prometheus/client_golang/prometheus"
	"go.uber.org/goleak"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

func TestQualityFromStatus(t *testing.T) {
	// OPC UA Part 4, 7.39 StatusCode: severity bits 31..30 = 00 good,
	// 01 uncertain, 10 bad (11 reserved, treated as bad).
	for _, tc := range []struct {
		code uint32
		want ingest.Quality
	}{{0, ingest.Good}, {0x00A20000, ingest.Good}, {0x40900000, ingest.Uncertain}, {0x80310000, ingest.Bad}, {0xC0000000, ingest.Bad}} {
		if got := ingest.QualityFromStatus(tc.code); got != tc.want {
			t.Errorf("0x%08X: got %v want %v", tc.code, got, tc.want)
		}
	}
}

func TestAckRunsOnceAfterAllSamples(t *testing.T) {
	n := 0
	a := ingest.NewAck(3, func() { n++ })
	a.Done()
	a.Done()
	if n != 0 || a.Pending() != 1 {
		t.Fatalf("acked early: n=%d pending=%d", n, a.Pending())
	}
	a.Done()
	a.Done() // extra call ignored
	if n != 1 {
		t.Fatalf("ack ran %d times", n)
	}
	var nilAck *ingest.Ack
	nilAck.Done() // no panic
	if ingest.NewAck(0, func() { n++ }) != nil || n != 2 {
		t.Fatal("NewAck(0) must run fn at once and return nil")
	}
}

func TestAckDoneN(t *testing.T) {
	for _, tc := range []struct {
		name   string
		refs   int
		steps  []int
		runs   int // times fn ran after all steps
		remain int
	}{
		{"one run for all", 5, []int{5}, 1, 0},
		{"runs adding up", 5, []int{2, 3}, 1, 0},
		{"short", 5, []int{2, 2}, 0, 1},
		{"beyond the count ignored", 3, []int{2, 4, 1}, 1, 0},
		{"zero and negative do nothing", 2, []int{0, -3}, 0, 2},
		{"mixed with Done", 4, []int{1, -1, 2}, 1, 0}, // -1: one Done call
	} {
		t.Run(tc.name, func(t *testing.T) {
			n := 0
			a := ingest.NewAck(tc.refs, func() { n++ })
			for i, k := range tc.steps {
				if k == -1 && i > 0 {
					a.Done()
					continue
				}
				a.DoneN(k)
			}
			if n != tc.runs || a.Pending() != tc.remain {
				t.Fatalf("fn ran %d times (want %d), pending %d (want %d)", n, tc.runs, a.Pending(), tc.remain)
			}
		})
	}
	var nilAck *ingest.Ack
	nilAck.DoneN(3) // no panic
}

func TestQueueRecycle(t *testing.T) {
	q := ingest.NewQueue(4, nil)
	b := q.Buffer(16)
	if len(b) != 0 || cap(b) < 16 {
		t.Fatalf("Buffer(16): len %d cap %d", len(b), cap(b))
	}
	a := ingest.NewAck(1, nil)
	b = append(b, ingest.Sample{Tag: "x", Value: 1, Ack: a})
	q.Recycle(b)
	r := q.Buffer(16)
	if len(r) != 0 || cap(r) != cap(b) || &r[:1][0] != &b[0] {
		t.Fatal("recycled batch not reused")
	}
	if s := r[:1][0]; s.Tag != "" || s.Ack != nil || s.Value != 0 {
		t.Fatalf("recycled batch not cleared: %+v", s)
	}
	q.Recycle(r)
	if big := q.Buffer(1024); cap(big) < 1024 {
		t.Fatalf("Buffer(1024) returned cap %d", cap(big))
	}
	q.Recycle(nil) // no panic
}

func TestQueueOfferDropsAndCounts(t *testing.T) {
	met := &ingest.Metrics{}
	q := ingest.NewQueue(1, met)
	acked := 0
	a := ingest.NewAck(2, func() { acked++ })
	if !q.Offer([]ingest.Sample{{Tag: "a"}}) {
		t.Fatal("first offer refused")
	}
	if q.Offer([]ingest.Sample{{Tag: "b", Ack: a}, {Tag: "c", Ack: a}}) {
		t.Fatal("offer into a full queue accepted")
	}
	if met.QueueDropped.Load() != 1 || met.Reason(ingest.ReasonQueueFull) != 2 || acked != 1 || met.QueueDepth.Load() != 1 {
		t.Fatalf("dropped %d, queue_full %d, acked %d, depth %d", met.QueueDropped.Load(), met.Reason(ingest.ReasonQueueFull), acked, met.QueueDepth.Load())
	}
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Millisecond)
	defer cancel()
	if err := q.Put(ctx, nil); err == nil {
		t.Fatal("Put into a full queue must block until ctx ends")
	}
	<-q.C()
	q.Took()
	if met.QueueDepth.Load() != 0 {
		t.Fatal("depth not decremented")
	}
}

func TestLogLimiterOncePerKeyPerPeriod(t *testing.T) {
	var buf bytes.Buffer
	l := ingest.NewLogLimiter(slog.New(slog.NewTextHandler(&buf, nil)), time.Minute)
	t0 := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	got := []bool{
		l.Warn(t0, "tagA", "decode error"),
		l.Warn(t0.Add(30*time.Second), "tagA", "decode error"),
		l.Warn(t0.Add(30*time.Second), "tagB", "decode error"),
		l.Warn(t0.Add(61*time.Second), "tagA", "decode error"),
	}
	want := []bool{true, false, true, true}
	for i := range got {
		if got[i] != want[i] {
			t.Fatalf("call %d logged=%v want %v", i, got[i], want[i])
		}
	}
	if !strings.Contains(buf.String(), "suppressed_since_last=1") {
		t.Fatalf("suppressed count missing: %s", buf.String())
	}
}

func TestMetricsRegistry(t *testing.T) {
	met := &ingest.Metrics{}
	met.Received.Add(5)
	met.Count(ingest.ReasonSpike, 2)
	met.GapNanos.Add(uint64(1500 * time.Millisecond))
	reg := prometheus.NewRegistry()
	if err := met.Register(reg); err != nil {
		t.Fatal(err)
	}
	mfs, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	vals := map[string]float64{}
	for _, mf := range mfs {
		if !strings.HasPrefix(mf.GetName(), "exergywatch_ingest_") {
			t.Errorf("metric %s outside exergywatch_ingest_", mf.GetName())
		}
		for _, m := range mf.GetMetric() {
			key := mf.GetName()
			for _, lp := range m.GetLabel() {
				key += "{" + lp.GetName() + "=" + lp.GetValue() + "}"
			}
			if c := m.GetCounter(); c != nil {
				vals[key] = c.GetValue()
			}
		}
	}
	if vals["exergywatch_ingest_received_samples_total"] != 5 || vals["exergywatch_ingest_flagged_samples_total{reason=spike}"] != 2 ||
		vals["exergywatch_ingest_gap_seconds_total"] != 1.5 {
		t.Fatalf("values %v", vals)
	}
}

type countCompleter struct{ n int }

func (c *countCompleter) Complete() { c.n++ }

// TestAckInitCompleter: a handle embedded with Init calls its Completer
// once, after the last of its references, whether released one by one or
// in runs.
func TestAckInitCompleter(t *testing.T) {
	var c countCompleter
	var a ingest.Ack
	a.Init(4, &c)
	a.Done()
	a.DoneN(2)
	if c.n != 0 || a.Pending() != 1 {
		t.Fatalf("completed early: %d, pending %d", c.n, a.Pending())
	}
	a.Done()
	a.Done() // beyond the count: ignored
	if c.n != 1 {
		t.Fatalf("completed %d times, want 1", c.n)
	}
}
