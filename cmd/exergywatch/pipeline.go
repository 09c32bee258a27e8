package main

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"path/filepath"
	"runtime"
	"sort"
	"sync"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/natsrc"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"github.com/exergywatch/exergywatch/sinks"
	"github.com/exergywatch/exergywatch/sinks/influx"
	"github.com/exergywatch/exergywatch/sinks/natsout"
	"github.com/exergywatch/exergywatch/sinks/store"
)

// Sink is what the pipeline writes to (the contract is documented on
// sinks.Sink, which every sink package asserts at compile time).
type Sink interface {
	WriteRecord(ctx context.Context, r compute.Record) error
	WriteEvent(ctx context.Context, e compute.Event) error
	Close(ctx context.Context) error
}

var _ Sink = (*sinks.Multi)(nil)

// source is a running input.
type source interface {
	Run(ctx context.Context) error
}

// pipelineOptions are set by the command that builds the pipeline.
type pipelineOptions struct {
	log   *slog.Logger
	clock ingest.Clock
	// onRecord and onEvent, when set, see every record and event (demo
	// console, tests).
	onRecord func(compute.Record)
	onEvent  func(compute.Event)
	// stateFlush is how often evaluator state is persisted (default 10 s).
	stateFlush time.Duration
}

// pipeline is one configuration running: sources -> alignment ->
// evaluators -> sinks. Every goroutine it starts is owned by run and
// stopped when run's context ends.
type pipeline struct {
	cfg     *config.Config
	opt     pipelineOptions
	log     *slog.Logger
	reg     *prometheus.Registry
	metrics *ingest.Metrics
	queue   *ingest.Queue
	engine  *align.Engine
	sources []namedSource
	evals   map[string]*evaluator
	order   []string
	multi   *sinks.Multi
	state   *store.Store
	history *store.Store // the store sink, when configured (status history)

	// locks holds one mutex per evaluator (by machine ID), held while the
	// evaluator evaluates and while the status API or the state saver reads
	// it: machines evaluate concurrently, each in tick order.
	locks map[string]*sync.Mutex
	// quietAlerts logs alert transitions at debug level (replay: a year of
	// history would flood the log; the summary counts them).
	quietAlerts bool
	evaluated   atomic.Uint64
	events      atomic.Uint64
	lastTick    atomic.Int64
	sinkErrors  atomic.Uint64
	ready       atomic.Bool
}

type namedSource struct {
	name string
	src  source
}

