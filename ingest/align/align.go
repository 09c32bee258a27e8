// Package align builds, per machine and evaluation tick, a snapshot of
// time-weighted averages of the machine's inputs in SI, from the samples
// that passed the tag map and the quality checks. It is the hand-over point
// from ingest to compute.
//
// Time-weighted average with zero-order hold: each usable sample holds its
// value until the next sample of the tag (or at most the tag's staleness
// limit), so report-by-exception data is weighted by how long each value
// held, not by sample count. Unusable samples (bad status, out of range,
// spike, rate of change) open a gap until the next sample.
package align

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"sort"
	"sync"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/quality"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
)

// Config sets the window and the time rules.
type Config struct {
	// Window is the averaging window ending at each tick (default 60 s).
	Window time.Duration `yaml:"window"`
	// MaxSkew is the largest allowed spread of the newest sample times of
	// one machine's inputs; 0 switches the check off.
	MaxSkew time.Duration `yaml:"max_skew"`
	// LateHorizon: a sample older than now-LateHorizon on arrival is
	// counted (late) and dropped (default: Window).
	LateHorizon time.Duration `yaml:"late_horizon"`
	// MaxFuture: a source time later than now+MaxFuture is counted
	// (time_future) and dropped (default 5 s).
	MaxFuture time.Duration `yaml:"max_future"`
	// MinCoverage is the usable fraction of the window below which a value
	// is uncertain (low_coverage); default 0.5.
	MinCoverage float64 `yaml:"min_coverage"`
}

// ErrConfig wraps invalid settings.
var ErrConfig = errors.New("invalid alignment settings")

// Earliest is the oldest source time accepted (samples before it are
// counted as time_too_old): no plant data of this system predates 2000.
var Earliest = time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC)

func (c *Config) defaults() error {
	if c.Window == 0 {
		c.Window = 60 * time.Second
	}
	if c.LateHorizon == 0 {
		c.LateHorizon = c.Window
	}
	if c.MaxFuture == 0 {
		c.MaxFuture = 5 * time.Second
	}
	if c.MinCoverage == 0 {
		c.MinCoverage = 0.5
	}
	if c.Window < 0 || c.LateHorizon < 0 || c.MaxFuture < 0 || c.MaxSkew < 0 || c.MinCoverage < 0 || c.MinCoverage > 1 {
		return fmt.Errorf("%w: durations must be positive and min_coverage in 0..1", ErrConfig)
	}
	return nil
}

// Value is one machine input in a snapshot.
type Value struct {
	SI       float64        // time-weighted average in the SI unit Unit
	Unit     string         // SI unit: Pa, K, kg/s, W, fraction, rad/s, J/kg, J/kgK, kg/m3
	Quality  ingest.Quality // good, uncertain or bad (bad: do not use)
	Reasons  ingest.Reasons // every doubt seen in the window or at the tick
	From, To time.Time      // span covered by usable data inside the window
	Coverage float64        // usable fraction of the window, 0..1
	Samples  int            // usable samples inside the window
	Newest   time.Time      // newest sample time of the tag (any quality)
	Tag      string         // source tag used (for a redundancy group: the chosen member)
}

// Snapshot is the aligned input of one machine at one tick: what compute
// consumes. Call Release once the snapshot was evaluated; that acknowledges
// the JetStream messages whose samples entered the window since the
// previous snapshot of this machine.
type Snapshot struct {
	Machine string
	At      time.Time // tick time = window end
	From    time.Time // window start
	Values  map[tagmap.Key]Value
	Quality ingest.Quality // worst quality of the values
	Reasons ingest.Reasons // machine-level reasons (skew)
	Skew    time.Duration  // spread of the newest sample times of the inputs

	acks []ackRun
	once sync.Once
}

// ackRun is n references of one acknowledgement handle: consecutive
// samples of one message for one machine are held as one run, so a
// release costs one atomic operation per run instead of one per sample.
type ackRun struct {
	a *ingest.Ack
	n int
}

