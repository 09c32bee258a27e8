// Package natsrc is the NATS source of ingest: it subscribes to configured
// subjects (wildcards allowed), decodes the payloads (package payload) and
// puts the samples on the ingest queue.
//
// Two delivery modes:
//
//   - core: plain NATS subscriptions, at most once (latest value). When the
//     ingest queue is full the batch is dropped and counted (queue_full).
//   - jetstream: a durable pull consumer, at least once. Every message gets
//     one ingest.Ack shared by its samples; the message counts as complete
//     only when every sample was taken into its machine window and the
//     snapshot holding it was released (or the sample was dropped with a
//     counted reason). With ack_policy "all" (default) completed messages
//     are acknowledged cumulatively every AckFlush, never beyond a message
//     still in flight (see ackTracker); with "explicit" each message is
//     acknowledged on completion. A message that decodes to nothing is
//     complete at once (explicit: terminated), since it would fail again.
//     A crash or restart before the release leaves the message
//     unacknowledged, so the server redelivers it after AckWait;
//     redelivered samples already in the window are counted as duplicates.
//
// Decoding is off the NATS callback: the callback appends each message to
// a job of about BatchSamples samples, GOMAXPROCS workers decode jobs in
// parallel, and the decoded batches enter the ingest queue in arrival
// order, one queue entry per job (see batcher).
//
// The connection reconnects forever. The reconnect buffer holds outgoing
// data while the link is down; for this subscriber that is the
// acknowledgements, so it is sized to hold MaxAckPending acknowledgements
// (about 128 bytes each on the wire), at least 1 MiB.
package natsrc

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync"
	"sync/atomic"
	"time"

	"github.com/exergywatch/exergywatch/config/natsconn"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/payload"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// Delivery modes.
const (
	ModeCore      = "core"
	ModeJetStream = "jetstream"
)

// Config is the NATS source configuration.
type Config struct {
	// Settings are the connection keys shared with the NATS sink (urls,
	// name, user, password, token, nkey_seed_file, credentials_file, tls,
	// reconnect_wait, reconnect_buffer_bytes; see config/natsconn). Here
	// reconnect_wait defaults to 1 s and reconnect_buffer_bytes to
	// max(1 MiB, 128 B * MaxAckPending).
	natsconn.Settings `yaml:",inline"`

	Subjects []string `yaml:"subjects"` // e.g. plant.unit1.>, plant.*.turbine
	// Format: auto (default), json or line.
	Format string `yaml:"format"`
	// LinePrecision is the unit of line-protocol timestamps (default 1ns).
	LinePrecision time.Duration `yaml:"line_precision"`
	Mode          string        `yaml:"mode"` // core (default) or jetstream

	// JetStream settings.
	Stream  string `yaml:"stream"`  // stream holding the subjects (must exist)
	Durable string `yaml:"durable"` // durable consumer name (created or updated)
	// AckWait must exceed the alignment window plus one tick plus the
	// evaluation time; default 2 min.
	AckWait time.Duration `yaml:"ack_wait"`
	// MaxAckPending bounds the unacknowledged messages; it must hold the
	// messages of one window plus one tick at the peak rate. Default 65536.
	MaxAckPending int `yaml:"max_ack_pending"`
	// FetchBatch is the pull batch size (default 512).
	FetchBatch int `yaml:"fetch_batch"`
	// AckPolicy: "all" (default) sends one cumulative acknowledgement per
	// AckFlush for every message completed in order, never past a
	// redelivered message still in flight; "explicit" acknowledges each
	// message on its own. The consumer is created with this policy.
	AckPolicy string `yaml:"ack_policy"`
	// AckFlush is the interval of cumulative acknowledgements (default
	// 100 ms). AckWait must exceed window + tick + AckFlush.
	AckFlush time.Duration `yaml:"ack_flush"`

	// BatchSamples: samples gathered from several messages into one decode
	// job and queue entry (default 1024; a job also ends at BatchSamples
	// messages, and the sample count is estimated from the payload bytes
	// per sample seen so far); BatchLinger: longest wait before a partial
	// job is handed on (default 5 ms).
	BatchSamples int           `yaml:"batch_samples"`
	BatchLinger  time.Duration `yaml:"batch_linger"`
	// Core subscription pending limits (slow-consumer protection).
	PendingMsgs  int `yaml:"pending_msgs"`  // default 65536
	PendingBytes int `yaml:"pending_bytes"` // default 64 MiB
}

// TLSConfig names PEM files for TLS (ca_file, cert_file, key_file,
// server_name).
type TLSConfig = natsconn.TLSConfig

