package natsrc

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/config/natsconn"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"github.com/nats-io/jwt/v2"
	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/nats-io/nkeys"
	"go.uber.org/goleak"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

func quietLog() *slog.Logger { return slog.New(slog.NewTextHandler(os_discard{}, nil)) }

type os_discard struct{}

func (os_discard) Write(p []byte) (int, error) { return len(p), nil }

// runSource starts src.Run in the background; the returned stop waits for
// it to end.
func runSource(t *testing.T, src *Source) (stop func() error) {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx) }()
	var once sync.Once
	var err error
	stop = func() error {
		once.Do(func() { cancel(); err = <-done })
		return err
	}
	t.Cleanup(func() { stop() })
	return stop
}

func waitFor(t *testing.T, what string, d time.Duration, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(d)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// collector drains a queue, records sample keys and releases acks.
type collector struct {
	mu    sync.Mutex
	seen  map[string]int
	total int
	delay time.Duration
	done  chan struct{}
}

func collect(q *ingest.Queue, delay time.Duration) (*collector, func()) {
	c := &collector{seen: map[string]int{}, delay: delay, done: make(chan struct{})}
	stop := make(chan struct{})
	go func() {
		defer close(c.done)
		for {
			select {
			case <-stop:
				return
			case b := <-q.C():
				q.Took()
				c.mu.Lock()
				for _, s := range b {
					c.seen[fmt.Sprintf("%s@%d=%g", s.Tag, s.Time().UnixNano(), s.Value)]++
					c.total++
				}
				c.mu.Unlock()
				if c.delay > 0 {
					time.Sleep(c.delay)
				}
				for _, s := range b {
					s.Ack.Done()
				}
			}
		}
	}()
	return c, func() { close(stop); <-c.done }
}

func (c *collector) unique() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.seen)
}

func (c *collector) has(k string) bool {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.seen[k] > 0
}

var base = time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)

