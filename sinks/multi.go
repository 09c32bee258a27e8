package sinks

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/exergywatch/exergywatch/compute"
)

// MultiConfig configures the fan-out.
type MultiConfig struct {
	// QueueLen is the bound of each sink's in-memory queue (items). When a
	// sink's queue is full, new items for that sink are dropped and counted;
	// the other sinks still get them. Default 4096.
	QueueLen int `yaml:"queue_len"`
	// WriteTimeout bounds one write to a child sink (a duration such as
	// 30s). Default 30 s.
	WriteTimeout time.Duration `yaml:"write_timeout"`
}

// Defaults fills zero fields with defaults.
func (c *MultiConfig) Defaults() {
	if c.QueueLen == 0 {
		c.QueueLen = 4096
	}
	if c.WriteTimeout == 0 {
		c.WriteTimeout = 30 * time.Second
	}
}

// Validate checks the fan-out settings.
func (c MultiConfig) Validate() error {
	if c.QueueLen < 1 || c.QueueLen > 1<<22 {
		return fmt.Errorf("sinks: queue_len %d out of range: set it between 1 and 4194304", c.QueueLen)
	}
	if c.WriteTimeout < time.Millisecond {
		return fmt.Errorf("sinks: write_timeout %v must be at least 1ms", c.WriteTimeout)
	}
	return nil
}

// Named pairs a sink with the name it has in configuration, logs and metrics.
type Named struct {
	Name     string
	Sink     Sink
	QueueLen int // bound of this sink's queue (items); 0 means MultiConfig.QueueLen
}

// DropError reports the sinks that dropped an item because their queue was
// full. It wraps ErrQueueFull.
type DropError struct {
	Sinks []string // names of the sinks that dropped the item
}

func (e *DropError) Error() string {
	return "sinks: queue full, item dropped for " + strings.Join(e.Sinks, ", ")
}

// Unwrap lets errors.Is(err, ErrQueueFull) match.
func (e *DropError) Unwrap() error { return ErrQueueFull }

type item struct {
	rec   *compute.Record
	event *compute.Event
}

type child struct {
	name    string
	sink    Sink
	q       chan item
	done    chan struct{}
	dropped atomic.Uint64
	written atomic.Uint64
	failed  atomic.Uint64

	mu        sync.Mutex
	lastErr   string
	lastErrAt time.Time
}

func (c *child) setErr(err error) {
	c.mu.Lock()
	c.lastErr, c.lastErrAt = err.Error(), time.Now().UTC()
	c.mu.Unlock()
}

// Multi writes every item to several sinks. Each child sink has its own
// bounded queue and its own goroutine, owned by Multi and stopped by Close,
// so a slow or broken sink only fills its own queue. WriteRecord and
// WriteEvent never block: an item that does not fit a child's queue is
// dropped for that child only, counted, and reported by a *DropError.
type Multi struct {
	cfg      MultiConfig
	log      *slog.Logger
	children []*child

	runCtx context.Context
	cancel context.CancelFunc

	mu       sync.RWMutex // guards closed against sends on closed queues
	closed   bool
	once     sync.Once
	closeErr error
}

// NewMulti starts one worker goroutine per sink. Names must be unique and
// non-empty. logger may be nil (slog.Default is used).
func NewMulti(cfg MultiConfig, logger *slog.Logger, sinks ...Named) (*Multi, error) {
	cfg.Defaults()
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	if logger == nil {
		logger = slog.Default()
	}
	seen := map[string]bool{}
	for _, n := range sinks {
		if n.Name == "" || n.Sink == nil {
			return nil, fmt.Errorf("sinks: every sink needs a name and a value (got name %q)", n.Name)
		}
		if n.QueueLen < 0 || n.QueueLen > 1<<22 {
			return nil, fmt.Errorf("sinks: sink %s: queue length %d out of range 0..4194304", n.Name, n.QueueLen)
		}
		if seen[n.Name] {
			return nil, fmt.Errorf("sinks: sink name %q used twice: give each sink its own name", n.Name)
		}
		seen[n.Name] = true
	}
	ctx, cancel := context.WithCancel(context.Background())
	m := &Multi{cfg: cfg, log: logger, runCtx: ctx, cancel: cancel}
	for _, n := range sinks {
		ql := cfg.QueueLen
		if n.QueueLen > 0 {
			ql = n.QueueLen
		}
		c := &child{name: n.Name, sink: n.Sink, q: make(chan item, ql), done: make(chan struct{})}
		m.children = append(m.children, c)
		go m.work(c)
	}
	return m, nil
}

