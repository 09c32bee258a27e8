package opcuasrc

import (
	"context"
	"errors"
	"io"
	"log/slog"
	"sync"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc/uatest"
	"github.com/gopcua/opcua/ua"
	"go.uber.org/goleak"
)

// gopcua v0.9.0's server never stops its per-subscription publish loops
// on Server.Close (server/subscription_service.go, Subscription.run);
// that is the test server's goroutine, not ours.
func TestMain(m *testing.M) {
	goleak.VerifyTestMain(m, goleak.IgnoreTopFunction("github.com/gopcua/opcua/server.(*Subscription).run"))
}

func quietLog() *slog.Logger { return slog.New(slog.NewTextHandler(logOut, nil)) }

var logOut io.Writer = io.Discard

type sink struct {
	mu      sync.Mutex
	samples []ingest.Sample
}

func drain(q *ingest.Queue) (*sink, func()) {
	k := &sink{}
	stop := make(chan struct{})
	done := make(chan struct{})
	go func() {
		defer close(done)
		for {
			select {
			case <-stop:
				return
			case b := <-q.C():
				q.Took()
				k.mu.Lock()
				k.samples = append(k.samples, b...)
				k.mu.Unlock()
			}
		}
	}()
	return k, func() { close(stop); <-done }
}

func (k *sink) find(f func(ingest.Sample) bool) (ingest.Sample, bool) {
	k.mu.Lock()
	defer k.mu.Unlock()
	for _, s := range k.samples {
		if f(s) {
			return s, true
		}
	}
	return ingest.Sample{}, false
}