// TestCoreWildcardsFormatsAndRestart: wildcard subjects, the three payload
// formats, decode errors counted, and resubscription after a server
// restart mid-stream.
func TestCoreWildcardsFormatsAndRestart(t *testing.T) {
	ns := startNATS(t, baseOpts(t, false))
	met := &ingest.Metrics{}
	q := ingest.NewQueue(1024, met)
	src, err := New(Config{Settings: natsconn.Settings{URLs: []string{ns.url()}, ReconnectWait: 20 * time.Millisecond}, Subjects: []string{"plant.*.json", "plant.lp.>"}},
		q, met, quietLog(), nil)
	if err != nil {
		t.Fatal(err)
	}
	col, stopCol := collect(q, 0)
	defer stopCol()
	stop := runSource(t, src)
	<-src.Connected()
	pub, err := nats.Connect(ns.url(), nats.MaxReconnects(-1), nats.ReconnectWait(20*time.Millisecond))
	if err != nil {
		t.Fatal(err)
	}
	defer pub.Close()
	ts := base.UnixNano()
	publishAll := func(round int) {
		_ = pub.Publish("plant.u1.json", fmt.Appendf(nil, `{"tag":"a","ts":"%s","value":%d}`, base.Format(time.RFC3339Nano), round))
		_ = pub.Publish("plant.u2.json", fmt.Appendf(nil, `{"samples":[{"tag":"b","value":%d,"ts":%d}]}`, round, base.UnixMilli()))
		_ = pub.Publish("plant.lp.x.y", fmt.Appendf(nil, "c value=%d %d\n", round, ts))
		_ = pub.Publish("plant.lp.bad", []byte("c value=oops"))
		_ = pub.Publish("other.json", fmt.Appendf(nil, `{"tag":"z","value":%d}`, round))
		_ = pub.Flush()
	}
	key := func(tag string, round int) string { return fmt.Sprintf("%s@%d=%d", tag, ts, round) }
	waitFor(t, "round 1", 5*time.Second, func() bool {
		publishAll(1)
		return col.has(key("a", 1)) && col.has(key("b", 1)) && col.has(key("c", 1))
	})
	if met.DecodeErrors.Load() == 0 {
		t.Error("decode error of 'c value=oops' not counted")
	}
	ns.restart()
	waitFor(t, "round 2 after restart", 10*time.Second, func() bool {
		publishAll(2)
		return col.has(key("a", 2)) && col.has(key("b", 2)) && col.has(key("c", 2))
	})
	if col.has(key("z", 1)) {
		t.Error("message on a subject outside the wildcards was delivered")
	}
	if met.Reconnects.Load() == 0 {
		t.Error("reconnect not counted")
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
}

// TestJetStreamNoLossAcrossRestart publishes 2 x 400 messages of 3 samples
// each, restarts the server while the consumer is half-way through, and
// checks that every sample arrived and every message was acknowledged.
func TestJetStreamNoLossAcrossRestart(t *testing.T) {
	for _, policy := range []string{"all", "explicit"} {
		t.Run("ack_policy="+policy, func(t *testing.T) { noLoss(t, policy) })
	}
}

func noLoss(t *testing.T, policy string) {
	ns := startNATS(t, baseOpts(t, true))
	pub, err := nats.Connect(ns.url(), nats.MaxReconnects(-1), nats.ReconnectWait(20*time.Millisecond))
	if err != nil {
		t.Fatal(err)
	}
	defer pub.Close()
	js, err := jetstream.New(pub)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "PLANT", Subjects: []string{"plant.>"}, Storage: jetstream.FileStorage}); err != nil {
		t.Fatal(err)
	}
	const perPhase, perMsg = 400, 3
	publish := func(from int) {
		for i := from; i < from+perPhase; i++ {
			ts := base.Add(time.Duration(i) * time.Second).UnixNano()
			body := fmt.Sprintf("m1 p=%d,t=%d %d\nm2 value=%d %d", i, i, ts, i, ts)
			for {
				if _, err := js.Publish(ctx, "plant.u1", []byte(body)); err == nil {
					break
				} else if ctx.Err() != nil {
					t.Fatal(err)
				}
				time.Sleep(20 * time.Millisecond)
			}
		}
	}
	publish(0)
	met := &ingest.Metrics{}
	q := ingest.NewQueue(16, met)
	src, err := New(Config{Settings: natsconn.Settings{URLs: []string{ns.url()}, ReconnectWait: 20 * time.Millisecond}, Subjects: []string{"plant.>"}, Mode: ModeJetStream, Stream: "PLANT", Durable: "exergywatch",
		AckWait: 2 * time.Second, FetchBatch: 32, AckPolicy: policy, AckFlush: 20 * time.Millisecond,
		BatchSamples: 6}, q, met, quietLog(), nil)
	if err != nil {
		t.Fatal(err)
	}
	col, stopCol := collect(q, 2*time.Millisecond) // slow consumer: the restart hits mid-stream
	defer stopCol()
	stop := runSource(t, src)
	waitFor(t, "first samples", 10*time.Second, func() bool { return col.unique() > 30 })
	ns.restart()
	if got := col.unique(); got >= perPhase*perMsg {
		t.Fatalf("restart was not mid-stream: %d of %d samples already seen", got, perPhase*perMsg)
	}
	publish(perPhase)
	want := 2 * perPhase * perMsg
	waitFor(t, "all samples", 30*time.Second, func() bool { return col.unique() == want })
	cons, err := js.Consumer(ctx, "PLANT", "exergywatch")
	if err != nil {
		t.Fatal(err)
	}
	waitFor(t, "all acknowledged", 10*time.Second, func() bool {
		ci, err := cons.Info(ctx)
		return err == nil && ci.NumAckPending == 0 && ci.NumPending == 0
	})
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	t.Logf("%d unique samples, %d deliveries, %d reconnects", col.unique(), col.total, met.Reconnects.Load())
}

