// Package pipeline wires the ingest parts for the daemon: NATS and OPC UA
// sources -> bounded queue -> align engine (tag map, quality checks,
// windows) -> snapshots every tick. It is the one entry point the daemon
// needs; the parts stay usable on their own.
package pipeline

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/natsrc"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"github.com/prometheus/client_golang/prometheus"
)

// Config is the ingest section of the configuration.
type Config struct {
	NATS  []natsrc.Config   `yaml:"nats"`
	OPCUA []opcuasrc.Config `yaml:"opcua"`
	Tags  tagmap.Config     `yaml:"tag_map"`
	Align align.Config      `yaml:"align"`
	// Tick is the evaluation interval (default 10 s).
	Tick time.Duration `yaml:"tick"`
	// QueueBatches bounds the queue in front of the engine (default 1024
	// batches of up to natsrc batch_samples samples).
	QueueBatches int `yaml:"queue_batches"`
}

// ErrConfig wraps invalid settings.
var ErrConfig = errors.New("invalid ingest settings")

// Pipeline is a wired ingest path.
type Pipeline struct {
	Engine  *align.Engine
	Queue   *ingest.Queue
	Metrics *ingest.Metrics
	NATS    []*natsrc.Source
	OPCUA   []*opcuasrc.Source
	tick    time.Duration
	log     *slog.Logger
}

// New checks cfg and builds the pipeline. reg may be nil (no Prometheus
// registration); log may be nil.
func New(cfg Config, reg *prometheus.Registry, log *slog.Logger) (*Pipeline, error) {
	if log == nil {
		log = slog.Default()
	}
	if cfg.Tick == 0 {
		cfg.Tick = 10 * time.Second
	}
	if cfg.Tick < 0 {
		return nil, fmt.Errorf("%w: negative tick", ErrConfig)
	}
	if cfg.QueueBatches == 0 {
		cfg.QueueBatches = 1024
	}
	if len(cfg.NATS)+len(cfg.OPCUA) == 0 {
		return nil, fmt.Errorf("%w: no source (nats or opcua)", ErrConfig)
	}
	m, err := tagmap.Compile(cfg.Tags)
	if err != nil {
		return nil, err
	}
	met := &ingest.Metrics{}
	if reg != nil {
		if err := met.Register(reg); err != nil {
			return nil, fmt.Errorf("metrics: %w", err)
		}
	}
	eng, err := align.New(cfg.Align, m, met, log.With("part", "align"))
	if err != nil {
		return nil, err
	}
	p := &Pipeline{Engine: eng, Queue: ingest.NewQueue(cfg.QueueBatches, met), Metrics: met, tick: cfg.Tick, log: log}
	for i, nc := range cfg.NATS {
		if err := CheckAckWait(nc, cfg.Tick); err != nil {
			return nil, fmt.Errorf("nats[%d]: %w", i, err)
		}
		s, err := natsrc.New(nc, p.Queue, met, log, nil)
		if err != nil {
			return nil, fmt.Errorf("nats[%d]: %w", i, err)
		}
		p.NATS = append(p.NATS, s)
	}
	for i, oc := range cfg.OPCUA {
		s, err := opcuasrc.New(oc, p.Queue, met, log, nil)
		if err != nil {
			return nil, fmt.Errorf("opcua[%d]: %w", i, err)
		}
		p.OPCUA = append(p.OPCUA, s)
	}
	return p, nil
}

// CheckAckWait checks that a JetStream source's ack_wait leaves room for
// the acknowledgement: a message is acknowledged after the first tick that
// holds it plus the ack flush, so ack_wait must exceed 2 x tick + ack_flush
// (else the server redelivers messages that are being evaluated).
func CheckAckWait(nc natsrc.Config, tick time.Duration) error {
	if nc.Mode != natsrc.ModeJetStream {
		return nil
	}
	aw, fl := nc.AckWait, nc.AckFlush
	if aw == 0 {
		aw = 2 * time.Minute
	}
	if fl == 0 {
		fl = 100 * time.Millisecond
	}
	if aw <= 2*tick+fl {
		return fmt.Errorf("%w: ack_wait %v must exceed 2 x evaluation interval %v + ack_flush %v", ErrConfig, aw, tick, fl)
	}
	return nil
}

// Run runs every source and the engine until ctx ends, sending each tick's
// snapshots to out. The receiver must call Release on every snapshot after
// evaluating it (that acknowledges JetStream messages). Run returns the
// first error a source cannot recover from, or nil when ctx ends.
func (p *Pipeline) Run(ctx context.Context, out chan<- []*align.Snapshot) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var wg sync.WaitGroup
	errc := make(chan error, len(p.NATS)+len(p.OPCUA)+1)
	start := func(name string, run func(context.Context) error) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			if err := run(ctx); err != nil && ctx.Err() == nil {
				errc <- fmt.Errorf("%s: %w", name, err)
				cancel()
			}
		}()
	}
	for i, s := range p.NATS {
		start(fmt.Sprintf("nats[%d]", i), s.Run)
	}
	for i, s := range p.OPCUA {
		start(fmt.Sprintf("opcua[%d]", i), s.Run)
	}
	ticker := time.NewTicker(p.tick)
	defer ticker.Stop()
	start("engine", func(ctx context.Context) error {
		err := p.Engine.Run(ctx, p.Queue, ticker.C, nil, out)
		if errors.Is(err, context.Canceled) {
			return nil
		}
		return err
	})
	wg.Wait()
	select {
	case err := <-errc:
		return err
	default:
		return nil
	}
}