// Errors callers branch on.
var (
	ErrConfig = errors.New("invalid nats source settings")
	// ErrClosed: the server refused the connection for good (for example
	// authorization violation twice in a row).
	ErrClosed = errors.New("nats connection closed")
)

func (c *Config) defaults() error {
	if len(c.URLs) == 0 {
		return fmt.Errorf("%w: no urls", ErrConfig)
	}
	if len(c.Subjects) == 0 {
		return fmt.Errorf("%w: no subjects", ErrConfig)
	}
	if c.Mode == "" {
		c.Mode = ModeCore
	}
	if c.Mode != ModeCore && c.Mode != ModeJetStream {
		return fmt.Errorf("%w: mode %q (core, jetstream)", ErrConfig, c.Mode)
	}
	if c.Mode == ModeJetStream && (c.Stream == "" || c.Durable == "") {
		return fmt.Errorf("%w: jetstream mode needs stream and durable", ErrConfig)
	}
	if c.AckWait == 0 {
		c.AckWait = 2 * time.Minute
	}
	if c.MaxAckPending == 0 {
		c.MaxAckPending = 65536
	}
	if c.FetchBatch == 0 {
		c.FetchBatch = 512
	}
	switch c.AckPolicy {
	case "":
		c.AckPolicy = "all"
	case "all", "explicit":
	default:
		return fmt.Errorf("%w: ack_policy %q (all, explicit)", ErrConfig, c.AckPolicy)
	}
	if c.AckFlush == 0 {
		c.AckFlush = 100 * time.Millisecond
	}
	if c.ReconnectWait == 0 {
		c.ReconnectWait = time.Second
	}
	if c.ReconnectBufferBytes == 0 {
		c.ReconnectBufferBytes = max(1<<20, 128*c.MaxAckPending)
	}
	if c.BatchSamples <= 0 {
		c.BatchSamples = 1024
	}
	if c.BatchLinger <= 0 {
		c.BatchLinger = 5 * time.Millisecond
	}
	if c.PendingMsgs == 0 {
		c.PendingMsgs = 65536
	}
	if c.PendingBytes == 0 {
		c.PendingBytes = 64 << 20
	}
	if err := c.Settings.Validate(); err != nil {
		return fmt.Errorf("%w: %w", ErrConfig, err)
	}
	if _, err := payload.ParseFormat(c.Format); err != nil {
		return fmt.Errorf("%w: %v", ErrConfig, err)
	}
	return nil
}

// Source reads samples from NATS.
type Source struct {
	cfg     Config
	format  payload.Format
	q       *ingest.Queue
	metrics *ingest.Metrics
	log     *slog.Logger
	limiter *ingest.LogLimiter
	clock   ingest.Clock

	mu         sync.Mutex
	downSince  time.Time
	connected  chan struct{} // closed on first connect (tests)
	connOnce   sync.Once
	subscribed atomic.Bool // core: every subscription is registered (tests, benchmarks)
	lastGap    time.Duration
	reconnects int
}

// New returns a NATS source feeding q. metrics, log and clock may be nil.
func New(cfg Config, q *ingest.Queue, metrics *ingest.Metrics, log *slog.Logger, clock ingest.Clock) (*Source, error) {
	if err := cfg.defaults(); err != nil {
		return nil, err
	}
	f, _ := payload.ParseFormat(cfg.Format)
	if log == nil {
		log = slog.Default()
	}
	if clock == nil {
		clock = ingest.SystemClock{}
	}
	log = log.With("source", "nats")
	return &Source{cfg: cfg, format: f, q: q, metrics: metrics, log: log, clock: clock,
		limiter: ingest.NewLogLimiter(log, time.Minute), connected: make(chan struct{})}, nil
}

// Connected is closed once the first connection is up.
func (s *Source) Connected() <-chan struct{} { return s.connected }

// Options returns the nats.go options built from the configuration (also
// used by tests and the bare benchmark subscriber).
func (s *Source) Options() ([]nats.Option, error) {
	conn, err := s.cfg.Settings.Options()
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrConfig, err)
	}
	opts := append(conn,
		nats.MaxReconnects(-1),
		nats.RetryOnFailedConnect(true),
		nats.DisconnectErrHandler(func(_ *nats.Conn, err error) {
			s.mu.Lock()
			if s.downSince.IsZero() {
				s.downSince = s.clock.Now()
			}
			s.mu.Unlock()
			if err == nil {
				// Our own Close (shutdown, reload): not a fault.
				s.log.Debug("nats connection closed")
			} else {
				s.log.Warn("nats disconnected", "err", err)
			}
		}),
		nats.ReconnectHandler(func(nc *nats.Conn) {
			s.mu.Lock()
			var gap time.Duration
			if !s.downSince.IsZero() {
				gap = s.clock.Now().Sub(s.downSince)
				s.downSince = time.Time{}
			}
			s.lastGap = gap
			s.reconnects++
			s.mu.Unlock()
			if s.metrics != nil {
				s.metrics.Reconnects.Add(1)
				s.metrics.GapNanos.Add(uint64(max(gap, 0)))
				s.metrics.Count(ingest.ReasonGap, 1)
			}
			s.log.Warn("nats reconnected", "url", nc.ConnectedUrlRedacted(), "gap", gap)
		}),
		nats.ConnectHandler(func(*nats.Conn) { s.connOnce.Do(func() { close(s.connected) }) }),
		nats.ErrorHandler(func(_ *nats.Conn, sub *nats.Subscription, err error) {
			subj := ""
			if sub != nil {
				subj = sub.Subject
			}
			s.limiter.Warn(s.clock.Now(), "async:"+subj, "nats async error", "err", err)
		}),
	)
	return opts, nil
}