// buildPipeline constructs everything a configuration needs without
// starting any goroutine; on error nothing is left open.
func buildPipeline(cfg *config.Config, opt pipelineOptions) (p *pipeline, err error) {
	if opt.log == nil {
		opt.log = slog.Default()
	}
	if opt.clock == nil {
		opt.clock = ingest.SystemClock{}
	}
	if opt.stateFlush == 0 {
		opt.stateFlush = 10 * time.Second
	}
	p = &pipeline{cfg: cfg, opt: opt, log: opt.log, reg: prometheus.NewRegistry(), metrics: &ingest.Metrics{}, evals: map[string]*evaluator{},
		locks: map[string]*sync.Mutex{}}
	var closers []func()
	defer func() {
		if err != nil {
			for i := len(closers) - 1; i >= 0; i-- {
				closers[i]()
			}
		}
	}()
	if err := cfg.ResolveSecrets(); err != nil {
		return nil, err
	}
	mapper, err := tagmap.Compile(cfg.TagMap)
	if err != nil {
		return nil, err
	}
	p.engine, err = align.New(cfg.Alignment, mapper, p.metrics, opt.log.With("component", "align"))
	if err != nil {
		return nil, err
	}
	p.queue = ingest.NewQueue(4096, p.metrics)
	for _, s := range cfg.Sources {
		lg := opt.log.With("component", "source", "source", s.Name)
		var src source
		switch s.Kind {
		case "nats":
			src, err = natsrc.New(*s.NATS, p.queue, p.metrics, lg, opt.clock)
		case "opcua":
			src, err = opcuasrc.New(*s.OPCUA, p.queue, p.metrics, lg, opt.clock)
		default:
			err = fmt.Errorf("unknown source kind %q", s.Kind)
		}
		if err != nil {
			return nil, fmt.Errorf("source %s: %w", s.Name, err)
		}
		p.sources = append(p.sources, namedSource{s.Name, src})
	}
	keys := cfg.Keys()
	for i := range cfg.Machines {
		m := &cfg.Machines[i]
		e, err := newEvaluator(cfg, m, keys[m.ID])
		if err != nil {
			return nil, err
		}
		p.evals[m.ID] = e
		p.locks[m.ID] = new(sync.Mutex)
		p.order = append(p.order, m.ID)
	}
	sort.Strings(p.order)

	statePath, _ := filepath.Abs(cfg.State.Path)
	var named []sinks.Named
	for _, s := range cfg.Sinks {
		lg := opt.log.With("component", "sink", "sink", s.Name)
		var sk sinks.Sink
		switch s.Kind {
		case "influxdb":
			var is *influx.Sink
			is, err = influx.New(s.Name, *s.InfluxDB, lg)
			sk = is
		case "nats":
			var ns *natsout.Sink
			ns, err = natsout.New(s.Name, *s.NATS, lg)
			sk = ns
		case "store":
			if path, _ := filepath.Abs(s.Store.Path); path == statePath {
				err = fmt.Errorf("sink %s uses the state file %s; give the store sink its own path", s.Name, s.Store.Path)
				break
			}
			var st *store.Store
			st, err = store.Open(s.Name, *s.Store, lg)
			if err == nil {
				p.history = st
			}
			sk = st
		default:
			err = fmt.Errorf("unknown sink kind %q", s.Kind)
		}
		if err != nil {
			return nil, fmt.Errorf("sink %s: %w", s.Name, err)
		}
		closeSink := sk
		closers = append(closers, func() {
			ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
			defer cancel()
			_ = closeSink.Close(ctx)
		})
		named = append(named, sinks.Named{Name: s.Name, Sink: sk, QueueLen: s.QueueLen})
	}
	p.multi, err = sinks.NewMulti(cfg.Fanout, opt.log.With("component", "fanout"), named...)
	if err != nil {
		return nil, err
	}
	closers = append(closers, func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		_ = p.multi.Close(ctx)
	})
	p.state, err = store.Open("state", store.Config{Path: cfg.State.Path, Retention: 365 * 24 * time.Hour}, opt.log.With("component", "state"))
	if err != nil {
		return nil, fmt.Errorf("state file %s: %w", cfg.State.Path, err)
	}
	closers = append(closers, func() { _ = p.state.Close(context.Background()) })
	for id, e := range p.evals {
		b, ok, err := p.state.GetState("machine", id)
		if err != nil {
			return nil, fmt.Errorf("state of %s: %w", id, err)
		}
		if ok {
			if err := e.restoreState(b); err != nil {
				p.log.Warn("saved state not restored; starting fresh", "machine", id, "err", err)
			}
		}
	}
	if err := p.metrics.Register(p.reg); err != nil {
		return nil, err
	}
	if err := p.reg.Register(sinks.NewCollector(p.multi.Stats)); err != nil {
		return nil, err
	}
	var ua trustCollectors
	for _, s := range p.sources {
		if u, ok := s.src.(*opcuasrc.Source); ok {
			ua = append(ua, u.Collector())
		}
	}
	if len(ua) > 0 {
		if err := p.reg.Register(ua); err != nil {
			return nil, err
		}
	}
	p.registerMetrics()
	return p, nil
}

// trustCollectors gathers the server-certificate metrics of every OPC UA
// source (refusals, expiry, checks turned off) under one registration: the
// sources share metric descriptors and differ by their endpoint label.
type trustCollectors []prometheus.Collector

func (t trustCollectors) Describe(ch chan<- *prometheus.Desc) { t[0].Describe(ch) }

func (t trustCollectors) Collect(ch chan<- prometheus.Metric) {
	for _, c := range t {
		c.Collect(ch)
	}
}

