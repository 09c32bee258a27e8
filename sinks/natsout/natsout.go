// Package natsout is the NATS sink of exergywatch: derived records and alert
// events as JSON (sinks.RecordJSON, sinks.EventJSON) on subjects
//
//	<prefix>.<site>.derived.<machine>   one message per record
//	<prefix>.<site>.alert.<machine>     one message per alert transition
//
// with <prefix> = Config.SubjectPrefix (default "exergywatch"). Site and
// machine become subject tokens: '.', '*', '>', whitespace and control
// characters are replaced by '_', an empty token becomes '_'. Subscribers use
// e.g. "exergywatch.*.derived.>" or "exergywatch.north.alert.*"; the JSON
// carries the unchanged site and machine.
//
// Without JetStream a message is published with core NATS (at most once):
// while the connection is down the client keeps messages in its reconnect
// buffer (reconnect_buffer_bytes) and sends them after reconnecting; a message that
// does not fit is dropped and counted. With JetStream each message is
// published and acknowledged by the stream, retried with capped backoff until
// the write's context ends, and carries a Nats-Msg-Id so that retries are
// stored once (within the stream's duplicate window); while disconnected a
// JetStream write waits for the connection instead of filling the reconnect
// buffer. A write that gives up is counted as dropped, although in a rare race
// (the acknowledgement lost on the way back) the server did store it; the
// message id makes a retry by the caller harmless. The item counted in
// Stats is one message. The connection reconnects forever.
package natsout

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config/natsconn"
	"github.com/exergywatch/exergywatch/sinks"
)

var (
	_ sinks.Sink     = (*Sink)(nil)
	_ sinks.Reporter = (*Sink)(nil)
)

// Config configures the NATS sink. The connection settings (urls, name,
// user, password, token, nkey_seed_file, credentials_file, tls,
// reconnect_wait, reconnect_buffer_bytes) are those of the NATS source
// (package config/natsconn) and sit at the same level as the sink's own
// keys.
type Config struct {
	// Conn: servers, authentication, TLS and reconnecting. The default
	// connection name is "exergywatch-<sink name>". ReconnectBufferBytes
	// bounds what core publishing keeps while the connection is down
	// (bytes). Default 8 MiB: a record with two figures is about 370 bytes
	// of JSON (measured in TestCoreReconnectBuffer), with six figures about
	// 0.9 kB, so this holds about 9 000 records, 30 minutes for 5 machines
	// at one evaluation per second.
	Conn natsconn.Settings `yaml:",inline"`

	SubjectPrefix string `yaml:"subject_prefix"` // first subject token; default "exergywatch"

	JetStream    bool   `yaml:"jetstream"`     // publish with JetStream acknowledgements
	Stream       string `yaml:"stream"`        // JetStream stream name; default "EXERGYWATCH"
	CreateStream bool   `yaml:"create_stream"` // create or update the stream (subjects <prefix>.>) when missing
	// StreamMaxAge is the retention of a created stream (a duration such
	// as 720h); default 168 h (7 days).
	StreamMaxAge time.Duration `yaml:"stream_max_age"`

	// PublishTimeout is the wait for one JetStream acknowledgement (a
	// duration such as 5s); default 5 s.
	PublishTimeout time.Duration `yaml:"publish_timeout"`
	// RetryMax caps the JetStream retry backoff (a duration such as 2s);
	// default 2 s.
	RetryMax time.Duration `yaml:"retry_max"`
}

// Defaults fills zero fields with defaults.
func (c *Config) Defaults() {
	c.Conn.Defaults()
	if c.Conn.ReconnectBufferBytes == 0 {
		c.Conn.ReconnectBufferBytes = 8 << 20
	}
	if c.SubjectPrefix == "" {
		c.SubjectPrefix = "exergywatch"
	}
	if c.Stream == "" {
		c.Stream = "EXERGYWATCH"
	}
	def := func(p *time.Duration, v time.Duration) {
		if *p == 0 {
			*p = v
		}
	}
	def(&c.StreamMaxAge, 168*time.Hour)
	def(&c.PublishTimeout, 5*time.Second)
	def(&c.RetryMax, 2*time.Second)
}

