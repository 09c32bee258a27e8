package sinks_test

import (
	"context"
	"errors"
	"io"
	"log/slog"
	"math"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"go.uber.org/goleak"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
	"github.com/exergywatch/exergywatch/sinks/store"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

var quiet = slog.New(slog.NewTextHandler(io.Discard, nil))

var t0 = time.Date(2026, 11, 30, 8, 0, 0, 0, time.UTC)

// rec is a synthetic record ("common practice, no source").
func rec(k int) compute.Record {
	return compute.Record{Time: t0.Add(time.Duration(k) * time.Second), Site: "s", Machine: "p1", MachineKind: "pump",
		Figures: []compute.Figure{{Name: "isentropic_efficiency", Value: 0.75 + 1e-4*float64(k)}}}
}

// gate is a sink whose writes wait until the gate opens (or their context
// ends): a stand-in for a database that hangs. It records what it got.
type gate struct {
	open    chan struct{}
	entered chan struct{} // receives once per write that started waiting
	mu      sync.Mutex
	got     []time.Time
	ctxErrs int
	closed  bool
}

func newGate() *gate { return &gate{open: make(chan struct{}), entered: make(chan struct{}, 1000)} }

func (g *gate) WriteRecord(ctx context.Context, r compute.Record) error {
	g.entered <- struct{}{}
	select {
	case <-g.open:
	case <-ctx.Done():
		g.mu.Lock()
		g.ctxErrs++
		g.mu.Unlock()
		return ctx.Err()
	}
	g.mu.Lock()
	g.got = append(g.got, r.Time)
	g.mu.Unlock()
	return nil
}

func (g *gate) WriteEvent(ctx context.Context, e compute.Event) error {
	return g.WriteRecord(ctx, compute.Record{Time: e.Time})
}

func (g *gate) Close(ctx context.Context) error {
	g.mu.Lock()
	g.closed = true
	g.mu.Unlock()
	return nil
}

func openStore(t *testing.T) *store.Store {
	t.Helper()
	s, err := store.Open("store", store.Config{Path: filepath.Join(t.TempDir(), "s.db"), NoSync: true}, quiet)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// A hanging sink fills only its own queue: writes never block, the store
// gets everything, the hanging sink's overflow is counted and reported.
func TestMultiSlowSinkIsolated(t *testing.T) {
	st := openStore(t)
	slow := newGate()
	m, err := sinks.NewMulti(sinks.MultiConfig{QueueLen: 10}, quiet, sinks.Named{"store", st, 1000}, sinks.Named{"slow", slow, 0})
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	const n = 100
	var drops int
	start := time.Now()
	for k := 0; k < n; k++ {
		err := m.WriteRecord(ctx, rec(k))
		var de *sinks.DropError
		if errors.As(err, &de) {
			if !errors.Is(err, sinks.ErrQueueFull) || len(de.Sinks) != 1 || de.Sinks[0] != "slow" {
				t.Fatalf("drop error %v", err)
			}
			drops++
		} else if err != nil {
			t.Fatal(err)
		}
	}
	if d := time.Since(start); d > 2*time.Second {
		t.Errorf("writes took %v with a hanging sink", d)
	}
	// the slow worker holds one item in flight and 10 in its queue, at most
	if drops < n-11 || drops > n-10 {
		t.Errorf("%d drops, want %d or %d", drops, n-11, n-10)
	}
	// the store keeps up meanwhile
	deadline := time.Now().Add(5 * time.Second)
	for {
		if got, _ := st.Range("s", "p1", t0, t0.Add(time.Hour), 0); len(got) == n {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("store did not receive every record while the other sink hung")
		}
		time.Sleep(10 * time.Millisecond)
	}
	stats := m.Stats()
	if stats[0].Name != "store" || stats[0].Dropped != 0 || stats[1].Name != "slow" || stats[1].Dropped != uint64(drops) {
		t.Errorf("stats %+v", stats)
	}
	close(slow.open)
	if err := m.Close(ctx); err != nil {
		t.Fatal(err)
	}
	slow.mu.Lock()
	if len(slow.got) != n-drops || !slow.closed {
		t.Errorf("slow sink got %d, want %d; closed %v", len(slow.got), n-drops, slow.closed)
	}
	for i := 1; i < len(slow.got); i++ {
		if !slow.got[i].After(slow.got[i-1]) {
			t.Errorf("slow sink out of order at %d", i)
		}
	}
	slow.mu.Unlock()
	if err := m.WriteRecord(ctx, rec(0)); !errors.Is(err, sinks.ErrClosed) {
		t.Errorf("write after close: %v", err)
	}
	if err := m.Close(ctx); err != nil {
		t.Errorf("second close: %v", err)
	}
}

// Close with a sink that never answers returns when its context ends,
// counts what was left and leaves no goroutine behind (goleak in TestMain).
func TestMultiCloseTimeout(t *testing.T) {
	st := openStore(t)
	slow := newGate()
	m, err := sinks.NewMulti(sinks.MultiConfig{QueueLen: 50}, quiet, sinks.Named{Name: "slow", Sink: slow}, sinks.Named{Name: "store", Sink: st})
	if err != nil {
		t.Fatal(err)
	}
	for k := 0; k < 20; k++ {
		if err := m.WriteRecord(context.Background(), rec(k)); err != nil {
			t.Fatal(err)
		}
	}
	if err := m.WriteEvent(context.Background(), compute.Event{Time: t0, Machine: "p1", Rule: "r"}); err != nil {
		t.Fatal(err)
	}
	<-slow.entered // the first item is in flight
	ctx, cancel := context.WithTimeout(context.Background(), 200*time.Millisecond)
	defer cancel()
	start := time.Now()
	err = m.Close(ctx)
	if err == nil || !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("close: %v, want a deadline error", err)
	}
	if d := time.Since(start); d > 3*time.Second {
		t.Errorf("close took %v", d)
	}
	stats := m.Stats()
	// 21 items: one was in flight (its write failed with the context), 20
	// were still queued and are counted as dropped
	if stats[0].Dropped != 20 || slow.ctxErrs != 1 {
		t.Errorf("slow stats %+v, ctx errors %d; want 20 dropped and 1 aborted write", stats[0], slow.ctxErrs)
	}
	if stats[1].Dropped != 0 || stats[1].Written != 21 {
		t.Errorf("store stats %+v, want 21 written", stats[1])
	}
}

func TestMultiConfig(t *testing.T) {
	if _, err := sinks.NewMulti(sinks.MultiConfig{QueueLen: -1}, nil); err == nil {
		t.Error("negative queue accepted")
	}
	g := newGate()
	if _, err := sinks.NewMulti(sinks.MultiConfig{}, nil, sinks.Named{Name: "a", Sink: g}, sinks.Named{Name: "a", Sink: g}); err == nil {
		t.Error("duplicate names accepted")
	}
	if _, err := sinks.NewMulti(sinks.MultiConfig{}, nil, sinks.Named{Name: "", Sink: g}); err == nil {
		t.Error("empty name accepted")
	}
}

// The record handed to Multi is copied: changing the caller's slices after
// the write does not change what the sinks get.
func TestMultiCopiesRecord(t *testing.T) {
	st := openStore(t)
	m, err := sinks.NewMulti(sinks.MultiConfig{}, quiet, sinks.Named{Name: "store", Sink: st})
	if err != nil {
		t.Fatal(err)
	}
	r := rec(1)
	if err := m.WriteRecord(context.Background(), r); err != nil {
		t.Fatal(err)
	}
	r.Figures[0].Value = math.NaN()
	if err := m.Close(context.Background()); err != nil {
		t.Fatal(err)
	}
	if s := m.Stats()[0]; s.Written != 1 || s.Rejected != 0 {
		t.Errorf("stats %+v", s)
	}
}

func TestCollector(t *testing.T) {
	stats := []sinks.Stats{{Name: "influx", Queued: 3, SpooledItems: 120, SpooledBytes: 4096, Written: 10, Dropped: 2, Rejected: 1,
		LastError: "x", LastErrorTime: time.Unix(1764633600, 500000000)}}
	reg := prometheus.NewPedanticRegistry()
	if err := reg.Register(sinks.NewCollector(func() []sinks.Stats { return stats })); err != nil {
		t.Fatal(err)
	}
	mfs, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]float64{}
	for _, mf := range mfs {
		for _, m := range mf.GetMetric() {
			if l := m.GetLabel(); len(l) != 1 || l[0].GetName() != "sink" || l[0].GetValue() != "influx" {
				t.Errorf("%s: labels %v", mf.GetName(), l)
			}
			switch {
			case m.GetCounter() != nil:
				got[mf.GetName()] = m.GetCounter().GetValue()
			case m.GetGauge() != nil:
				got[mf.GetName()] = m.GetGauge().GetValue()
			}
		}
	}
	want := map[string]float64{
		"exergywatch_sink_queued_items": 3, "exergywatch_sink_spooled_items": 120, "exergywatch_sink_spooled_bytes": 4096,
		"exergywatch_sink_buffered_bytes": 0, "exergywatch_sink_written_total": 10, "exergywatch_sink_dropped_total": 2,
		"exergywatch_sink_rejected_total": 1, "exergywatch_sink_last_error_timestamp_seconds": 1764633600.5,
	}
	if len(got) != len(want) {
		t.Errorf("got %d metrics, want %d: %v", len(got), len(want), got)
	}
	for k, v := range want {
		if got[k] != v {
			t.Errorf("%s = %v, want %v", k, got[k], v)
		}
	}
}