func (p *pipeline) registerMetrics() {
	p.reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{Name: "exergywatch_compute_evaluations_total",
		Help: "Machine evaluations run."}, func() float64 { return float64(p.evaluated.Load()) }))
	p.reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{Name: "exergywatch_compute_alert_events_total",
		Help: "Alert transitions raised."}, func() float64 { return float64(p.events.Load()) }))
	p.reg.MustRegister(prometheus.NewGaugeFunc(prometheus.GaugeOpts{Name: "exergywatch_compute_last_tick_timestamp_seconds",
		Help: "Time of the last evaluation tick."}, func() float64 { return float64(p.lastTick.Load()) / 1e9 }))
	p.reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{Name: "exergywatch_sinks_write_errors_total",
		Help: "Records or events the fan-out could not queue for at least one sink."}, func() float64 { return float64(p.sinkErrors.Load()) }))
}

// run starts everything and blocks until ctx ends, then drains: sources
// stop, the last snapshots are evaluated, state is saved and the sinks are
// flushed and closed.
func (p *pipeline) run(ctx context.Context) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var wg sync.WaitGroup
	errc := make(chan error, len(p.sources)+2)
	for _, s := range p.sources {
		wg.Add(1)
		go func(s namedSource) {
			defer wg.Done()
			if err := s.src.Run(ctx); err != nil && !errors.Is(err, context.Canceled) {
				p.log.Error("source stopped", "source", s.name, "err", err)
				errc <- fmt.Errorf("source %s: %w", s.name, err)
			}
		}(s)
	}
	ticks := make(chan time.Time)
	snaps := make(chan []*align.Snapshot, 4)
	wg.Add(1)
	go func() { // ticker: one tick per evaluation interval, on interval boundaries
		defer wg.Done()
		defer close(ticks)
		iv := p.cfg.Evaluation.Interval.D()
		// Each tick is the previous one plus the interval, sent once the
		// clock has passed it: tick times are strictly increasing and on
		// boundaries even when a timer fires early or late.
		next := p.opt.clock.Now().Truncate(iv).Add(iv)
		timer := time.NewTimer(time.Until(next))
		defer timer.Stop()
		for {
			select {
			case <-ctx.Done():
				return
			case <-timer.C:
			}
			now := p.opt.clock.Now()
			if now.Before(next) {
				timer.Reset(next.Sub(now))
				continue
			}
			tick := next
			// After a stall (suspend, overload), skip missed ticks rather
			// than evaluate a burst of empty windows.
			for !next.After(now) {
				next = next.Add(iv)
			}
			select {
			case ticks <- tick:
			case <-ctx.Done():
				return
			}
			timer.Reset(time.Until(next))
		}
	}()
	wg.Add(1)
	go func() {
		defer wg.Done()
		defer close(snaps)
		if err := p.engine.Run(ctx, p.queue, ticks, p.opt.clock, snaps); err != nil && !errors.Is(err, context.Canceled) {
			errc <- fmt.Errorf("alignment: %w", err)
		}
	}()
	done := make(chan struct{})
	go func() { // evaluation loop: owned here, ends when snaps closes
		defer close(done)
		lastSave := time.Now()
		for batch := range snaps {
			p.evaluateBatch(ctx, batch)
			if time.Since(lastSave) >= p.opt.stateFlush {
				p.saveState()
				lastSave = time.Now()
			}
		}
	}()
	p.ready.Store(true)
	var runErr error
	select {
	case <-ctx.Done():
	case runErr = <-errc:
		cancel()
	}
	p.ready.Store(false)
	wg.Wait()
	<-done
	p.saveState()
	return errors.Join(runErr, p.close())
}

// evaluateBatch evaluates the snapshots of one tick and writes the results.
// Machines are independent: their snapshots are evaluated concurrently on up
// to GOMAXPROCS goroutines, each machine's snapshots in batch order by one
// goroutine. It returns when every snapshot has been handled.
func (p *pipeline) evaluateBatch(ctx context.Context, batch []*align.Snapshot) {
	workers := min(runtime.GOMAXPROCS(0), len(batch))
	if workers <= 1 {
		for _, s := range batch {
			p.evaluateOne(ctx, s)
		}
		return
	}
	// One job per machine (a tick normally has one snapshot per machine).
	var jobs [][]*align.Snapshot
	index := make(map[string]int, len(batch))
	for _, s := range batch {
		k, ok := index[s.Machine]
		if !ok {
			k = len(jobs)
			index[s.Machine] = k
			jobs = append(jobs, nil)
		}
		jobs[k] = append(jobs[k], s)
	}
	workers = min(workers, len(jobs))
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				k := int(next.Add(1) - 1)
				if k >= len(jobs) {
					return
				}
				for _, s := range jobs[k] {
					p.evaluateOne(ctx, s)
				}
			}
		}()
	}
	wg.Wait()
}

