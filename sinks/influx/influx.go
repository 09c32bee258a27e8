// Package influx is the InfluxDB v2 sink of exergywatch: records and alert
// events become line protocol (series design in lineproto.go), are batched in
// memory and written with the blocking write API of influxdb-client-go, with
// our own retries (capped exponential backoff with jitter) and a bounded
// on-disk spool (spool.go) that keeps every point while the database is down
// and replays them in order when it returns, also across a restart.
//
// The item counted in Stats is the line-protocol point: one record gives one
// point plus one per active reason code; one event gives one point.
//
// Error classes: network errors, timeouts, HTTP 5xx and 429 are retryable
// (the batch is retried, then spooled). HTTP 401, 403 and 404 and TLS
// handshakes failing on a certificate (server not trusted: no or wrong
// tls.ca_file; client certificate refused) are configuration errors (wrong
// token, organisation, bucket or TLS settings): the data is kept in the
// spool and retried at the longest backoff, because throwing it away would
// turn a token or certificate rotation into data loss. Any other 4xx means the
// server refuses the data itself: the batch is dropped and counted.
package influx

import (
	"bytes"
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"net"
	"sync"
	"sync/atomic"
	"time"

	influxdb2 "github.com/influxdata/influxdb-client-go/v2"
	"github.com/influxdata/influxdb-client-go/v2/api"
	http2 "github.com/influxdata/influxdb-client-go/v2/api/http"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
)

var (
	_ sinks.Sink     = (*Sink)(nil)
	_ sinks.Reporter = (*Sink)(nil)
)

// ErrNotReady is returned by Ping when the server does not answer its ping.
var ErrNotReady = errors.New("influx: server not ready")

// Sink writes to an InfluxDB v2 write API (InfluxDB 2.x, VictoriaMetrics).
type Sink struct {
	cfg    Config
	name   string
	log    *slog.Logger
	client influxdb2.Client
	api    api.WriteAPIBlocking
	sp     *spool

	mu         sync.Mutex
	pending    []byte // complete lines waiting for the writer
	pendingPts int
	space      chan struct{} // closed when the writer took pending data
	closed     bool

	kick     chan struct{}
	flushReq chan chan error
	stop     chan struct{}
	done     chan struct{}
	runCtx   context.Context
	cancel   context.CancelFunc

	// writer-goroutine state
	failures int
	nextTry  time.Time

	written  atomic.Uint64
	dropped  atomic.Uint64
	rejected atomic.Uint64

	errMu     sync.Mutex
	lastErr   string
	lastErrAt time.Time

	closeOnce sync.Once
	closeErr  error
}

// New opens the spool (replaying it later if it holds points from an earlier
// run), creates the client and starts the writer goroutine, which Close
// stops. name labels logs and Stats. logger may be nil.
func New(name string, cfg Config, logger *slog.Logger) (*Sink, error) {
	cfg.Defaults()
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	if logger == nil {
		logger = slog.Default()
	}
	tc, err := cfg.TLS.Client()
	if err != nil {
		return nil, fmt.Errorf("influx: %w", err)
	}
	sp, err := openSpool(cfg.SpoolDir, cfg.SpoolMaxBytes, cfg.SpoolSegmentBytes, !cfg.SpoolNoFsync)
	if err != nil {
		return nil, err
	}
	opts := influxdb2.DefaultOptions().SetPrecision(time.Millisecond).SetLogLevel(0).
		SetHTTPRequestTimeout(uint((cfg.RequestTimeout + time.Second - 1) / time.Second))
	if tc != nil {
		opts.SetTLSConfig(tc)
	}
	client := influxdb2.NewClientWithOptions(cfg.URL, cfg.Token, opts)
	ctx, cancel := context.WithCancel(context.Background())
	s := &Sink{
		cfg: cfg, name: name, log: logger.With("sink", name), client: client,
		api: client.WriteAPIBlocking(cfg.Org, cfg.Bucket), sp: sp,
		space: make(chan struct{}), kick: make(chan struct{}, 1), flushReq: make(chan chan error),
		stop: make(chan struct{}), done: make(chan struct{}), runCtx: ctx, cancel: cancel,
	}
	if !sp.empty() {
		s.log.Info("spool holds points from an earlier run; they are sent first",
			"points", sp.points.Load(), "bytes", sp.bytes.Load(), "torn_lines_cut", sp.torn.Load())
	}
	go s.run()
	return s, nil
}

// Ping asks the server whether it is up (GET /ping), for readiness. It does
// not use the /health endpoint, which VictoriaMetrics answers differently.
func (s *Sink) Ping(ctx context.Context) error {
	ok, err := s.client.Ping(ctx)
	if err != nil {
		return fmt.Errorf("%w: %w", ErrNotReady, err)
	}
	if !ok {
		return ErrNotReady
	}
	return nil
}