// Release acknowledges the samples this snapshot holds. Safe to call more
// than once and on nil.
func (s *Snapshot) Release() {
	if s == nil {
		return
	}
	s.once.Do(func() {
		for _, r := range s.acks {
			r.a.DoneN(r.n)
		}
		s.acks = nil
	})
}

// PendingAcks returns the number of sample acknowledgements held.
func (s *Snapshot) PendingAcks() int {
	n := 0
	for _, r := range s.acks {
		n += r.n
	}
	return n
}

type point struct {
	t   int64 // unix ns
	v   float64
	use bool
	rs  ingest.Reasons
}

// track is the per-signal state of the engine, in the order a sample
// uses it: one sample touches few cache lines of it.
type track struct {
	pts []point
	mc  *machine        // machine of the signal, nil for site tags
	chk quality.Checker // by value: one pointer less to follow per sample
}

type machine struct {
	name    string
	tracks  []int // ungrouped signal indices
	groups  []int
	pending []ackRun
	// keys are the value keys, tracks then groups; uniqueKeys: no two
	// alike (each value has its own map entry).
	keys       []tagmap.Key
	uniqueKeys bool
}

// Engine maps, checks and windows samples and builds snapshots. Its methods
// are safe for concurrent use.
type Engine struct {
	cfg      Config
	mapper   *tagmap.Mapper
	metrics  *ingest.Metrics
	log      *slog.Logger
	mu       sync.Mutex
	tracks   []track
	machines []*machine
	byName   map[string]*machine

	vals, members []Value // scratch of Evaluate (under mu)
	mapPath       bool    // tests: build every snapshot through its map
}

// New returns an engine. metrics and log may be nil.
func New(cfg Config, m *tagmap.Mapper, metrics *ingest.Metrics, log *slog.Logger) (*Engine, error) {
	if err := cfg.defaults(); err != nil {
		return nil, err
	}
	if m == nil {
		return nil, fmt.Errorf("%w: no tag map", ErrConfig)
	}
	if log == nil {
		log = slog.Default()
	}
	e := &Engine{cfg: cfg, mapper: m, metrics: metrics, log: log, byName: map[string]*machine{}}
	get := func(name string) *machine {
		mc, ok := e.byName[name]
		if !ok {
			mc = &machine{name: name}
			e.byName[name] = mc
			e.machines = append(e.machines, mc)
		}
		return mc
	}
	e.tracks = make([]track, len(m.Signals))
	for _, s := range m.Signals {
		e.tracks[s.Index].chk.Init(s.Params)
		if s.Machine != "" && s.Group < 0 {
			mc := get(s.Machine)
			mc.tracks = append(mc.tracks, s.Index)
		}
	}
	for gi, g := range m.Groups {
		if g.Machine != "" {
			mc := get(g.Machine)
			mc.groups = append(mc.groups, gi)
		}
	}
	sort.Slice(e.machines, func(i, j int) bool { return e.machines[i].name < e.machines[j].name })
	for _, mc := range e.machines {
		seen := map[tagmap.Key]bool{}
		mc.uniqueKeys = true
		for _, idx := range mc.tracks {
			mc.keys = append(mc.keys, m.Signals[idx].Key)
		}
		for _, gi := range mc.groups {
			mc.keys = append(mc.keys, m.Groups[gi].Key)
		}
		for _, k := range mc.keys {
			if seen[k] {
				mc.uniqueKeys = false
			}
			seen[k] = true
		}
	}
	for _, s := range m.Signals {
		if s.Machine != "" {
			e.tracks[s.Index].mc = e.byName[s.Machine]
		}
	}
	return e, nil
}

// Machines returns the machine names in sorted order.
func (e *Engine) Machines() []string {
	out := make([]string, len(e.machines))
	for i, m := range e.machines {
		out[i] = m.name
	}
	return out
}

func (e *Engine) drop(s *ingest.Sample, r ingest.Reason) {
	e.metrics.Count(r, 1)
	s.Ack.Done()
}