// TestJetStreamAckAfterSnapshotRelease: a message stays unacknowledged
// until the snapshot holding its samples is released.
func TestJetStreamAckAfterSnapshotRelease(t *testing.T) {
	ns, _, js := jetStreamWith(t, "S", "t.>")
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	now := time.Now()
	body := fmt.Sprintf(`[{"tag":"p1","value":5,"ts":%d},{"tag":"unmapped","value":1}]`, now.UnixMilli())
	if _, err := js.Publish(ctx, "t.a", []byte(body)); err != nil {
		t.Fatal(err)
	}
	tm, err := tagmap.Compile(tagmap.Config{Tags: []tagmap.TagConfig{{Tag: "p1", Machine: "m", Port: "inlet", Quantity: "p", Unit: "bar"}}})
	if err != nil {
		t.Fatal(err)
	}
	met := &ingest.Metrics{}
	eng, err := align.New(align.Config{Window: time.Minute}, tm, met, quietLog())
	if err != nil {
		t.Fatal(err)
	}
	q := ingest.NewQueue(4, met)
	src, err := New(Config{Settings: natsconn.Settings{URLs: []string{ns.url()}}, Subjects: []string{"t.>"}, Mode: ModeJetStream, Stream: "S", Durable: "d"}, q, met, quietLog(), nil)
	if err != nil {
		t.Fatal(err)
	}
	runSource(t, src)
	var batch []ingest.Sample
	select {
	case batch = <-q.C():
		q.Took()
	case <-ctx.Done():
		t.Fatal("no batch")
	}
	eng.Ingest(batch, time.Now())
	cons, _ := js.Consumer(ctx, "S", "d")
	ci, err := cons.Info(ctx)
	if err != nil || ci.NumAckPending != 1 {
		t.Fatalf("before release: ack pending %v, err %v; want 1", ci, err)
	}
	snaps := eng.Evaluate(time.Now())
	time.Sleep(100 * time.Millisecond)
	if ci, _ := cons.Info(ctx); ci.NumAckPending != 1 {
		t.Fatalf("acknowledged before release")
	}
	snaps[0].Release()
	waitFor(t, "ack after release", 5*time.Second, func() bool {
		ci, err := cons.Info(ctx)
		return err == nil && ci.NumAckPending == 0
	})
	if met.Acked.Load() != 1 {
		t.Fatalf("acked %d", met.Acked.Load())
	}
}

// TestAuthentication connects with each supported method to a server that
// requires it, and checks a refused password ends Run with ErrClosed.
func TestAuthentication(t *testing.T) {
	dir := t.TempDir()
	// NKey user.
	ukp, _ := nkeys.CreateUser()
	upub, _ := ukp.PublicKey()
	useed, _ := ukp.Seed()
	seedFile := filepath.Join(dir, "user.nk")
	if err := os.WriteFile(seedFile, useed, 0o600); err != nil {
		t.Fatal(err)
	}
	// Operator mode with a credentials file (JWT + seed).
	okp, _ := nkeys.CreateOperator()
	opub, _ := okp.PublicKey()
	oc := jwt.NewOperatorClaims(opub)
	oc.Name = "test-operator"
	ojwt, err := oc.Encode(okp)
	if err != nil {
		t.Fatal(err)
	}
	oc, err = jwt.DecodeOperatorClaims(ojwt)
	if err != nil {
		t.Fatal(err)
	}
	akp, _ := nkeys.CreateAccount()
	apub, _ := akp.PublicKey()
	ac := jwt.NewAccountClaims(apub)
	ac.Name = "plant"
	ajwt, err := ac.Encode(okp)
	if err != nil {
		t.Fatal(err)
	}
	ckp, _ := nkeys.CreateUser()
	cpub, _ := ckp.PublicKey()
	cseed, _ := ckp.Seed()
	uc := jwt.NewUserClaims(cpub)
	uc.IssuerAccount = apub
	ujwt, err := uc.Encode(akp)
	if err != nil {
		t.Fatal(err)
	}
	creds, err := jwt.FormatUserConfig(ujwt, cseed)
	if err != nil {
		t.Fatal(err)
	}
	credsFile := filepath.Join(dir, "user.creds")
	if err := os.WriteFile(credsFile, creds, 0o600); err != nil {
		t.Fatal(err)
	}
	resolver := &server.MemAccResolver{}
	if err := resolver.Store(apub, ajwt); err != nil {
		t.Fatal(err)
	}
	caFile, srvTLS := testCA(t)

	tests := []struct {
		name    string
		opts    func(*server.Options)
		cfg     func(*Config)
		refused bool
	}{
		{"user password", func(o *server.Options) { o.Username, o.Password = "ew", "s3cret" }, func(c *Config) { c.User, c.Password = "ew", "s3cret" }, false},
		{"wrong password", func(o *server.Options) { o.Username, o.Password = "ew", "s3cret" }, func(c *Config) { c.User, c.Password = "ew", "nope" }, true},
		{"token", func(o *server.Options) { o.Authorization = "tok-123" }, func(c *Config) { c.Token = "tok-123" }, false},
		{"nkey", func(o *server.Options) { o.Nkeys = []*server.NkeyUser{{Nkey: upub}} }, func(c *Config) { c.NKeySeedFile = seedFile }, false},
		{"credentials file", func(o *server.Options) {
			o.TrustedOperators = []*jwt.OperatorClaims{oc}
			o.AccountResolver = resolver
		}, func(c *Config) { c.CredentialsFile = credsFile }, false},
		{"tls", func(o *server.Options) { o.TLSConfig = srvTLS; o.TLS = true }, func(c *Config) { c.TLS = &TLSConfig{CAFile: caFile} }, false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			o := baseOpts(t, false)
			tc.opts(o)
			ns := startNATS(t, o)
			cfg := Config{Settings: natsconn.Settings{URLs: []string{ns.url()}, ReconnectWait: 20 * time.Millisecond}, Subjects: []string{"auth.>"}}
			tc.cfg(&cfg)
			met := &ingest.Metrics{}
			q := ingest.NewQueue(16, met)
			src, err := New(cfg, q, met, quietLog(), nil)
			if err != nil {
				t.Fatal(err)
			}
			if tc.refused {
				ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
				defer cancel()
				err := src.Run(ctx)
				if !errors.Is(err, ErrClosed) || !strings.Contains(strings.ToLower(err.Error()), "authorization") {
					t.Fatalf("wrong password: Run returned %v, want ErrClosed with authorization violation", err)
				}
				return
			}
			stop := runSource(t, src)
			select {
			case <-src.Connected():
			case <-time.After(10 * time.Second):
				t.Fatal("not connected")
			}
			popts, err := src.Options()
			if err != nil {
				t.Fatal(err)
			}
			pub, err := nats.Connect(ns.url(), popts...)
			if err != nil {
				t.Fatal(err)
			}
			defer pub.Close()
			waitFor(t, "sample over authenticated link", 5*time.Second, func() bool {
				_ = pub.Publish("auth.x", []byte(`{"tag":"a","value":1}`))
				_ = pub.Flush()
				return q.Len() > 0
			})
			if err := stop(); err != nil {
				t.Fatal(err)
			}
		})
	}
}