func (s *Sink) setErr(err error) {
	s.errMu.Lock()
	s.lastErr, s.lastErrAt = err.Error(), time.Now().UTC()
	s.errMu.Unlock()
}

func (s *Sink) reject(err error) error {
	n := s.rejected.Add(1)
	s.setErr(err)
	if n == 1 || n%1000 == 0 {
		s.log.Warn("item rejected", "err", err, "rejected_total", n)
	}
	return err
}

// WriteRecord encodes the record and queues its points. It blocks only while
// the in-memory queue is full, at most until ctx ends; then the points are
// dropped, counted and ErrQueueFull is returned. Invalid records are
// rejected with an error wrapping sinks.ErrInvalid.
func (s *Sink) WriteRecord(ctx context.Context, r compute.Record) error {
	data, n, err := encodeRecord(nil, s.cfg.MeasurementPrefix, r)
	if err != nil {
		return s.reject(fmt.Errorf("influx: %w", err))
	}
	return s.enqueue(ctx, data, n)
}

// WriteEvent encodes the alert event and queues its point.
func (s *Sink) WriteEvent(ctx context.Context, e compute.Event) error {
	data, err := encodeEvent(nil, s.cfg.MeasurementPrefix, e)
	if err != nil {
		return s.reject(fmt.Errorf("influx: %w", err))
	}
	return s.enqueue(ctx, data, 1)
}

func (s *Sink) enqueue(ctx context.Context, data []byte, n int) error {
	if n > s.cfg.MaxQueuedPoints {
		s.dropped.Add(uint64(n))
		err := fmt.Errorf("influx: %w: item of %d points exceeds max_queued_points %d", sinks.ErrQueueFull, n, s.cfg.MaxQueuedPoints)
		s.setErr(err)
		return err
	}
	for {
		s.mu.Lock()
		if s.closed {
			s.mu.Unlock()
			return fmt.Errorf("influx: %w", sinks.ErrClosed)
		}
		if s.pendingPts+n <= s.cfg.MaxQueuedPoints {
			s.pending = append(s.pending, data...)
			s.pendingPts += n
			full := s.pendingPts >= s.cfg.BatchPoints
			s.mu.Unlock()
			if full {
				select {
				case s.kick <- struct{}{}:
				default:
				}
			}
			return nil
		}
		wait := s.space
		s.mu.Unlock()
		select {
		case <-wait:
		case <-ctx.Done():
			s.dropped.Add(uint64(n))
			err := fmt.Errorf("influx: %w (%d points dropped): %w", sinks.ErrQueueFull, n, ctx.Err())
			s.setErr(err)
			s.log.Warn("queue full, points dropped", "points", n)
			return err
		}
	}
}

// take removes up to max points from the queue.
func (s *Sink) take(max int) ([]byte, int) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.pendingPts == 0 {
		return nil, 0
	}
	var data []byte
	var n int
	if s.pendingPts <= max {
		data, n = s.pending, s.pendingPts
		s.pending, s.pendingPts = nil, 0
	} else {
		off := 0
		for n < max {
			off += bytes.IndexByte(s.pending[off:], '\n') + 1
			n++
		}
		data = bytes.Clone(s.pending[:off])
		s.pending = append(s.pending[:0:0], s.pending[off:]...)
		s.pendingPts -= n
	}
	close(s.space)
	s.space = make(chan struct{})
	return data, n
}

func (s *Sink) run() {
	defer close(s.done)
	t := time.NewTicker(s.cfg.FlushInterval)
	defer t.Stop()
	for {
		select {
		case <-s.stop:
			s.cycle(1, true)
			return
		case <-t.C:
			s.cycle(s.cfg.DirectAttempts, false)
		case <-s.kick:
			s.cycle(s.cfg.DirectAttempts, false)
		case reply := <-s.flushReq:
			s.cycle(s.cfg.DirectAttempts, true)
			reply <- s.remaining()
		}
	}
}

func (s *Sink) remaining() error {
	s.mu.Lock()
	q := s.pendingPts
	s.mu.Unlock()
	if sp := s.sp.points.Load(); q > 0 || sp > 0 {
		return fmt.Errorf("influx: %d points still queued and %d spooled", q, sp)
	}
	return nil
}

// cycle sends (or spools) what is queued, then replays the spool when its
// backoff allows (always when force).
func (s *Sink) cycle(attempts int, force bool) {
	for {
		data, n := s.take(s.cfg.BatchPoints)
		if n == 0 {
			break
		}
		s.deliver(data, n, attempts)
	}
	s.replay(force)
}

type errClass int

