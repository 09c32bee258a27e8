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
// buffer (ReconnectBufBytes) and sends them after reconnecting; a message that
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
	"os"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
)

var (
	_ sinks.Sink     = (*Sink)(nil)
	_ sinks.Reporter = (*Sink)(nil)
)

// Config configures the NATS sink.
type Config struct {
	URL           string `yaml:"url"`            // server URL(s), comma-separated, e.g. nats://127.0.0.1:4222
	SubjectPrefix string `yaml:"subject_prefix"` // first subject token; default "exergywatch"
	CredsFile     string `yaml:"creds_file"`     // NATS credentials file (JWT + nkey); optional
	TokenEnv      string `yaml:"token_env"`      // environment variable holding an auth token; optional, never logged

	JetStream         bool   `yaml:"jetstream"`            // publish with JetStream acknowledgements
	Stream            string `yaml:"stream"`               // JetStream stream name; default "EXERGYWATCH"
	CreateStream      bool   `yaml:"create_stream"`        // create or update the stream (subjects <prefix>.>) when missing
	StreamMaxAgeHours int    `yaml:"stream_max_age_hours"` // retention of a created stream (h); default 168

	// ReconnectBufBytes bounds what core publishing keeps while the
	// connection is down (bytes). Default 8 MiB: a record with two figures
	// is about 370 bytes of JSON (measured in TestCoreReconnectBuffer), with
	// six figures about 0.9 kB, so this holds about 9 000 records, 30 minutes
	// for 5 machines at one evaluation per second.
	ReconnectBufBytes int `yaml:"reconnect_buf_bytes"`
	ReconnectWaitMS   int `yaml:"reconnect_wait_ms"`  // pause between reconnect attempts (ms); default 1000
	PublishTimeoutMS  int `yaml:"publish_timeout_ms"` // wait for one JetStream acknowledgement (ms); default 5000
	RetryMaxMS        int `yaml:"retry_max_ms"`       // cap of the JetStream retry backoff (ms); default 2000
}

// Defaults fills zero fields with defaults.
func (c *Config) Defaults() {
	if c.SubjectPrefix == "" {
		c.SubjectPrefix = "exergywatch"
	}
	if c.Stream == "" {
		c.Stream = "EXERGYWATCH"
	}
	def := func(p *int, v int) {
		if *p == 0 {
			*p = v
		}
	}
	def(&c.StreamMaxAgeHours, 168)
	def(&c.ReconnectBufBytes, 8<<20)
	def(&c.ReconnectWaitMS, 1000)
	def(&c.PublishTimeoutMS, 5000)
	def(&c.RetryMaxMS, 2000)
}

// Validate checks the settings; every message says how to fix the value.
func (c Config) Validate() error {
	if c.URL == "" {
		return fmt.Errorf("natsout: url is empty: set e.g. nats://127.0.0.1:4222")
	}
	if c.SubjectPrefix != Token(c.SubjectPrefix) {
		return fmt.Errorf("natsout: subject_prefix %q must be one subject token (no '.', '*', '>' or spaces)", c.SubjectPrefix)
	}
	if c.JetStream && (c.Stream == "" || strings.ContainsAny(c.Stream, ".*> \t")) {
		return fmt.Errorf("natsout: stream %q: use letters, digits, '-' and '_'", c.Stream)
	}
	if c.CredsFile != "" && c.TokenEnv != "" {
		return fmt.Errorf("natsout: set creds_file or token_env, not both")
	}
	for _, p := range []struct {
		n string
		v int
	}{{"stream_max_age_hours", c.StreamMaxAgeHours}, {"reconnect_wait_ms", c.ReconnectWaitMS},
		{"publish_timeout_ms", c.PublishTimeoutMS}, {"retry_max_ms", c.RetryMaxMS}} {
		if p.v < 1 {
			return fmt.Errorf("natsout: %s = %d: must be at least 1", p.n, p.v)
		}
	}
	if c.ReconnectBufBytes < 64<<10 {
		return fmt.Errorf("natsout: reconnect_buf_bytes %d: use at least 65536 (a record is about 0.4 to 1 kB)", c.ReconnectBufBytes)
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

	closed   atomic.Bool
	written  atomic.Uint64
	dropped  atomic.Uint64
	rejected atomic.Uint64

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
	opts := []nats.Option{
		nats.Name("exergywatch-" + name),
		nats.MaxReconnects(-1),
		nats.ReconnectWait(time.Duration(cfg.ReconnectWaitMS) * time.Millisecond),
		nats.ReconnectBufSize(cfg.ReconnectBufBytes),
		nats.RetryOnFailedConnect(true),
		nats.DisconnectErrHandler(func(_ *nats.Conn, err error) {
			if err != nil {
				s.setErr(fmt.Errorf("natsout: disconnected: %w", err))
			}
			s.log.Warn("nats disconnected; buffering", "err", err)
		}),
		nats.ReconnectHandler(func(nc *nats.Conn) { s.log.Info("nats reconnected", "url", nc.ConnectedUrlRedacted()) }),
	}
	if cfg.CredsFile != "" {
		opts = append(opts, nats.UserCredentials(cfg.CredsFile))
	}
	if cfg.TokenEnv != "" {
		tok, ok := os.LookupEnv(cfg.TokenEnv)
		if !ok || tok == "" {
			return nil, fmt.Errorf("natsout: environment variable %s (token_env) is not set or empty", cfg.TokenEnv)
		}
		opts = append(opts, nats.Token(tok))
	}
	nc, err := nats.Connect(cfg.URL, opts...)
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
			ctx, cancel := context.WithTimeout(context.Background(), time.Duration(cfg.PublishTimeoutMS)*time.Millisecond)
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
		MaxAge:     time.Duration(s.cfg.StreamMaxAgeHours) * time.Hour,
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
			actx, cancel := context.WithTimeout(ctx, time.Duration(s.cfg.PublishTimeoutMS)*time.Millisecond)
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
		delay = min(2*delay, time.Duration(s.cfg.RetryMaxMS)*time.Millisecond)
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