// TestJetStreamRefusals: a missing stream, or a durable whose ack policy
// cannot be changed, end Run with an error instead of retrying forever.
func TestJetStreamRefusals(t *testing.T) {
	ns, _, js := jetStreamWith(t, "S", "s.>")
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	if _, err := js.CreateOrUpdateConsumer(ctx, "S", jetstream.ConsumerConfig{Durable: "d", AckPolicy: jetstream.AckExplicitPolicy}); err != nil {
		t.Fatal(err)
	}
	for name, cfg := range map[string]Config{
		"missing stream":      {Stream: "NOPE", Durable: "d"},
		"ack policy mismatch": {Stream: "S", Durable: "d", AckPolicy: "all"},
	} {
		cfg.URLs, cfg.Subjects, cfg.Mode = []string{ns.url()}, []string{"s.>"}, ModeJetStream
		src, err := New(cfg, ingest.NewQueue(1, nil), nil, quietLog(), nil)
		if err != nil {
			t.Fatal(err)
		}
		rctx, rcancel := context.WithTimeout(ctx, 10*time.Second)
		err = src.Run(rctx)
		rcancel()
		var apiErr *jetstream.APIError
		if !errors.As(err, &apiErr) {
			t.Errorf("%s: Run returned %v, want the server's refusal", name, err)
		}
	}
}

// TestStreamSeqMatchesMetadata compares the fast parser with nats.go's
// own metadata on real messages from the embedded server.
func TestStreamSeqMatchesMetadata(t *testing.T) {
	_, _, js := jetStreamWith(t, "M", "m.>")
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	for i := 0; i < 5; i++ {
		if _, err := js.Publish(ctx, "m.x", []byte("x")); err != nil {
			t.Fatal(err)
		}
	}
	cons, err := js.CreateOrUpdateConsumer(ctx, "M", jetstream.ConsumerConfig{Durable: "c", AckPolicy: jetstream.AckExplicitPolicy})
	if err != nil {
		t.Fatal(err)
	}
	batch, err := cons.Fetch(5)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for m := range batch.Messages() {
		md, err := m.Metadata()
		if err != nil {
			t.Fatal(err)
		}
		seq, ok := streamSeq(m.Reply())
		if !ok || seq != md.Sequence.Stream {
			t.Fatalf("reply %q: fast %d %v, metadata %d", m.Reply(), seq, ok, md.Sequence.Stream)
		}
		n++
	}
	if n != 5 {
		t.Fatalf("got %d messages", n)
	}
}