// Validate checks the settings; every message says how to fix the value.
func (c Config) Validate() error {
	if err := c.Conn.Validate(); err != nil {
		return fmt.Errorf("natsout: %w", err)
	}
	if c.SubjectPrefix != Token(c.SubjectPrefix) {
		return fmt.Errorf("natsout: subject_prefix %q must be one subject token (no '.', '*', '>' or spaces)", c.SubjectPrefix)
	}
	if c.JetStream && (c.Stream == "" || strings.ContainsAny(c.Stream, ".*> \t")) {
		return fmt.Errorf("natsout: stream %q: use letters, digits, '-' and '_'", c.Stream)
	}
	for _, p := range []struct {
		n   string
		v   time.Duration
		min time.Duration
	}{{"stream_max_age", c.StreamMaxAge, time.Second}, {"reconnect_wait", c.Conn.ReconnectWait, time.Millisecond},
		{"publish_timeout", c.PublishTimeout, time.Millisecond}, {"retry_max", c.RetryMax, time.Millisecond}} {
		if p.v < p.min {
			return fmt.Errorf("natsout: %s = %v: must be at least %v", p.n, p.v, p.min)
		}
	}
	if c.Conn.ReconnectBufferBytes < 64<<10 {
		return fmt.Errorf("natsout: reconnect_buffer_bytes %d: use at least 65536 (a record is about 0.4 to 1 kB)", c.Conn.ReconnectBufferBytes)
	}
	return nil
}

// Token turns a site or machine id into one subject token.
func Token(s string) string {
	if s == "" {
		return "_"
	}
	return strings.Map(func(r rune) rune {
		if r == '.' || r == '*' || r == '>' || r <= ' ' || r == 0x7f {
			return '_'
		}
		return r
	}, s)
}

// RecordSubject is the subject of a record of site and machine.
func RecordSubject(prefix, site, machine string) string {
	return prefix + "." + Token(site) + ".derived." + Token(machine)
}

// EventSubject is the subject of an alert event of site and machine.
func EventSubject(prefix, site, machine string) string {
	return prefix + "." + Token(site) + ".alert." + Token(machine)
}

var errNotConnected = errors.New("not connected to a NATS server")

// Sink publishes to NATS.
type Sink struct {
	cfg  Config
	name string
	log  *slog.Logger
	nc   *nats.Conn
	js   jetstream.JetStream

	streamReady atomic.Bool
	streamMu    sync.Mutex

	closed    atomic.Bool
	connFails atomic.Uint64 // failed connect attempts since the last success
	written   atomic.Uint64
	dropped   atomic.Uint64
	rejected  atomic.Uint64

	errMu     sync.Mutex
	lastErr   string
	lastErrAt time.Time

	closeOnce sync.Once
	closeErr  error
}