// Run connects and delivers samples until ctx ends. It returns an error
// only for settings the server refuses for good (bad stream, auth refused
// at the first connect); lost connections are retried forever.
func (s *Source) Run(ctx context.Context) error {
	opts, err := s.Options()
	if err != nil {
		return err
	}
	closed := make(chan struct{})
	var once sync.Once
	opts = append(opts, nats.ClosedHandler(func(*nats.Conn) { once.Do(func() { close(closed) }) }))
	nc, err := nats.Connect(s.cfg.URL(), opts...)
	if err != nil {
		return fmt.Errorf("nats connect: %w", err)
	}
	defer nc.Close()
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	// The connection closes for good only on a repeated authentication
	// failure (nats.go gives up then) or on our own Close.
	closeErr := make(chan error, 1)
	watcherDone := make(chan struct{})
	go func() {
		defer close(watcherDone)
		select {
		case <-closed:
			closeErr <- nc.LastError()
			cancel()
		case <-ctx.Done():
		}
	}()
	if s.cfg.Mode == ModeCore {
		err = s.runCore(ctx, nc)
	} else {
		err = s.runJetStream(ctx, nc)
	}
	cancel()
	<-watcherDone
	select {
	case cerr := <-closeErr:
		if err == nil {
			err = fmt.Errorf("%w: %v", ErrClosed, cerr)
		}
	default:
	}
	return err
}

func (s *Source) runCore(ctx context.Context, nc *nats.Conn) error {
	bt := newBatcher(s, func(b []ingest.Sample) { s.q.Offer(b) })
	bctx, bcancel := context.WithCancel(context.Background())
	bdone := make(chan struct{})
	go func() { defer close(bdone); bt.run(bctx, s.cfg.BatchLinger) }()
	defer func() { bcancel(); <-bdone }()
	var subs []*nats.Subscription
	defer func() {
		for _, sub := range subs {
			_ = sub.Unsubscribe()
		}
	}()
	for _, subj := range s.cfg.Subjects {
		sub, err := nc.Subscribe(subj, func(m *nats.Msg) { bt.add(m.Subject, m.Data, nil, nil) })
		if err != nil {
			return fmt.Errorf("nats subscribe %q: %w", subj, err)
		}
		subs = append(subs, sub)
		if err := sub.SetPendingLimits(s.cfg.PendingMsgs, s.cfg.PendingBytes); err != nil {
			return fmt.Errorf("nats pending limits: %w", err)
		}
	}
	if err := nc.Flush(); err == nil { // the server has the subscriptions
		s.subscribed.Store(true)
	}
	<-ctx.Done()
	return nil
}

// decodeInto decodes one message, appending its samples to dst, counting
// and logging failures (once per tag, or subject, per minute). The caller
// counts the message (Metrics.Messages).
func (s *Source) decodeInto(dec *payload.Decoder, subject string, data []byte, now time.Time, dst []ingest.Sample) []ingest.Sample {
	dst, errs := dec.Decode(data, now, dst, nil)
	if len(errs) > 0 {
		if s.metrics != nil {
			s.metrics.DecodeErrors.Add(uint64(len(errs)))
			s.metrics.Count(ingest.ReasonDecode, uint64(len(errs)))
		}
		for _, e := range errs {
			key := e.Tag
			if key == "" {
				key = "subject:" + subject
			}
			s.limiter.Warn(now, key, "payload decode error", "subject", subject, "err", e.Err)
		}
	}
	return dst
}