// Ingest takes a batch of samples at time now. Every sample is either
// taken into its machine window (its Ack then travels with the next
// snapshot of the machine) or dropped with a counted reason (its Ack is
// released at once, since redelivery would not change the verdict).
func (e *Engine) Ingest(batch []ingest.Sample, now time.Time) {
	e.mu.Lock()
	defer e.mu.Unlock()
	if e.metrics != nil {
		e.metrics.Received.Add(uint64(len(batch)))
	}
	lateNs := now.Add(-e.cfg.LateHorizon).UnixNano()
	future := now.Add(e.cfg.MaxFuture)
	var accepted uint64
	for i := range batch {
		s := &batch[i]
		if math.IsNaN(s.Value) || math.IsInf(s.Value, 0) {
			e.drop(s, ingest.ReasonNonFinite)
			continue
		}
		st := s.Time()
		if st.Before(Earliest) {
			e.drop(s, ingest.ReasonTimeTooOld)
			continue
		}
		if st.After(future) {
			e.drop(s, ingest.ReasonTimeFuture)
			continue
		}
		t := st.UnixNano()
		idx, si, r := e.mapper.MapIndex(s)
		if r != ingest.ReasonNone {
			e.drop(s, r)
			continue
		}
		if math.IsNaN(si) || math.IsInf(si, 0) {
			e.drop(s, ingest.ReasonNonFinite)
			continue
		}
		if t < lateNs {
			e.drop(s, ingest.ReasonLate)
			continue
		}
		tr := &e.tracks[idx]
		n := len(tr.pts)
		inOrder := n == 0 || t > tr.pts[n-1].t
		pos := n
		if !inOrder {
			pos = sort.Search(n, func(k int) bool { return tr.pts[k].t >= t })
			if pos < n && tr.pts[pos].t == t {
				if tr.pts[pos].v == si {
					e.drop(s, ingest.ReasonDuplicate)
					continue
				}
				// Same time, new value: a correction replaces the point.
				use, rs := tr.chk.CheckNs(t, si, s.Quality, false)
				tr.pts[pos] = point{t: t, v: si, use: use, rs: rs}
				e.countReasons(rs)
				keep(tr.mc, s)
				accepted++
				continue
			}
			e.metrics.Count(ingest.ReasonOutOfOrder, 1)
		}
		use, rs := tr.chk.CheckNs(t, si, s.Quality, inOrder)
		if s.HasStatus && s.StatusCode == StatusBadNoCommunication {
			rs = rs.Add(ingest.ReasonGap)
		}
		if !inOrder {
			rs = rs.Add(ingest.ReasonOutOfOrder)
		}
		e.countReasons(rs &^ (1 << ingest.ReasonOutOfOrder))
		p := point{t: t, v: si, use: use, rs: rs}
		if inOrder {
			tr.pts = append(tr.pts, p)
		} else {
			tr.pts = append(tr.pts, point{})
			copy(tr.pts[pos+1:], tr.pts[pos:])
			tr.pts[pos] = p
		}
		keep(tr.mc, s)
		accepted++
	}
	if e.metrics != nil {
		e.metrics.Accepted.Add(accepted)
	}
}

// keep holds the acknowledgement of a sample taken into a window of mc
// (nil: a site tag, acknowledged at once).
func keep(mc *machine, s *ingest.Sample) {
	if s.Ack == nil {
		return
	}
	if mc == nil {
		s.Ack.Done()
		return
	}
	if k := len(mc.pending); k > 0 && mc.pending[k-1].a == s.Ack {
		mc.pending[k-1].n++
		return
	}
	mc.pending = append(mc.pending, ackRun{a: s.Ack, n: 1})
}

func (e *Engine) countReasons(rs ingest.Reasons) {
	if rs == 0 || e.metrics == nil {
		return
	}
	for r := ingest.Reason(1); int(r) < ingest.NumReasons; r++ {
		if rs.Has(r) {
			e.metrics.Count(r, 1)
		}
	}
}