const (
	classOK     errClass = iota
	classRetry           // network, timeout, 5xx, 429
	classConfig          // 401, 403, 404: keep the data, fix the configuration
	classData            // other 4xx: the server refuses the data
)

func classify(err error) errClass {
	if err == nil {
		return classOK
	}
	if tlsRefused(err) {
		return classConfig
	}
	var he *http2.Error
	if errors.As(err, &he) && he.StatusCode != 0 {
		switch c := he.StatusCode; {
		case c == 429 || c >= 500:
			return classRetry
		case c == 401 || c == 403 || c == 404:
			return classConfig
		case c >= 400:
			return classData
		}
	}
	return classRetry
}

// tlsRefused reports a TLS handshake that failed on a certificate: the
// server's is not trusted (unknown CA, wrong name, expired) or the server
// refused ours. Retrying cannot help until the configuration changes.
func tlsRefused(err error) bool {
	var verr *tls.CertificateVerificationError
	var uerr x509.UnknownAuthorityError
	var herr x509.HostnameError
	var ierr x509.CertificateInvalidError
	var aerr tls.AlertError
	if errors.As(err, &verr) || errors.As(err, &uerr) || errors.As(err, &herr) || errors.As(err, &ierr) || errors.As(err, &aerr) {
		return true
	}
	// An alert from the server ("remote error: tls: certificate
	// required"): it refused the handshake, e.g. our client certificate.
	var oerr *net.OpError
	return errors.As(err, &oerr) && oerr.Op == "remote error"
}

// explain adds how to fix a configuration error (classConfig) to err.
func explain(err error) error {
	switch {
	case tlsRefused(err):
		return fmt.Errorf("influx: TLS handshake refused (fix: set tls.ca_file to the CA that signed the server's certificate, tls.server_name to a name in it, or tls.cert_file/key_file if the server wants a client certificate): %w", err)
	case statusOf(err) == 401 || statusOf(err) == 403:
		return fmt.Errorf("influx: token refused (fix: check token and its write permission on the bucket): %w", err)
	case statusOf(err) == 404:
		return fmt.Errorf("influx: not found (fix: check org and bucket): %w", err)
	}
	return err
}

func statusOf(err error) int {
	var he *http2.Error
	if errors.As(err, &he) {
		return he.StatusCode
	}
	return 0
}

// backoff returns the delay before retry number n (0-based): capped
// exponential with jitter in [d/2, d], at least the server's Retry-After.
func (s *Sink) backoff(n int, err error) time.Duration {
	d := s.cfg.RetryInitial
	for i := 0; i < n && d < s.cfg.RetryMax; i++ {
		d *= 2
	}
	d = min(d, s.cfg.RetryMax)
	d = d/2 + rand.N(d/2+1)
	var he *http2.Error
	if errors.As(err, &he) && he.RetryAfter > 0 {
		d = max(d, min(time.Duration(he.RetryAfter)*time.Second, s.cfg.RetryMax))
	}
	return d
}

func (s *Sink) writeOnce(data []byte) error {
	ctx, cancel := context.WithTimeout(s.runCtx, s.cfg.RequestTimeout)
	defer cancel()
	return s.api.WriteRecord(ctx, string(bytes.TrimSuffix(data, []byte{'\n'})))
}

// send writes one batch, retrying retryable errors up to attempts times.
func (s *Sink) send(data []byte, attempts int) error {
	for i := 0; ; i++ {
		err := s.writeOnce(data)
		if classify(err) != classRetry || i+1 >= attempts {
			return err
		}
		t := time.NewTimer(s.backoff(i, err))
		select {
		case <-t.C:
		case <-s.runCtx.Done():
			t.Stop()
			return err
		case <-s.stop:
			t.Stop()
			return err
		}
	}
}

// deliver writes a fresh batch directly when the spool is empty (keeping the
// order), else appends it to the spool.
func (s *Sink) deliver(data []byte, n, attempts int) {
	if s.sp.empty() {
		err := s.send(data, attempts)
		switch classify(err) {
		case classOK:
			s.written.Add(uint64(n))
			return
		case classData:
			s.dropped.Add(uint64(n))
			s.setErr(err)
			s.log.Error("server refused a batch; points dropped", "points", n, "status", statusOf(err), "err", err)
			return
		case classConfig:
			err = explain(err)
			s.setErr(err)
			s.log.Error("database refuses the connection or the credentials; spooling", "points", n, "status", statusOf(err), "err", err)
		default:
			s.setErr(err)
			s.log.Warn("database unreachable; spooling", "points", n, "status", statusOf(err), "err", err)
		}
	}
	s.spoolAppend(data, n)
}