func (m *Multi) work(c *child) {
	defer close(c.done)
	timeout := m.cfg.WriteTimeout
	for it := range c.q {
		if m.runCtx.Err() != nil {
			// Close gave up waiting: what is left is lost, and counted.
			c.dropped.Add(1)
			continue
		}
		ctx, cancel := context.WithTimeout(m.runCtx, timeout)
		var err error
		if it.rec != nil {
			err = c.sink.WriteRecord(ctx, *it.rec)
		} else {
			err = c.sink.WriteEvent(ctx, *it.event)
		}
		cancel()
		if err != nil {
			// The child counted the item in its own stats (it must not
			// drop silently); Multi keeps a failure count and the error.
			c.failed.Add(1)
			c.setErr(err)
			m.log.Warn("sink write failed", "sink", c.name, "err", err)
			continue
		}
		c.written.Add(1)
	}
}

func (m *Multi) put(it item) error {
	m.mu.RLock()
	defer m.mu.RUnlock()
	if m.closed {
		return ErrClosed
	}
	var dropped []string
	for _, c := range m.children {
		select {
		case c.q <- it:
		default:
			n := c.dropped.Add(1)
			dropped = append(dropped, c.name)
			if n == 1 || n%1000 == 0 {
				m.log.Warn("sink queue full, item dropped", "sink", c.name, "dropped_total", n)
			}
			c.setErr(fmt.Errorf("queue full (%d items), item dropped", cap(c.q)))
		}
	}
	if dropped != nil {
		return &DropError{Sinks: dropped}
	}
	return nil
}

// WriteRecord queues the record for every child sink without blocking. The
// record is copied; the caller may reuse it.
func (m *Multi) WriteRecord(ctx context.Context, r compute.Record) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	rc := r
	rc.Reasons = append([]string(nil), r.Reasons...)
	rc.Figures = append([]compute.Figure(nil), r.Figures...)
	for i := range rc.Figures {
		rc.Figures[i].Reasons = append([]string(nil), rc.Figures[i].Reasons...)
	}
	return m.put(item{rec: &rc})
}

// WriteEvent queues the event for every child sink without blocking.
func (m *Multi) WriteEvent(ctx context.Context, e compute.Event) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	ec := e
	return m.put(item{event: &ec})
}

// Close stops accepting items, lets every worker drain its queue until ctx
// ends (items still queued then are dropped and counted), and closes every
// child sink with ctx. It is idempotent.
func (m *Multi) Close(ctx context.Context) error {
	m.once.Do(func() {
		m.mu.Lock()
		m.closed = true
		for _, c := range m.children {
			close(c.q)
		}
		m.mu.Unlock()
		for _, c := range m.children {
			select {
			case <-c.done:
			case <-ctx.Done():
				m.cancel()
				<-c.done
			}
		}
		m.cancel()
		var errs []error
		for _, c := range m.children {
			if err := c.sink.Close(ctx); err != nil {
				errs = append(errs, fmt.Errorf("close sink %s: %w", c.name, err))
			}
		}
		if ctx.Err() != nil {
			errs = append(errs, fmt.Errorf("sinks: close did not finish draining: %w", ctx.Err()))
		}
		m.closeErr = errors.Join(errs...)
	})
	return m.closeErr
}

// Stats returns one entry per child sink, in construction order. When a child
// implements Reporter its own view is the base; Multi adds its queue depth to
// Queued and its queue-full drops to Dropped, and reports its last error when
// the child has none newer.
func (m *Multi) Stats() []Stats {
	out := make([]Stats, 0, len(m.children))
	for _, c := range m.children {
		var s Stats
		if r, ok := c.sink.(Reporter); ok {
			s = r.Stats()
		} else {
			s.Written = c.written.Load()
		}
		s.Name = c.name
		s.Queued += int64(len(c.q))
		s.Dropped += c.dropped.Load()
		c.mu.Lock()
		if c.lastErrAt.After(s.LastErrorTime) {
			s.LastError, s.LastErrorTime = c.lastErr, c.lastErrAt
		}
		c.mu.Unlock()
		out = append(out, s)
	}
	return out
}