// Evaluate builds one snapshot per machine for the window ending at now and
// forgets samples no later window can need.
func (e *Engine) Evaluate(now time.Time) []*Snapshot {
	e.mu.Lock()
	defer e.mu.Unlock()
	start := now.Add(-e.cfg.Window)
	// Keep what the next windows and late inserts can still use.
	keepFrom := start
	if h := now.Add(-e.cfg.LateHorizon); h.Before(keepFrom) {
		keepFrom = h
	}
	out := make([]*Snapshot, 0, len(e.machines))
	for _, mc := range e.machines {
		var snap *Snapshot
		if mc.uniqueKeys && !e.mapPath {
			snap = e.snapshot(mc, start, now)
		} else {
			snap = e.snapshotMap(mc, start, now)
		}
		snap.acks, mc.pending = mc.pending, nil
		out = append(out, snap)
	}
	for i := range e.tracks {
		prune(&e.tracks[i], keepFrom.UnixNano())
	}
	if e.metrics != nil {
		e.metrics.Snapshots.Add(uint64(len(out)))
	}
	return out
}

// snapshot builds the snapshot of a machine whose values all have
// different keys: the values are computed, checked for skew and judged in
// a reused slice, and the map is filled once at its final size.
// snapshotMap is the general form (and the reference of the tests).
func (e *Engine) snapshot(mc *machine, start, now time.Time) *Snapshot {
	snap := &Snapshot{Machine: mc.name, At: now, From: start}
	vals := e.vals[:0]
	for _, idx := range mc.tracks {
		vals = append(vals, e.value(idx, start, now))
	}
	for _, gi := range mc.groups {
		g := e.mapper.Groups[gi]
		members := e.members[:0]
		for _, idx := range g.Members {
			members = append(members, e.value(idx, start, now))
		}
		e.members = members
		vals = append(vals, combine(g, members))
	}
	e.vals = vals
	var lo, hi int64
	n := 0
	for i := range vals {
		if vals[i].Newest.IsZero() {
			continue
		}
		t := vals[i].Newest.UnixNano()
		if n == 0 || t < lo {
			lo = t
		}
		if n == 0 || t > hi {
			hi = t
		}
		n++
	}
	if n >= 2 {
		snap.Skew = time.Duration(hi - lo)
		if e.cfg.MaxSkew > 0 && snap.Skew > e.cfg.MaxSkew {
			snap.Reasons = snap.Reasons.Add(ingest.ReasonSkew)
			e.metrics.Count(ingest.ReasonSkew, 1)
			for i := range vals {
				v := &vals[i]
				if !v.Newest.IsZero() && time.Duration(hi-v.Newest.UnixNano()) > e.cfg.MaxSkew {
					v.Reasons = v.Reasons.Add(ingest.ReasonSkew)
					v.Quality = ingest.Worse(v.Quality, judge(v.Reasons))
				}
			}
		}
	}
	snap.Values = make(map[tagmap.Key]Value, len(vals))
	for i := range vals {
		v := &vals[i]
		snap.Quality = ingest.Worse(snap.Quality, v.Quality)
		e.countReasons(v.Reasons & evalReasons)
		snap.Values[mc.keys[i]] = *v
		*v = Value{}
	}
	return snap
}

// snapshotMap builds a snapshot through its map (values of the same key:
// the last one wins).
func (e *Engine) snapshotMap(mc *machine, start, now time.Time) *Snapshot {
	snap := &Snapshot{Machine: mc.name, At: now, From: start, Values: map[tagmap.Key]Value{}}
	for _, idx := range mc.tracks {
		v := e.value(idx, start, now)
		snap.Values[e.mapper.Signals[idx].Key] = v
	}
	for _, gi := range mc.groups {
		g := e.mapper.Groups[gi]
		vals := make([]Value, len(g.Members))
		for j, idx := range g.Members {
			vals[j] = e.value(idx, start, now)
		}
		snap.Values[g.Key] = combine(g, vals)
	}
	e.skew(snap)
	for _, v := range snap.Values {
		snap.Quality = ingest.Worse(snap.Quality, v.Quality)
		e.countReasons(v.Reasons & evalReasons)
	}
	return snap
}

