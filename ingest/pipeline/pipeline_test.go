package pipeline

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/config/natsconn"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/natsrc"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc/uatest"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/prometheus/client_golang/prometheus"
	"go.uber.org/goleak"
)

// gopcua v0.9.0's server never stops its per-subscription publish loops on
// Server.Close; that goroutine belongs to the test server.
func TestMain(m *testing.M) {
	goleak.VerifyTestMain(m, goleak.IgnoreTopFunction("github.com/gopcua/opcua/server.(*Subscription).run"))
}

// TestBothSourcesFeedOneSnapshot: a JetStream sample (suction pressure,
// kPa) and an OPC UA value (shaft speed, rpm) end up in one SI snapshot of
// the machine; releasing it acknowledges the JetStream message.
func TestBothSourcesFeedOneSnapshot(t *testing.T) {
	ns, err := server.NewServer(&server.Options{Host: "127.0.0.1", Port: -1, NoLog: true, NoSigs: true, JetStream: true, StoreDir: t.TempDir()})
	if err != nil {
		t.Fatal(err)
	}
	go ns.Start()
	defer func() { ns.Shutdown(); ns.WaitForShutdown() }()
	if !ns.ReadyForConnections(10 * time.Second) {
		t.Fatal("nats not ready")
	}
	url := fmt.Sprintf("nats://127.0.0.1:%d", ns.Addr().(*net.TCPAddr).Port)
	nc, err := nats.Connect(url)
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	js, _ := jetstream.New(nc)
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "PLANT", Subjects: []string{"plant.>"}}); err != nil {
		t.Fatal(err)
	}
	uaSrv := uatest.Start(t, "SPEED")

	cfg := Config{
		NATS: []natsrc.Config{{Settings: natsconn.Settings{URLs: []string{url}}, Subjects: []string{"plant.>"}, Mode: natsrc.ModeJetStream, Stream: "PLANT", Durable: "ew",
			AckWait: 5 * time.Second, AckFlush: 10 * time.Millisecond}},
		OPCUA: []opcuasrc.Config{{Endpoint: uaSrv.Endpoint(), PublishingInterval: 50 * time.Millisecond,
			Items: []opcuasrc.ItemConfig{{NodeID: uaSrv.NodeID("SPEED"), Tag: "P1.SPEED"}}}},
		Tags: tagmap.Config{Tags: []tagmap.TagConfig{
			{Tag: "P1.PT1", Machine: "pump1", Port: "suction", Quantity: "p", Unit: "kPa"},
			{Tag: "P1.SPEED", Machine: "pump1", Port: "shaft", Quantity: "speed", Unit: "rpm"},
		}},
		Align: align.Config{Window: 2 * time.Second},
		Tick:  100 * time.Millisecond,
	}
	reg := prometheus.NewRegistry()
	p, err := New(cfg, reg, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		t.Fatal(err)
	}
	out := make(chan []*align.Snapshot, 16)
	rctx, rcancel := context.WithCancel(ctx)
	done := make(chan error, 1)
	go func() { done <- p.Run(rctx, out) }()
	defer func() {
		// Drain so Run can stop, whatever happened in the test body.
		drained := make(chan struct{})
		go func() {
			defer close(drained)
			for snaps := range out {
				for _, s := range snaps {
					s.Release()
				}
			}
		}()
		rcancel()
		if err := <-done; err != nil {
			t.Errorf("Run: %v", err)
		}
		close(out)
		<-drained
	}()

	var found bool
	for !found {
		_, _ = js.Publish(ctx, "plant.p1", fmt.Appendf(nil, `{"tag":"P1.PT1","value":250,"ts":%d}`, time.Now().UnixMilli()))
		uaSrv.Set("SPEED", 1500.0, time.Now(), 0)
		select {
		case snaps := <-out:
			for _, s := range snaps {
				p := s.Values[tagmap.Key{Port: "suction", Quantity: "p"}]
				n := s.Values[tagmap.Key{Port: "shaft", Quantity: "speed"}]
				// 250 kPa = 250000 Pa; 1500 rpm = 50π rad/s (hand computed).
				if p.Quality != ingest.Bad && n.Quality != ingest.Bad && p.SI == 250000 && math.Abs(n.SI-50*math.Pi) < 1e-9 {
					found = true
				}
				s.Release()
			}
		case <-ctx.Done():
			t.Fatal("no snapshot with both sources")
		}
	}
	cons, err := js.Consumer(ctx, "PLANT", "ew")
	if err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(10 * time.Second)
	for {
		// Keep releasing, so the last published messages get acked too.
		select {
		case snaps := <-out:
			for _, s := range snaps {
				s.Release()
			}
		default:
		}
		ci, err := cons.Info(ctx)
		if err == nil && ci.NumAckPending == 0 && ci.NumPending == 0 {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("messages not acknowledged: %+v", ci)
		}
		time.Sleep(20 * time.Millisecond)
	}
	mfs, err := reg.Gather()
	if err != nil || len(mfs) == 0 {
		t.Fatalf("metrics: %v", err)
	}
}

func TestConfigErrors(t *testing.T) {
	good := tagmap.Config{Tags: []tagmap.TagConfig{{Tag: "a", Machine: "m", Port: "inlet", Quantity: "p"}}}
	for name, cfg := range map[string]Config{
		"no source": {Tags: good},
		"ack wait too short": {Tags: good, Tick: 10 * time.Second, NATS: []natsrc.Config{{Settings: natsconn.Settings{URLs: []string{"nats://x"}}, Subjects: []string{"a"},
			Mode: natsrc.ModeJetStream, Stream: "S", Durable: "d", AckWait: 15 * time.Second}}},
	} {
		if _, err := New(cfg, nil, nil); !errors.Is(err, ErrConfig) {
			t.Errorf("%s: got %v, want ErrConfig", name, err)
		}
	}
}
