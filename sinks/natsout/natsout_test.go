package natsout

import (
	"context"
	"errors"
	"io"
	"log/slog"
	"math"
	"net"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config/natsconn"
	"github.com/exergywatch/exergywatch/sinks"
)

var quiet = slog.New(slog.NewTextHandler(io.Discard, nil))

// conn is the connection settings of one server URL, nothing else.
func conn(url string) natsconn.Settings { return natsconn.Settings{URLs: []string{url}} }

// startServer runs a real embedded nats-server with JetStream in dir on port
// (-1: random) and returns it with its client URL.
func startServer(t *testing.T, dir string, port int) (*server.Server, string) {
	t.Helper()
	srv, err := server.NewServer(&server.Options{Host: "127.0.0.1", Port: port, JetStream: true, StoreDir: dir, NoLog: true, NoSigs: true})
	if err != nil {
		t.Fatal(err)
	}
	go srv.Start()
	if !srv.ReadyForConnections(10 * time.Second) {
		t.Fatal("nats-server not ready")
	}
	t.Cleanup(func() { srv.Shutdown(); srv.WaitForShutdown() })
	return srv, srv.ClientURL()
}

var t0 = time.Date(2026, 11, 30, 8, 0, 0, 5, time.UTC)

// rec is a synthetic record ("common practice, no source"); every third one
// has a Bad figure with a NaN value, which must not be published.
func rec(k int) compute.Record {
	r := compute.Record{Time: t0.Add(time.Duration(k) * time.Second), Site: "north plant", Machine: "hp.1", MachineKind: "turbine",
		Quality: compute.QualityGood, Figures: []compute.Figure{
			{Name: "isentropic_efficiency", Value: 0.87 - 1e-5*float64(k), U95: 0.01, HasU95: true},
			{Name: "power_w", Value: 12.5e6 + float64(k)},
		}}
	if k%3 == 2 {
		r.Figures[1] = compute.Figure{Name: "power_w", Value: math.NaN(), Quality: compute.QualityBad, Reasons: []string{"flow_missing"}}
		r.Quality, r.Reasons = compute.QualityBad, []string{"flow_missing"}
	}
	return r
}

func sent(r compute.Record) compute.Record {
	r.Figures = append([]compute.Figure(nil), r.Figures...)
	for i := range r.Figures {
		if r.Figures[i].Quality == compute.QualityBad {
			r.Figures[i].Value = 0
		}
	}
	return r
}

func event(k int) compute.Event {
	return compute.Event{Time: t0.Add(time.Duration(k) * time.Second), Site: "north plant", Machine: "hp.1", Rule: "eff_low",
		Class: compute.AlertPerformance, Figure: "isentropic_efficiency", From: compute.AlertPending, To: compute.AlertFiring,
		Value: 0.8, Limit: 0.82, U95: 0.01, Since: t0, Reason: "efficiency below its baseline"}
}

func TestSubjects(t *testing.T) {
	tests := []struct{ site, machine, rec, ev string }{
		{"north", "hp1", "exergywatch.north.derived.hp1", "exergywatch.north.alert.hp1"},
		{"north plant", "hp.1", "exergywatch.north_plant.derived.hp_1", "exergywatch.north_plant.alert.hp_1"},
		{"", "a*>b", "exergywatch._.derived.a__b", "exergywatch._.alert.a__b"},
	}
	for _, tc := range tests {
		if got := RecordSubject("exergywatch", tc.site, tc.machine); got != tc.rec {
			t.Errorf("RecordSubject(%q,%q) = %q, want %q", tc.site, tc.machine, got, tc.rec)
		}
		if got := EventSubject("exergywatch", tc.site, tc.machine); got != tc.ev {
			t.Errorf("EventSubject(%q,%q) = %q, want %q", tc.site, tc.machine, got, tc.ev)
		}
	}
}