// prune removes points before from, keeping the newest of them (it holds
// into the window).
func prune(tr *track, from int64) {
	k := sort.Search(len(tr.pts), func(i int) bool { return tr.pts[i].t >= from })
	if k <= 1 {
		return
	}
	n := copy(tr.pts, tr.pts[k-1:])
	tr.pts = tr.pts[:n]
}

// evalReasons are found at evaluation; counted once per value and tick.
var evalReasons = ingest.Reasons(0).Add(ingest.ReasonStale).Add(ingest.ReasonLowCoverage).Add(ingest.ReasonNoData).
	Add(ingest.ReasonSubstituted).Add(ingest.ReasonDivergence)

// StatusBadNoCommunication is the OPC UA StatusCode (Part 4, 7.39 /
// Part 6 StatusCode table: 0x80310000) that the OPC UA source puts on its
// gap-marker samples when a session is lost; the engine flags such points
// with ReasonGap.
const StatusBadNoCommunication = 0x80310000

// doubtful reasons make a value uncertain.
var doubtful = ingest.Reasons(0).Add(ingest.ReasonStatusUncertain).Add(ingest.ReasonStuck).Add(ingest.ReasonLowCoverage).
	Add(ingest.ReasonDivergence).Add(ingest.ReasonSubstituted).Add(ingest.ReasonSkew).Add(ingest.ReasonGap)

func (e *Engine) value(idx int, start, end time.Time) Value {
	tr := &e.tracks[idx]
	sig := e.mapper.Signals[idx]
	v := Value{Unit: sig.Quantity.Kind.SIUnit(), Tag: sig.Tag}
	s, en := start.UnixNano(), end.UnixNano()
	hold := int64(math.MaxInt64)
	if sig.Params.StaleAfter > 0 {
		hold = int64(sig.Params.StaleAfter)
	}
	var sum, covered float64
	var from, to int64 = math.MaxInt64, math.MinInt64
	// Start at the newest point before the window (it holds into it).
	first := sort.Search(len(tr.pts), func(i int) bool { return tr.pts[i].t >= s })
	if first > 0 {
		first--
	}
	for i := first; i < len(tr.pts); i++ {
		p := tr.pts[i]
		if p.t > en {
			break
		}
		if p.t >= s {
			v.Reasons |= p.rs &^ (1 << ingest.ReasonOutOfOrder)
			if p.use {
				v.Samples++
			}
		}
		if !p.use {
			continue
		}
		a, b := p.t, en
		if i+1 < len(tr.pts) && tr.pts[i+1].t < b {
			b = tr.pts[i+1].t
		}
		if hold != math.MaxInt64 && p.t+hold < b {
			b = p.t + hold
		}
		if a < s {
			a = s
		}
		if b <= a {
			continue
		}
		d := float64(b - a)
		sum += p.v * d
		covered += d
		from, to = min(from, a), max(to, b)
	}
	if n := len(tr.pts); n > 0 {
		v.Newest = time.Unix(0, tr.pts[n-1].t).UTC()
	}
	v.Reasons |= tr.chk.AtEvaluation(end)
	win := float64(en - s)
	if covered == 0 || win <= 0 {
		v.Reasons = v.Reasons.Add(ingest.ReasonNoData)
		v.Quality = ingest.Bad
		v.SI = math.NaN()
		return v
	}
	v.SI = sum / covered
	v.Coverage = covered / win
	v.From, v.To = time.Unix(0, from).UTC(), time.Unix(0, to).UTC()
	if v.Coverage < e.cfg.MinCoverage {
		v.Reasons = v.Reasons.Add(ingest.ReasonLowCoverage)
	}
	v.Quality = judge(v.Reasons)
	return v
}

func judge(rs ingest.Reasons) ingest.Quality {
	switch {
	case rs.Has(ingest.ReasonStale) || rs.Has(ingest.ReasonNoData):
		return ingest.Bad
	case rs&doubtful != 0:
		return ingest.Uncertain
	}
	return ingest.Good
}