func (s *Sink) spoolAppend(data []byte, n int) {
	before := s.sp.dropped.Load()
	if err := s.sp.appendBatch(data, int64(n)); err != nil {
		s.setErr(err)
		s.log.Error("spool append failed", "err", err)
	}
	if d := s.sp.dropped.Load() - before; d > 0 {
		s.log.Error("spool cap reached; oldest points dropped", "points", d, "spool_max_bytes", s.cfg.SpoolMaxBytes)
	}
}

// replay sends the spool oldest first, one chunk per request, until it is
// empty or a write fails (then it waits for the backoff).
func (s *Sink) replay(force bool) {
	if s.sp.empty() || (!force && time.Now().Before(s.nextTry)) {
		return
	}
	for !s.sp.empty() {
		c, err := s.sp.peek(s.cfg.BatchPoints)
		if err != nil {
			s.setErr(err)
			s.log.Error("spool read failed", "err", err)
			return
		}
		if c.lines == 0 {
			return
		}
		if c.points > 0 {
			err = s.writeOnce(c.body)
		}
		switch classify(err) {
		case classOK:
			s.written.Add(uint64(c.points))
		case classData:
			s.dropped.Add(uint64(c.points))
			s.setErr(err)
			s.log.Error("server refused spooled points; dropped", "points", c.points, "status", statusOf(err), "err", err)
		default:
			s.failures++
			delay := s.backoff(s.failures-1, err)
			if classify(err) == classConfig {
				delay = s.cfg.RetryMax
				err = explain(err)
			}
			s.nextTry = time.Now().Add(delay)
			s.setErr(err)
			if s.failures == 1 || s.failures%10 == 0 {
				s.log.Warn("spool replay failed; will retry", "status", statusOf(err), "err", err,
					"spooled_points", s.sp.points.Load(), "retry_in", delay)
			}
			return
		}
		if err := s.sp.commit(c); err != nil {
			s.setErr(err)
			s.log.Error("spool commit failed", "err", err)
			return
		}
		if s.failures > 0 {
			s.log.Info("database back; spool replaying", "remaining_points", s.sp.points.Load())
		}
		s.failures = 0
		// A long replay must not let the memory queue overflow: points that
		// arrive meanwhile join the end of the spool (the order stays).
		s.mu.Lock()
		many := s.pendingPts >= s.cfg.BatchPoints
		s.mu.Unlock()
		if many {
			data, n := s.take(s.cfg.MaxQueuedPoints)
			s.spoolAppend(data, n)
		}
	}
}

// Flush sends everything queued and replays the spool now, waiting for the
// result. It returns nil when nothing is left in memory or in the spool.
func (s *Sink) Flush(ctx context.Context) error {
	reply := make(chan error, 1)
	select {
	case s.flushReq <- reply:
	case <-s.done:
		return fmt.Errorf("influx: %w", sinks.ErrClosed)
	case <-ctx.Done():
		return ctx.Err()
	}
	select {
	case err := <-reply:
		return err
	case <-ctx.Done():
		return ctx.Err()
	}
}

// Close stops accepting points, writes what is queued (one attempt; what
// fails goes to the spool, which the next start replays) and tries the spool
// once, all within ctx. It is idempotent.
func (s *Sink) Close(ctx context.Context) error {
	s.closeOnce.Do(func() {
		s.mu.Lock()
		s.closed = true
		s.mu.Unlock()
		close(s.stop)
		select {
		case <-s.done:
		case <-ctx.Done():
			s.cancel() // aborts the HTTP request in flight; the rest is spooled
			<-s.done
		}
		s.cancel()
		s.sp.close()
		s.client.Close()
		if n := s.sp.points.Load(); n > 0 {
			s.log.Info("points left in the spool for the next start", "points", n, "dir", s.cfg.SpoolDir)
		}
	})
	return s.closeErr
}

// Stats reports the health of the sink in points.
func (s *Sink) Stats() sinks.Stats {
	s.mu.Lock()
	q := s.pendingPts
	s.mu.Unlock()
	s.errMu.Lock()
	le, lt := s.lastErr, s.lastErrAt
	s.errMu.Unlock()
	return sinks.Stats{
		Name: s.name, Queued: int64(q), SpooledItems: s.sp.points.Load(), SpooledBytes: s.sp.bytes.Load(),
		Written: s.written.Load(), Dropped: s.dropped.Load() + s.sp.dropped.Load(), Rejected: s.rejected.Load(),
		LastError: le, LastErrorTime: lt,
	}
}

// SpoolHealth reports spool damage found since the sink opened: torn last
// lines cut off (a crash during an append) and unparsable lines skipped.
func (s *Sink) SpoolHealth() (tornLines, corruptLines uint64) {
	return s.sp.torn.Load(), s.sp.corrupt.Load()
}