func TestCorePublish(t *testing.T) {
	_, url := startServer(t, t.TempDir(), -1)
	sub, err := nats.Connect(url)
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Close()
	ch := make(chan *nats.Msg, 100)
	if _, err := sub.ChanSubscribe("exergywatch.>", ch); err != nil {
		t.Fatal(err)
	}
	if err := sub.Flush(); err != nil {
		t.Fatal(err)
	}
	s, err := New("nats", Config{Conn: conn(url)}, quiet)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	const n = 20
	for k := 0; k < n; k++ {
		if err := s.WriteRecord(ctx, rec(k)); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.WriteEvent(ctx, event(3)); err != nil {
		t.Fatal(err)
	}
	bad := rec(0)
	bad.Figures[0].Value = math.NaN()
	if err := s.WriteRecord(ctx, bad); !errors.Is(err, sinks.ErrInvalid) {
		t.Errorf("NaN record: %v", err)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}
	for k := 0; k <= n; k++ {
		var m *nats.Msg
		select {
		case m = <-ch:
		case <-time.After(5 * time.Second):
			t.Fatalf("message %d not received", k)
		}
		if k == n {
			if m.Subject != "exergywatch.north_plant.alert.hp_1" {
				t.Errorf("event subject %q", m.Subject)
			}
			e, err := sinks.UnmarshalEvent(m.Data)
			if err != nil || !reflect.DeepEqual(e, event(3)) {
				t.Errorf("event: %v\n got %+v\nwant %+v", err, e, event(3))
			}
			continue
		}
		if m.Subject != "exergywatch.north_plant.derived.hp_1" {
			t.Errorf("record subject %q", m.Subject)
		}
		r, err := sinks.UnmarshalRecord(m.Data)
		if err != nil || !reflect.DeepEqual(r, sent(rec(k))) {
			t.Errorf("record %d: %v\n got %+v\nwant %+v", k, err, r, sent(rec(k)))
		}
	}
	if st := s.Stats(); st.Written != n+1 || st.Rejected != 1 || st.Dropped != 0 {
		t.Errorf("stats %+v", st)
	}
	if err := s.WriteRecord(ctx, rec(1)); !errors.Is(err, sinks.ErrClosed) {
		t.Errorf("after close: %v", err)
	}
}

// readStream returns every message of the stream in order.
func readStream(t *testing.T, url, stream string, want int) []jetstream.Msg {
	t.Helper()
	nc, err := nats.Connect(url)
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	st, err := js.Stream(ctx, stream)
	if err != nil {
		t.Fatal(err)
	}
	info, err := st.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if int(info.State.Msgs) != want {
		t.Fatalf("stream holds %d messages, want %d", info.State.Msgs, want)
	}
	cons, err := js.OrderedConsumer(ctx, stream, jetstream.OrderedConsumerConfig{})
	if err != nil {
		t.Fatal(err)
	}
	batch, err := cons.FetchNoWait(want)
	if err != nil {
		t.Fatal(err)
	}
	var out []jetstream.Msg
	for m := range batch.Messages() {
		out = append(out, m)
	}
	if len(out) != want {
		t.Fatalf("fetched %d messages, want %d (%v)", len(out), want, batch.Error())
	}
	return out
}

// JetStream: every message acknowledged, stored once (a retried record with
// the same id is deduplicated) and in order.
func TestJetStreamPublish(t *testing.T) {
	_, url := startServer(t, t.TempDir(), -1)
	s, err := New("nats", Config{Conn: conn(url), JetStream: true, CreateStream: true}, quiet)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	const n = 30
	for k := 0; k < n; k++ {
		if err := s.WriteRecord(ctx, rec(k)); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.WriteRecord(ctx, rec(n-1)); err != nil { // a retry of the last one
		t.Fatal(err)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}
	msgs := readStream(t, url, "EXERGYWATCH", n)
	for k, m := range msgs {
		r, err := sinks.UnmarshalRecord(m.Data())
		if err != nil || !reflect.DeepEqual(r, sent(rec(k))) {
			t.Errorf("message %d: %v %+v", k, err, r)
		}
	}
}

// The server goes away: a JetStream write gives up when its context ends,
// counted as dropped; after the server returns (same port, same store) the
// sink reconnects by itself and the stream holds everything acknowledged.
func TestJetStreamOutage(t *testing.T) {
	dir := t.TempDir()
	srv, url := startServer(t, dir, -1)
	port := srv.Addr().(*net.TCPAddr).Port
	s, err := New("nats", Config{Conn: natsconn.Settings{URLs: []string{url}, ReconnectWait: 50 * time.Millisecond}, JetStream: true, CreateStream: true}, quiet)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close(context.Background())
	ctx := context.Background()
	for k := 0; k < 5; k++ {
		if err := s.WriteRecord(ctx, rec(k)); err != nil {
			t.Fatal(err)
		}
	}
	srv.Shutdown()
	srv.WaitForShutdown()
	// Write only once the client has noticed: a message handed to it just
	// before (connection not yet seen down) sits in its pending buffer and
	// is sent after the reconnect, the race the package doc describes.
	deadline := time.Now().Add(5 * time.Second)
	for s.nc.IsConnected() && time.Now().Before(deadline) {
		time.Sleep(5 * time.Millisecond)
	}
	wctx, cancel := context.WithTimeout(ctx, 500*time.Millisecond)
	err = s.WriteRecord(wctx, rec(5))
	cancel()
	if err == nil || s.Stats().Dropped != 1 {
		t.Fatalf("write while down: err %v, stats %+v; want an error and one drop", err, s.Stats())
	}
	_, url2 := startServer(t, dir, port)
	if url2 != url {
		t.Fatalf("restarted on %s, want %s", url2, url)
	}
	wctx, cancel = context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	for k := 6; k < 10; k++ {
		if err := s.WriteRecord(wctx, rec(k)); err != nil {
			t.Fatalf("after restart: %v", err)
		}
	}
	msgs := readStream(t, url, "EXERGYWATCH", 9)
	want := []int{0, 1, 2, 3, 4, 6, 7, 8, 9}
	for i, m := range msgs {
		r, err := sinks.UnmarshalRecord(m.Data())
		if err != nil || !r.Time.Equal(rec(want[i]).Time) {
			t.Errorf("message %d: %v, time %v want %v", i, err, r.Time, rec(want[i]).Time)
		}
	}
}

func TestConfigValidate(t *testing.T) {
	x := conn("nats://x")
	bad := []Config{
		{},
		{Conn: x, SubjectPrefix: "a.b"},
		{Conn: x, JetStream: true, Stream: "a.b"},
		{Conn: natsconn.Settings{URLs: []string{"nats://x"}, CredentialsFile: "f", Token: "T"}},
		{Conn: natsconn.Settings{URLs: []string{"nats://x"}, ReconnectBufferBytes: 100}},
		{Conn: x, PublishTimeout: -time.Second},
		{Conn: x, StreamMaxAge: time.Millisecond},
	}
	for i, c := range bad {
		c.Defaults()
		if err := c.Validate(); err == nil {
			t.Errorf("config %d accepted: %+v", i, c)
		}
	}
	ok := Config{Conn: conn("nats://127.0.0.1:4222")}
	ok.Defaults()
	if err := ok.Validate(); err != nil {
		t.Errorf("default config: %v", err)
	}
}

// tcpProxy forwards a loopback port to the server. Down closes the listener
// and every forwarded connection (the network between sink and server is
// gone, the server stays up); Up listens again on the same port.
type tcpProxy struct {
	t      *testing.T
	addr   string
	target string
	mu     sync.Mutex
	ln     net.Listener
	conns  []net.Conn
	wg     sync.WaitGroup
}

func newTCPProxy(t *testing.T, target string) *tcpProxy {
	p := &tcpProxy{t: t, target: target}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	p.addr = ln.Addr().String()
	p.serve(ln)
	t.Cleanup(p.Down)
	return p
}

func (p *tcpProxy) serve(ln net.Listener) {
	p.mu.Lock()
	p.ln = ln
	p.mu.Unlock()
	p.wg.Add(1)
	go func() {
		defer p.wg.Done()
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			s, err := net.Dial("tcp", p.target)
			if err != nil {
				c.Close()
				continue
			}
			p.mu.Lock()
			p.conns = append(p.conns, c, s)
			p.mu.Unlock()
			p.wg.Add(2)
			go func() { defer p.wg.Done(); _, _ = io.Copy(s, c); s.Close() }()
			go func() { defer p.wg.Done(); _, _ = io.Copy(c, s); c.Close() }()
		}
	}()
}

func (p *tcpProxy) Down() {
	p.mu.Lock()
	if p.ln != nil {
		p.ln.Close()
		p.ln = nil
	}
	for _, c := range p.conns {
		c.Close()
	}
	p.conns = nil
	p.mu.Unlock()
	p.wg.Wait()
}

func (p *tcpProxy) Up() {
	ln, err := net.Listen("tcp", p.addr)
	if err != nil {
		p.t.Fatal(err)
	}
	p.serve(ln)
}

// Core publishing while the connection is down fills the reconnect buffer;
// what does not fit is refused, counted and reported, never lost silently.
// What fitted is delivered, in order, after the reconnect. The outage is a
// TCP proxy between sink and server going away, so the subscriber (connected
// to the server directly) listens all along.
func TestCoreReconnectBuffer(t *testing.T) {
	_, url := startServer(t, t.TempDir(), -1)
	sub, err := nats.Connect(url)
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Close()
	ch := make(chan *nats.Msg, 2000)
	if _, err := sub.ChanSubscribe("exergywatch.>", ch); err != nil {
		t.Fatal(err)
	}
	if err := sub.Flush(); err != nil {
		t.Fatal(err)
	}
	proxy := newTCPProxy(t, strings.TrimPrefix(url, "nats://"))
	s, err := New("nats", Config{Conn: natsconn.Settings{URLs: []string{"nats://" + proxy.addr}, ReconnectBufferBytes: 64 << 10, ReconnectWait: 50 * time.Millisecond}}, quiet)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close(context.Background())
	deadline := time.Now().Add(5 * time.Second)
	for !s.nc.IsConnected() && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	proxy.Down()
	for s.nc.IsConnected() && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	if s.nc.IsConnected() {
		t.Fatal("client did not notice the outage")
	}
	ctx := context.Background()
	var accepted int
	var lastErr error
	for k := 0; k < 1000; k++ {
		if err := s.WriteRecord(ctx, rec(k)); err != nil {
			lastErr = err
			continue
		}
		accepted++
	}
	st := s.Stats()
	if !errors.Is(lastErr, nats.ErrReconnectBufExceeded) || st.Dropped != uint64(1000-accepted) || accepted == 0 {
		t.Fatalf("accepted %d, last error %v, stats %+v", accepted, lastErr, st)
	}
	if st.BufferedBytes == 0 || st.BufferedBytes > 64<<10+1024 { // the limit is checked before a message is added
		t.Errorf("buffered %d bytes, want some and at most 64 KiB plus one message", st.BufferedBytes)
	}
	t.Logf("%d records fitted in a 64 KiB reconnect buffer (%d bytes)", accepted, st.BufferedBytes)
	proxy.Up()
	for k := 0; k < accepted; k++ {
		select {
		case m := <-ch:
			r, err := sinks.UnmarshalRecord(m.Data)
			if err != nil || !r.Time.Equal(rec(k).Time) {
				t.Fatalf("message %d: %v, time %v, want %v", k, err, r.Time, rec(k).Time)
			}
		case <-time.After(10 * time.Second):
			t.Fatalf("only %d of %d buffered messages arrived", k, accepted)
		}
	}
}