func waitSample(t *testing.T, k *sink, what string, d time.Duration, poke func(), f func(ingest.Sample) bool) ingest.Sample {
	t.Helper()
	deadline := time.Now().Add(d)
	for {
		if s, ok := k.find(f); ok {
			return s
		}
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		if poke != nil {
			poke()
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// TestSubscribeRestartResubscribe runs against gopcua's in-process server:
// source timestamps and StatusCodes are kept, and after a server restart
// mid-stream the source re-creates the subscription and reports the gap.
func TestSubscribeRestartResubscribe(t *testing.T) {
	srv := uatest.Start(t, "PT101", "TT101")
	met := &ingest.Metrics{}
	q := ingest.NewQueue(1024, met)
	src, err := New(Config{Endpoint: srv.Endpoint(), PublishingInterval: 50 * time.Millisecond, ReconnectWait: 100 * time.Millisecond,
		RequestTimeout: time.Second, WatchdogInterval: 200 * time.Millisecond, Items: []ItemConfig{
			{NodeID: srv.NodeID("PT101"), Tag: "pt101", SamplingInterval: 50 * time.Millisecond, QueueSize: 5, Deadband: 0.01},
			{NodeID: srv.NodeID("TT101"), Tag: "tt101"},
		}}, q, met, quietLog(), nil)
	if err != nil {
		t.Fatal(err)
	}
	k, stopSink := drain(q)
	defer stopSink()
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx) }()
	defer func() { cancel(); <-done }()
	select {
	case <-src.Connected():
	case <-time.After(10 * time.Second):
		t.Fatal("not subscribed")
	}
	ts1 := time.Date(2026, 12, 1, 9, 0, 0, 123e6, time.UTC)
	// The poke alternates the value: if the first write lands before the
	// monitored item exists, an unchanged value would never be notified
	// again (deadband), so a loaded machine could miss it.
	flip := false
	s := waitSample(t, k, "pt101=12.5", 15*time.Second, func() {
		v := 12.5
		if flip = !flip; !flip {
			v = 12.4
		}
		srv.Set("PT101", v, ts1, ua.StatusOK)
	}, func(s ingest.Sample) bool { return s.Tag == "pt101" && s.Value == 12.5 })
	if !s.SourceTime.Equal(ts1) || !s.HasStatus || s.StatusCode != 0 || s.Quality != ingest.Good {
		t.Fatalf("source timestamp or status lost: %+v", s)
	}
	// An uncertain StatusCode (UncertainLastUsableValue 0x40900000, OPC UA
	// Part 4 status code table) is kept as it is.
	s = waitSample(t, k, "tt101 uncertain", 15*time.Second, func() { srv.Set("TT101", float32(300.5), ts1, ua.StatusCode(0x40900000)) },
		func(s ingest.Sample) bool { return s.Tag == "tt101" && s.Value == 300.5 })
	if s.StatusCode != 0x40900000 || s.Quality != ingest.Uncertain {
		t.Fatalf("status: %+v", s)
	}

	srv.Stop()
	time.Sleep(300 * time.Millisecond)
	srv.Restart()
	ts2 := ts1.Add(time.Minute)
	waitSample(t, k, "pt101 after restart", 20*time.Second, func() { srv.Set("PT101", 13.5, ts2, ua.StatusOK) },
		func(s ingest.Sample) bool { return s.Tag == "pt101" && s.Value == 13.5 && s.SourceTime.Equal(ts2) })
	if n := src.Sessions(); n < 2 {
		t.Fatalf("sessions %d, want a re-created subscription", n)
	}
	if g := src.LastGap(); g < 300*time.Millisecond {
		t.Fatalf("gap %v not reported (server was down >= 300 ms)", g)
	}
	if met.Reconnects.Load() == 0 || met.GapNanos.Load() == 0 {
		t.Fatal("reconnect/gap metrics not counted")
	}
	if _, ok := k.find(func(s ingest.Sample) bool {
		return s.Tag == "pt101" && s.Quality == ingest.Bad && s.StatusCode == uint32(ua.StatusBadNoCommunication)
	}); !ok {
		t.Fatal("no gap marker sample")
	}
}

func TestConfigErrors(t *testing.T) {
	q := ingest.NewQueue(1, nil)
	for _, c := range []Config{
		{},
		{Endpoint: "opc.tcp://x:1"},
		{Endpoint: "opc.tcp://x:1", Items: []ItemConfig{{NodeID: "garbage;;"}}},
		{Endpoint: "opc.tcp://x:1", SecurityPolicy: "Basic128Rsa15", Items: []ItemConfig{{NodeID: "ns=2;s=a"}}},
		{Endpoint: "opc.tcp://x:1", SecurityPolicy: "Basic256Sha256", Items: []ItemConfig{{NodeID: "ns=2;s=a"}}},
		{Endpoint: "opc.tcp://x:1", Auth: "username", Items: []ItemConfig{{NodeID: "ns=2;s=a"}}},
		{Endpoint: "opc.tcp://x:1", Items: []ItemConfig{{NodeID: "ns=2;s=a"}, {NodeID: "ns=2;s=a"}}},
		{Endpoint: "opc.tcp://x:1", Items: []ItemConfig{{NodeID: "ns=2;s=a", DeadbandType: "relative"}}},
	} {
		if _, err := New(c, q, nil, nil, nil); !errors.Is(err, ErrConfig) {
			t.Errorf("%+v: got %v, want ErrConfig", c, err)
		}
	}
}

func TestFloat(t *testing.T) {
	for _, tc := range []struct {
		in   any
		want float64
	}{{float32(1.5), 1.5}, {int16(-3), -3}, {uint64(7), 7}, {true, 1}, {false, 0}, {2.25, 2.25}} {
		got, err := Float(ua.MustVariant(tc.in))
		if err != nil || got != tc.want {
			t.Errorf("%T %v: got %v %v", tc.in, tc.in, got, err)
		}
	}
	if _, err := Float(ua.MustVariant("text")); !errors.Is(err, ErrNotNumeric) {
		t.Errorf("string: %v", err)
	}
	if _, err := Float(nil); !errors.Is(err, ErrNotNumeric) {
		t.Errorf("nil: %v", err)
	}
}