// combine reduces a redundancy group to one value.
func combine(g *tagmap.Group, vals []Value) Value {
	var ok []int
	for i, v := range vals {
		if v.Quality != ingest.Bad {
			ok = append(ok, i)
		}
	}
	if len(ok) == 0 {
		out := vals[0]
		for _, v := range vals[1:] {
			out.Reasons |= v.Reasons
		}
		out.Quality = ingest.Bad
		return out
	}
	var out Value
	switch g.Mode {
	case tagmap.Preferred:
		out = vals[ok[0]]
		if ok[0] != 0 {
			out.Reasons = out.Reasons.Add(ingest.ReasonSubstituted)
		}
	case tagmap.AB, tagmap.Median3:
		switch len(ok) {
		case 1:
			out = vals[ok[0]]
			out.Reasons = out.Reasons.Add(ingest.ReasonSubstituted)
		case 2:
			a, b := vals[ok[0]], vals[ok[1]]
			out = a
			out.SI = (a.SI + b.SI) / 2
			out.Reasons |= b.Reasons
			out.Coverage = min(a.Coverage, b.Coverage)
			out.Samples = a.Samples + b.Samples
			if g.Mode == tagmap.Median3 {
				out.Reasons = out.Reasons.Add(ingest.ReasonSubstituted)
			}
			if g.Divergence > 0 && math.Abs(a.SI-b.SI) > g.Divergence {
				out.Reasons = out.Reasons.Add(ingest.ReasonDivergence)
			}
			out.Tag = a.Tag + "+" + b.Tag
		default: // three usable: the median member
			idx := []int{ok[0], ok[1], ok[2]}
			sort.Slice(idx, func(i, j int) bool { return vals[idx[i]].SI < vals[idx[j]].SI })
			out = vals[idx[1]]
			if g.Divergence > 0 && vals[idx[2]].SI-vals[idx[0]].SI > g.Divergence {
				// One member disagrees; the median rejects it, but say so.
				out.Reasons = out.Reasons.Add(ingest.ReasonDivergence)
			}
		}
	}
	out.Quality = judge(out.Reasons)
	return out
}

func (e *Engine) skew(snap *Snapshot) {
	var lo, hi time.Time
	n := 0
	for _, v := range snap.Values {
		if v.Newest.IsZero() {
			continue
		}
		if n == 0 || v.Newest.Before(lo) {
			lo = v.Newest
		}
		if n == 0 || v.Newest.After(hi) {
			hi = v.Newest
		}
		n++
	}
	if n < 2 {
		return
	}
	snap.Skew = hi.Sub(lo)
	if e.cfg.MaxSkew <= 0 || snap.Skew <= e.cfg.MaxSkew {
		return
	}
	snap.Reasons = snap.Reasons.Add(ingest.ReasonSkew)
	e.metrics.Count(ingest.ReasonSkew, 1)
	for k, v := range snap.Values {
		if !v.Newest.IsZero() && hi.Sub(v.Newest) > e.cfg.MaxSkew {
			v.Reasons = v.Reasons.Add(ingest.ReasonSkew)
			v.Quality = ingest.Worse(v.Quality, judge(v.Reasons))
			snap.Values[k] = v
		}
	}
}

// Run feeds the engine from q and sends the snapshots built at every value
// of ticks to out (the caller Releases them after evaluation). clock gives
// the ingest time (nil: the wall clock). Run returns when ctx ends; pending
// acknowledgements are then not sent, so JetStream redelivers those samples
// after a restart.
func (e *Engine) Run(ctx context.Context, q *ingest.Queue, ticks <-chan time.Time, clock ingest.Clock, out chan<- []*Snapshot) error {
	if clock == nil {
		clock = ingest.SystemClock{}
	}
	for {
		select {
		case <-ctx.Done():
			return ctx.Err()
		case b := <-q.C():
			q.Took()
			e.Ingest(b, clock.Now())
			q.Recycle(b)
		case t := <-ticks:
			snaps := e.Evaluate(t)
			select {
			case out <- snaps:
			case <-ctx.Done():
				return ctx.Err()
			}
		}
	}
}