// New connects (retrying in the background when the server is not up yet;
// messages wait in the reconnect buffer) and, with CreateStream, makes sure
// the stream exists. logger may be nil.
func New(name string, cfg Config, logger *slog.Logger) (*Sink, error) {
	cfg.Defaults()
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	if logger == nil {
		logger = slog.Default()
	}
	s := &Sink{cfg: cfg, name: name, log: logger.With("sink", name)}
	conn := cfg.Conn
	if conn.Name == "" {
		conn.Name = "exergywatch-" + name
	}
	opts, err := conn.Options()
	if err != nil {
		return nil, fmt.Errorf("natsout: %w", err)
	}
	opts = append(opts,
		nats.MaxReconnects(-1),
		nats.RetryOnFailedConnect(true),
		nats.DisconnectErrHandler(func(_ *nats.Conn, err error) {
			if err != nil {
				s.setErr(fmt.Errorf("natsout: disconnected: %w", err))
			}
			s.log.Warn("nats disconnected; buffering", "err", err)
		}),
		nats.ReconnectHandler(func(nc *nats.Conn) {
			s.connFails.Store(0)
			s.log.Info("nats reconnected", "url", nc.ConnectedUrlRedacted())
		}),
		// nats.go gives up only when the server refuses the credentials
		// twice in a row; the sink then drops what it is given until the
		// configuration is fixed and reloaded.
		nats.ClosedHandler(func(nc *nats.Conn) {
			if s.closed.Load() {
				return
			}
			last := nc.LastError()
			if last == nil {
				last = nats.ErrConnectionClosed
			}
			err := fmt.Errorf("natsout: connection closed for good: %w", last)
			s.setErr(err)
			s.log.Error("nats connection closed; fix the credentials and reload", "err", err)
		}),
		// A failed (re)connect attempt: refused TLS certificate, refused
		// credentials, server down. Kept as the last error; logged on the
		// first failure and every 100th.
		nats.ReconnectErrHandler(func(_ *nats.Conn, err error) {
			if err == nil {
				return
			}
			err = fmt.Errorf("natsout: connect: %w", err)
			s.setErr(err)
			if n := s.connFails.Add(1); n == 1 || n%100 == 0 {
				s.log.Warn("nats connect attempt failed; retrying", "err", err, "attempts", n)
			}
		}),
		nats.ConnectHandler(func(nc *nats.Conn) {
			s.connFails.Store(0)
			s.log.Info("nats connected", "url", nc.ConnectedUrlRedacted())
		}),
	)
	nc, err := nats.Connect(conn.URL(), opts...)
	if err != nil {
		return nil, fmt.Errorf("natsout: connect: %w", err)
	}
	s.nc = nc
	if cfg.JetStream {
		js, err := jetstream.New(nc)
		if err != nil {
			nc.Close()
			return nil, fmt.Errorf("natsout: jetstream: %w", err)
		}
		s.js = js
		if cfg.CreateStream {
			ctx, cancel := context.WithTimeout(context.Background(), cfg.PublishTimeout)
			defer cancel()
			if err := s.ensureStream(ctx); err != nil {
				// not fatal: the server may come later; retried on publish
				s.log.Warn("stream not ready yet", "stream", cfg.Stream, "err", err)
			}
		}
	}
	return s, nil
}

func (s *Sink) ensureStream(ctx context.Context) error {
	if !s.cfg.CreateStream || s.streamReady.Load() {
		return nil
	}
	s.streamMu.Lock()
	defer s.streamMu.Unlock()
	if s.streamReady.Load() {
		return nil
	}
	_, err := s.js.CreateOrUpdateStream(ctx, jetstream.StreamConfig{
		Name:       s.cfg.Stream,
		Subjects:   []string{s.cfg.SubjectPrefix + ".>"},
		Storage:    jetstream.FileStorage,
		MaxAge:     s.cfg.StreamMaxAge,
		Duplicates: 2 * time.Minute,
	})
	if err != nil {
		return fmt.Errorf("natsout: create stream %s: %w", s.cfg.Stream, err)
	}
	s.streamReady.Store(true)
	return nil
}

func (s *Sink) setErr(err error) {
	s.errMu.Lock()
	s.lastErr, s.lastErrAt = err.Error(), time.Now().UTC()
	s.errMu.Unlock()
}

func (s *Sink) reject(err error) error {
	s.rejected.Add(1)
	s.setErr(err)
	s.log.Warn("item rejected", "err", err)
	return err
}

// WriteRecord publishes the record as JSON on RecordSubject.
func (s *Sink) WriteRecord(ctx context.Context, r compute.Record) error {
	b, err := sinks.MarshalRecord(r)
	if err != nil {
		return s.reject(fmt.Errorf("natsout: %w", err))
	}
	id := "rec/" + r.Site + "/" + r.Machine + "/" + strconv.FormatInt(r.Time.UnixNano(), 10)
	return s.publish(ctx, RecordSubject(s.cfg.SubjectPrefix, r.Site, r.Machine), id, b)
}