func (s *Source) runJetStream(ctx context.Context, nc *nats.Conn) error {
	js, err := jetstream.New(nc)
	if err != nil {
		return fmt.Errorf("jetstream: %w", err)
	}
	ccfg := jetstream.ConsumerConfig{
		Durable:        s.cfg.Durable,
		FilterSubjects: s.cfg.Subjects,
		AckPolicy:      jetstream.AckExplicitPolicy,
		AckWait:        s.cfg.AckWait,
		MaxAckPending:  s.cfg.MaxAckPending,
		DeliverPolicy:  jetstream.DeliverAllPolicy,
	}
	if s.cfg.AckPolicy == "all" {
		ccfg.AckPolicy = jetstream.AckAllPolicy
	}
	var cons jetstream.Consumer
	// The server may be down at start: retry until ctx ends.
	for {
		cctx, cancel := context.WithTimeout(ctx, 10*time.Second)
		cons, err = js.CreateOrUpdateConsumer(cctx, s.cfg.Stream, ccfg)
		cancel()
		if err == nil {
			break
		}
		// The server answered and refused (missing stream, a durable with
		// settings that cannot be changed, ...): retrying cannot help.
		var apiErr *jetstream.APIError
		if errors.As(err, &apiErr) && ((apiErr.Code >= 400 && apiErr.Code < 500) ||
			apiErr.ErrorCode == jetstream.JSErrCodeConsumerCreate || apiErr.ErrorCode == jetstream.JSErrCodeBadRequest) {
			return fmt.Errorf("jetstream consumer %q on stream %q: %w", s.cfg.Durable, s.cfg.Stream, err)
		}
		s.log.Warn("jetstream consumer not ready, retrying", "err", err)
		select {
		case <-ctx.Done():
			return nil
		case <-time.After(s.cfg.ReconnectWait):
		}
	}
	tracker := &ackTracker{}
	// Shutdown order: stop consuming, flush the batcher, then the acks.
	bt := newBatcher(s, func(b []ingest.Sample) {
		// On shutdown the batch is dropped unacknowledged: redelivered.
		_ = s.q.Put(ctx, b)
	})
	bctx, bcancel := context.WithCancel(context.Background())
	bdone := make(chan struct{})
	go func() { defer close(bdone); bt.run(bctx, s.cfg.BatchLinger) }()
	flushDone := make(chan struct{})
	fctx, fcancel := context.WithCancel(ctx)
	defer func() { fcancel(); <-flushDone }()
	defer func() { bcancel(); <-bdone }() // runs before the ack flusher stops
	go func() {
		defer close(flushDone)
		t := time.NewTicker(s.cfg.AckFlush)
		defer t.Stop()
		for {
			var stop bool
			select {
			case <-fctx.Done():
				stop = true // one last flush of what was completed
			case <-t.C:
			}
			{
				n, err := tracker.flush()
				if err != nil {
					s.limiter.Warn(s.clock.Now(), "ack", "jetstream ack failed", "err", err)
				} else if n > 0 && s.metrics != nil {
					s.metrics.Acked.Add(uint64(n))
				}
			}
			if stop {
				return
			}
		}
	}()
	cc, err := cons.Consume(func(m jetstream.Msg) {
		if s.cfg.AckPolicy == "all" {
			seq, ok := streamSeq(m.Reply())
			if !ok {
				md, err := m.Metadata() // slow path, also reports the reason
				if err != nil {
					s.limiter.Warn(s.clock.Now(), "metadata", "jetstream message without metadata", "err", err)
					return // never acknowledged: redelivered
				}
				seq = md.Sequence.Stream
			}
			bt.add(m.Subject(), m.Data(), tracker.add(seq, m), nil)
			return
		}
		// Explicit policy: each message acknowledged on completion.
		bt.add(m.Subject(), m.Data(), nil, m)
	}, jetstream.PullMaxMessages(s.cfg.FetchBatch), jetstream.PullHeartbeat(2*time.Second),
		jetstream.ConsumeErrHandler(func(_ jetstream.ConsumeContext, err error) {
			s.limiter.Warn(s.clock.Now(), "consume", "jetstream consume", "err", err)
		}))
	if err != nil {
		return fmt.Errorf("jetstream consume: %w", err)
	}
	<-ctx.Done()
	cc.Drain()
	select {
	case <-cc.Closed():
	case <-time.After(5 * time.Second):
		cc.Stop()
	}
	return nil
}

// explicitAck returns the completion of a message under ack policy
// explicit: acknowledge it on its own.
func (s *Source) explicitAck(m jetstream.Msg) func() {
	return func() {
		if err := m.Ack(); err != nil {
			s.limiter.Warn(s.clock.Now(), "ack", "jetstream ack failed", "err", err)
			return
		}
		if s.metrics != nil {
			s.metrics.Acked.Add(1)
		}
	}
}

// Validate checks the settings as New will, without connecting (for
// `exergywatch check`).
func (c Config) Validate() error { return c.defaults() }