// evalOutcome is what evaluateOne did, for the callers' counters.
type evalOutcome struct {
	evaluated   bool // false: no evaluator for the snapshot's machine
	quality     compute.Quality
	transitions int // alert transitions raised
	firing      int // of which to firing
	sinkDrops   int // records or events the fan-out could not queue
}

// evaluateOne evaluates one snapshot under its evaluator's lock and writes
// the daily records it completed, the record and its alert events to the
// sinks (and the events to the state store), then releases the snapshot.
// Safe for concurrent use with snapshots of different machines; the
// snapshots of one machine must come in tick order.
func (p *pipeline) evaluateOne(ctx context.Context, s *align.Snapshot) evalOutcome {
	var out evalOutcome
	e, ok := p.evals[s.Machine]
	mu := p.locks[s.Machine]
	if !ok || mu == nil {
		s.Release()
		return out
	}
	mu.Lock()
	rec, events := e.evaluate(s)
	daily := e.takeDaily()
	mu.Unlock()
	out.evaluated, out.quality = true, rec.Quality
	wctx := context.WithoutCancel(ctx)
	for _, d := range daily {
		if err := p.multi.WriteRecord(wctx, d); err != nil {
			p.sinkErrors.Add(1)
			out.sinkDrops++
		}
	}
	p.evaluated.Add(1)
	for at := s.At.UnixNano(); ; { // the newest tick evaluated
		last := p.lastTick.Load()
		if at <= last || p.lastTick.CompareAndSwap(last, at) {
			break
		}
	}
	if err := p.multi.WriteRecord(wctx, rec); err != nil {
		p.sinkErrors.Add(1)
		out.sinkDrops++
	}
	for _, ev := range events {
		p.events.Add(1)
		out.transitions++
		lvl := slog.LevelInfo
		if ev.To == compute.AlertFiring {
			lvl = slog.LevelWarn
			out.firing++
		}
		if p.quietAlerts {
			lvl = slog.LevelDebug
		}
		p.log.Log(ctx, lvl, "alert "+ev.To.String(), "machine", ev.Machine, "rule", ev.Rule, "class", string(ev.Class),
			"figure", ev.Figure, "value", ev.Value, "limit", ev.Limit, "reason", ev.Reason)
		if err := p.multi.WriteEvent(wctx, ev); err != nil {
			p.sinkErrors.Add(1)
			out.sinkDrops++
		}
		if err := p.state.WriteEvent(wctx, ev); err != nil {
			p.log.Warn("alert event not stored", "err", err)
		}
		if p.opt.onEvent != nil {
			p.opt.onEvent(ev)
		}
	}
	if p.opt.onRecord != nil {
		p.opt.onRecord(rec)
	}
	// The record and its events are in the sinks' queues (or counted as
	// dropped): the samples behind it may now be acknowledged.
	s.Release()
	return out
}

// lockedEval runs f on the evaluator of machine id under its lock.
func (p *pipeline) lockedEval(id string, f func(e *evaluator)) {
	e, ok := p.evals[id]
	if !ok {
		return
	}
	if mu := p.locks[id]; mu != nil {
		mu.Lock()
		defer mu.Unlock()
	}
	f(e)
}

func (p *pipeline) saveState() {
	for _, id := range p.order {
		var b []byte
		var err error
		p.lockedEval(id, func(e *evaluator) { b, err = e.marshalState() })
		if err == nil {
			err = p.state.PutState("machine", id, b)
		}
		if err != nil {
			p.log.Warn("state not saved", "machine", id, "err", err)
		}
	}
}

func (p *pipeline) close() error {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	err := p.multi.Close(ctx)
	if e := p.state.Close(ctx); e != nil {
		err = errors.Join(err, e)
	}
	return err
}