// WriteEvent publishes the event as JSON on EventSubject.
func (s *Sink) WriteEvent(ctx context.Context, e compute.Event) error {
	b, err := sinks.MarshalEvent(e)
	if err != nil {
		return s.reject(fmt.Errorf("natsout: %w", err))
	}
	id := "alert/" + e.Site + "/" + e.Machine + "/" + e.Rule + "/" + strconv.FormatInt(e.Time.UnixNano(), 10) + "/" + strconv.Itoa(int(e.To))
	return s.publish(ctx, EventSubject(s.cfg.SubjectPrefix, e.Site, e.Machine), id, b)
}

func (s *Sink) drop(err error) error {
	n := s.dropped.Add(1)
	s.setErr(err)
	if n == 1 || n%100 == 0 {
		s.log.Warn("message dropped", "err", err, "dropped_total", n)
	}
	return err
}

func (s *Sink) publish(ctx context.Context, subj, id string, data []byte) error {
	if s.closed.Load() {
		return fmt.Errorf("natsout: %w", sinks.ErrClosed)
	}
	if s.js == nil {
		if err := s.nc.Publish(subj, data); err != nil {
			return s.drop(fmt.Errorf("natsout: publish %s: %w", subj, err))
		}
		s.written.Add(1)
		return nil
	}
	msg := &nats.Msg{Subject: subj, Data: data, Header: nats.Header{}}
	delay := 50 * time.Millisecond
	for attempt := 1; ; attempt++ {
		// While disconnected, do not hand the message to the client: it would
		// sit in the reconnect buffer and could be stored after this write
		// already gave up and counted it as dropped.
		var err error
		if !s.nc.IsConnected() {
			err = errNotConnected
		} else {
			err = s.ensureStream(ctx)
		}
		if err == nil {
			actx, cancel := context.WithTimeout(ctx, s.cfg.PublishTimeout)
			_, err = s.js.PublishMsg(actx, msg, jetstream.WithMsgID(id), jetstream.WithExpectStream(s.cfg.Stream))
			cancel()
			if err == nil {
				s.written.Add(1)
				return nil
			}
		}
		if errors.Is(err, nats.ErrConnectionClosed) || s.closed.Load() {
			return s.drop(fmt.Errorf("natsout: jetstream publish %s: %w", subj, err))
		}
		t := time.NewTimer(delay/2 + rand.N(delay/2+1))
		select {
		case <-t.C:
		case <-ctx.Done():
			t.Stop()
			return s.drop(fmt.Errorf("natsout: jetstream publish %s: gave up after %d attempts: %w (last: %w)", subj, attempt, ctx.Err(), err))
		}
		delay = min(2*delay, s.cfg.RetryMax)
	}
}

// Close flushes what the client buffered (within ctx) and closes the
// connection. Idempotent.
func (s *Sink) Close(ctx context.Context) error {
	s.closeOnce.Do(func() {
		s.closed.Store(true)
		if s.nc.IsConnected() {
			if _, ok := ctx.Deadline(); !ok { // the client needs a deadline
				var cancel context.CancelFunc
				ctx, cancel = context.WithTimeout(ctx, 10*time.Second)
				defer cancel()
			}
			if err := s.nc.FlushWithContext(ctx); err != nil {
				s.closeErr = fmt.Errorf("natsout: flush on close: %w", err)
			}
		} else if n, _ := s.nc.Buffered(); n > 0 {
			s.closeErr = fmt.Errorf("natsout: closed while disconnected: %d buffered bytes lost", n)
			s.setErr(s.closeErr)
		}
		s.nc.Close()
	})
	return s.closeErr
}

// Stats reports the health of the sink; the item is one message. With core
// publishing, Written counts messages handed to the client (NATS gives no
// acknowledgement); BufferedBytes is what the client still holds to send.
func (s *Sink) Stats() sinks.Stats {
	buffered := 0
	if !s.nc.IsClosed() {
		buffered, _ = s.nc.Buffered()
	}
	s.errMu.Lock()
	le, lt := s.lastErr, s.lastErrAt
	s.errMu.Unlock()
	return sinks.Stats{Name: s.name, BufferedBytes: int64(buffered), Written: s.written.Load(), Dropped: s.dropped.Load(),
		Rejected: s.rejected.Load(), LastError: le, LastErrorTime: lt}
}
