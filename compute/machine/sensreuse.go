package machine

import (
	"fmt"
	"math"
	"reflect"

	"github.com/exergywatch/exergywatch/compute/uncert"
	"github.com/exergywatch/exergywatch/thermo"
)

// Defaults of Sensitivities (see its doc for the reasoning and the
// measurements behind them).
const (
	// DefaultReuseFraction is α: sensitivities are reused while every
	// uncertain input is within α·u_i(x) of the anchor.
	DefaultReuseFraction = 1.0
	// DefaultMaxAge is the number of evaluations an anchor may serve before
	// the sensitivities are computed afresh (at 1-minute ticks, an hour).
	DefaultMaxAge = 60
	// DefaultFixedInputTolerance is the relative move (fraction of |x|)
	// allowed for a used input that has no uncertainty (its sensitivities
	// are not needed, but the others depend on it: a rate figure's scale
	// with the mass flow, for example).
	DefaultFixedInputTolerance = 1e-3
	// DefaultAnchors is the number of anchors kept per machine: enough to
	// cover the noise of a steady operating point within DefaultMaxAge
	// (measured: more than 16 hardly adds reuse on the demo machines).
	DefaultAnchors = 16
)

// Sensitivities carries the sensitivity coefficients c_ki = ∂y_k/∂x_i of
// one machine from one evaluation to the next, so that evaluations at
// nearly the same operating point need not run the 2 flashes (or more)
// per uncertain input of the central differences again. Pass the same
// *Sensitivities to EvaluateWith for every evaluation of one machine; the
// zero value is ready to use (defaults above). It is not safe for
// concurrent use.
//
// What is reused and what is not. Figure values are always computed afresh
// from the current inputs (the three nominal flashes), and so are the
// standard uncertainties u_i of the current inputs (relative uncertainties
// and the IEC tolerance classes depend on the reading). Only the c_ki are
// taken from an anchor: a recent evaluation whose sensitivities were found
// by central differences on the same calculation (uncert.PropagateFrom).
// The combined standard uncertainty is then GUM eq. 16 (JCGM 100:2008
// §5.2.2) with the anchor's c and the current u:
//
//	u_c²(y_k) = Σ_i (c_ki u_i)² + 2 Σ_{i<j} c_ki c_kj r_ij u_i u_j
//
// and the variance contributions (c_ki u_i)² that name the dominant input
// are those of the current u as well.
//
// Why this is sound. The first-order law of propagation (GUM §5.1.2) is
// only valid where the model is close to linear over the inputs'
// uncertainty intervals. Across ±u_j a sensitivity changes by
// (∂²f/∂x_i∂x_j)·u_j, built from the same second derivatives whose terms
// the law neglects (the note to GUM §5.1.2 lists them); where the law
// holds, that change is small against c_i. An anchor at most α·u_j away in
// every input therefore has sensitivities that differ from the current
// ones by about α times that relative nonlinearity. For the ratio-type
// figures here (efficiencies, the power mismatch, specific work from
// power/flow) that is about α times the relative uncertainty of the inputs
// in a denominator, i.e. about α percent; a pump, whose efficiency goes
// with 1/ΔT² over a temperature rise of about 1 K, is the most nonlinear
// case. Measured along noisy and drifting trajectories of a steam turbine,
// a wet-exhaust turbine, a feed pump, air, natural-gas and ammonia
// compressors (TestSensitivityReuseAlongTrajectories, 16 anchors), the
// largest deviation of a reused U95 from the fresh one is 1.3 % for
// α = 0.5, 3.2 % for α = 1 (the pump; 2.1 % for the others) and 7.1 % for
// α = 2 (the pump; 2.9 % for the others). The default α = 1 is the largest
// of these that keeps every machine kind within 5 %, half a unit of the
// second significant digit of a U95 of 0.0100 (uncertainties are stated to
// two significant digits, GUM §7.2.6), and far below the reliability of
// the instrument uncertainties themselves (GUM §G.4.2).
//
// Several anchors. Plant noise of the order of u_i or above (class A RTDs
// read once a minute, say) leaves a box of ±α·u_i around one noisy anchor
// at most ticks. The cache therefore keeps the newest Anchors anchors (each
// made where no kept one qualified) and uses the nearest one that
// qualifies; the bound above holds whichever serves, since each is within
// α·u_i of the current inputs.
//
// An anchor qualifies when:
//   - it was made for this Spec (another Spec, or a changed one, forgets
//     all anchors) and is at most MaxAge evaluations old, so a slow drift
//     always gets fresh sensitivities;
//   - every uncertain input is within α·u_i(x) of it, every used input
//     without uncertainty within FixedInputTolerance relative, and the set
//     of uncertain inputs is the same;
//   - every state has the same phase (inlet, outlet, isentropic outlet),
//     the polytropic method (exact ideal gas or Schultz), the set of
//     defined figures and the set of computable (finite) figures are the
//     same.
//
// The sensitivities are found afresh when no anchor qualifies, when a
// (p,T) state is flagged near saturation, when a reused U95 would not be
// finite, and after Reset or an error (which forget all anchors). A fresh
// evaluation only becomes an anchor when its central differences were
// clean: every perturbed calculation succeeded with the same phases, the
// same polytropic method and the same finite figures as the nominal one,
// and every figure that has a value has all its sensitivities.
type Sensitivities struct {
	// ReuseFraction is α, the largest move of an uncertain input from the
	// anchor, as a multiple of its current standard uncertainty u_i(x), at
	// which sensitivities are reused. 0 selects DefaultReuseFraction; a
	// negative value turns reuse off (every evaluation fresh).
	ReuseFraction float64
	// MaxAge is the largest age, in evaluations since it was made, of an
	// anchor that may serve. 0 selects DefaultMaxAge.
	MaxAge int
	// FixedInputTolerance is the largest relative move (fraction of |x|)
	// of a used input that has no uncertainty. 0 selects
	// DefaultFixedInputTolerance.
	FixedInputTolerance float64
	// Anchors is the most anchors kept (the newest); 0 selects
	// DefaultAnchors. Several anchors cover a noise cloud that one box of
	// ±α·u_i cannot: the nearest anchor that qualifies serves.
	Anchors int

	spec    *Spec // the spec the anchors were made for
	specVal Spec
	anchors []anchor
	evals   int // evaluations with uncertainty since the first
	fresh   int
	reused  int
}

// anchor is an evaluation whose sensitivities may be reused.
type anchor struct {
	born    int // Sensitivities.evals when it was made
	x       [nIn]float64
	uPos    [nIn]bool
	sens    [NumFigures][nIn]float64
	finite  [NumFigures]bool
	defined [NumFigures]bool
	phase   [nPorts]thermo.Phase
	poly    PolyMethod
}

// Reset forgets the anchors: the next evaluation computes its
// sensitivities afresh. The counts are kept.
func (s *Sensitivities) Reset() {
	s.anchors = s.anchors[:0]
	s.spec, s.specVal = nil, Spec{}
}

// Counts returns how many evaluations with uncertainty computed their
// sensitivities afresh and how many reused them.
func (s *Sensitivities) Counts() (fresh, reused int) { return s.fresh, s.reused }

func (s *Sensitivities) alpha() float64 {
	if s.ReuseFraction == 0 {
		return DefaultReuseFraction
	}
	return s.ReuseFraction
}

func (s *Sensitivities) maxAge() int {
	if s.MaxAge <= 0 {
		return DefaultMaxAge
	}
	return s.MaxAge
}

func (s *Sensitivities) fixedTol() float64 {
	if !(s.FixedInputTolerance > 0) {
		return DefaultFixedInputTolerance
	}
	return s.FixedInputTolerance
}

func (s *Sensitivities) maxAnchors() int {
	if s.Anchors <= 0 {
		return DefaultAnchors
	}
	return s.Anchors
}

// EvaluateWith is Evaluate with sensitivity coefficients reused from an
// earlier evaluation of the same machine at a nearby operating point (see
// Sensitivities). Figure values and states are bitwise those Evaluate
// gives for the same inputs; the U95s, Sensitivity and the dominant-input
// notes may come from an anchor's sensitivities, which
// Result.SensitivityAge tells (so may a grade that compares a figure with
// its U95, where the two U95s straddle the threshold). Errors are
// Evaluate's; an error also forgets all anchors. A nil cache makes it
// Evaluate.
func EvaluateWith(spec *Spec, in *Inputs, cache *Sensitivities) (*Result, error) {
	var flashes int
	return evaluateR(spec, in, false, cache, &flashes)
}

// evaluateWith is EvaluateWith returning the number of flashes (tests).
func evaluateWith(spec *Spec, in *Inputs, cache *Sensitivities) (*Result, int, error) {
	var flashes int
	res, err := evaluateR(spec, in, false, cache, &flashes)
	return res, flashes, err
}

// sameSpec reports whether the anchors were made for this spec: an equal
// value with the same fluid model (compared as interface values; a model of
// a type that cannot be compared only through the same *Spec).
func (s *Sensitivities) sameSpec(spec *Spec) (same bool) {
	if s.spec == nil {
		return false
	}
	x, y := s.specVal, *spec
	fx, fy := x.Fluid, y.Fluid
	x.Fluid, y.Fluid = nil, nil
	if x != y {
		return false
	}
	tx := reflect.TypeOf(fx)
	if tx == nil || tx != reflect.TypeOf(fy) {
		return false
	}
	if !tx.Comparable() {
		return s.spec == spec
	}
	// A comparable type may still hold an incomparable value (an interface
	// field holding a slice): == panics then.
	defer func() {
		if recover() != nil {
			same = s.spec == spec
		}
	}()
	return fx == fy
}

// reuse returns the propagation from the nearest qualifying anchor's
// sensitivities and the current uncertainties, with that anchor's age, or
// nil when they must be found afresh. It counts the evaluation and drops
// the anchors that are too old or made for another spec.
func (s *Sensitivities) reuse(spec *Spec, x, u *[nIn]float64, corr []uncert.Correlation, o *evalOut, defined *[NumFigures]bool, near bool) (*propagation, int) {
	s.evals++
	if !s.sameSpec(spec) {
		s.Reset()
		return nil, 0
	}
	maxAge := s.maxAge()
	n := 0
	for i := range s.anchors {
		if s.evals-s.anchors[i].born <= maxAge {
			if n != i {
				s.anchors[n] = s.anchors[i]
			}
			n++
		}
	}
	s.anchors = s.anchors[:n]
	alpha := s.alpha()
	if alpha < 0 || near {
		return nil, 0
	}
	for i := range nIn {
		if !finite(u[i]) || u[i] < 0 {
			return nil, 0
		}
	}
	tol := s.fixedTol()
	var best *anchor
	bestD := math.Inf(1)
	for ai := range s.anchors {
		a := &s.anchors[ai]
		if d := a.distance(x, u, o, defined, alpha, tol); d < bestD {
			best, bestD = a, d
		}
	}
	if best == nil {
		return nil, 0
	}
	p := &propagation{sens: best.sens}
	for k := range NumFigures {
		p.ok[k] = best.finite[k]
	}
	p.combine(u, corr)
	for k := range NumFigures {
		if p.ok[k] && !finite(p.u[k]) {
			return nil, 0
		}
	}
	return p, s.evals - best.born
}

// distance is the largest move of an uncertain input from the anchor in
// units of α·u_i(x), at most 1, when the anchor qualifies for these inputs
// and this nominal evaluation; +Inf when it does not.
func (a *anchor) distance(x, u *[nIn]float64, o *evalOut, defined *[NumFigures]bool, alpha, tol float64) float64 {
	inf := math.Inf(1)
	if *defined != a.defined || o.poly != a.poly ||
		o.in.Phase != a.phase[portIn] || o.out.Phase != a.phase[portOut] || o.iso.Phase != a.phase[portIso] {
		return inf
	}
	for k := range NumFigures {
		if finite(o.fig[k]) != a.finite[k] {
			return inf
		}
	}
	worst := 0.0
	for i := range nIn {
		if (u[i] > 0) != a.uPos[i] {
			return inf
		}
		d := math.Abs(x[i] - a.x[i])
		if u[i] == 0 {
			if !(d <= tol*math.Abs(a.x[i])) {
				return inf
			}
			continue
		}
		r := d / (alpha * u[i])
		if !(r <= 1) {
			return inf
		}
		worst = max(worst, r)
	}
	return worst
}

// store adds this fresh evaluation as an anchor when its central
// differences were clean (the oldest anchor goes when there are too many).
func (s *Sensitivities) store(spec *Spec, x, u *[nIn]float64, o *evalOut, defined *[NumFigures]bool, p *propagation, clean bool) {
	if !clean || s.alpha() < 0 {
		return
	}
	a := anchor{born: s.evals, x: *x, sens: p.sens, defined: *defined, poly: o.poly,
		phase: [nPorts]thermo.Phase{o.in.Phase, o.out.Phase, o.iso.Phase}}
	for i := range nIn {
		a.uPos[i] = u[i] > 0
	}
	for k := range NumFigures {
		a.finite[k] = finite(o.fig[k])
		if p.ok[k] != a.finite[k] {
			return // a figure with a value but without all its sensitivities
		}
		if !a.finite[k] {
			continue
		}
		for i := range nIn {
			if !finite(p.sens[k][i]) {
				return
			}
		}
	}
	if s.spec == nil {
		s.spec, s.specVal = spec, *spec
	}
	if len(s.anchors) < s.maxAnchors() {
		s.anchors = append(s.anchors, a)
		return
	}
	// Full: the new anchor takes the place of the oldest (slice order does
	// not matter; the nearest anchor serves).
	s.anchors = s.anchors[:s.maxAnchors()]
	oldest := 0
	for i := range s.anchors {
		if s.anchors[i].born < s.anchors[oldest].born {
			oldest = i
		}
	}
	s.anchors[oldest] = a
}

// propagation is the uncertainty of every figure of one evaluation: from
// uncert.PropagateFrom (fresh) or from reused sensitivities.
type propagation struct {
	// sens[k][i] is c_ki = ∂y_k/∂x_i, in the units of figure k per unit of
	// input i (SI); 0 for inputs without uncertainty.
	sens [NumFigures][nIn]float64
	// vars[k][i] is (c_ki u_i)², the contribution of input i to the
	// variance of figure k without the correlation terms.
	vars [NumFigures][nIn]float64
	// u is the combined standard uncertainty u_c (k = 1); valid where ok.
	u  [NumFigures]float64
	ok [NumFigures]bool
}

// propagationFrom copies a fresh propagation of the NumFigures outputs
// over the nIn inputs.
func propagationFrom(pr *uncert.Result) (*propagation, error) {
	if len(pr.U) != int(NumFigures) || len(pr.Sens) != int(NumFigures)*nIn || len(pr.Var) != len(pr.Sens) {
		return nil, fmt.Errorf("uncertainty propagation: %d outputs, %d sensitivities, want %d and %d", len(pr.U), len(pr.Sens), NumFigures, int(NumFigures)*nIn)
	}
	p := &propagation{}
	for k := range NumFigures {
		p.u[k], p.ok[k] = pr.U[k], pr.OK[k]
		copy(p.sens[k][:], pr.Sens[int(k)*nIn:])
		copy(p.vars[k][:], pr.Var[int(k)*nIn:])
	}
	return p, nil
}

// combine sets vars and u from sens and the standard uncertainties u by
// GUM eq. 16, in the order of operations of uncert.Propagate (so the same
// sensitivities give the same bits).
func (p *propagation) combine(u *[nIn]float64, corr []uncert.Correlation) {
	for k := range NumFigures {
		for i := range nIn {
			c := p.sens[k][i]
			p.vars[k][i] = 0
			if u[i] != 0 && finite(c) {
				p.vars[k][i] = (c * u[i]) * (c * u[i])
			}
		}
		if !p.ok[k] {
			p.u[k] = math.NaN()
			continue
		}
		v := 0.0
		for i := range nIn {
			v += p.vars[k][i]
		}
		for _, c := range corr {
			v += 2 * p.sens[k][c.I] * p.sens[k][c.J] * c.R * u[c.I] * u[c.J]
		}
		if v < 0 {
			v = 0
		}
		p.u[k] = math.Sqrt(v)
	}
}

// u95 is the expanded uncertainty of figure k (k = 2) and whether it exists.
func (p *propagation) u95(k FigureID) (float64, bool) {
	if !p.ok[k] {
		return 0, false
	}
	return uncert.K95 * p.u[k], true
}

// dominant is the input contributing most to the variance of figure k, or
// -1 if none does.
func (p *propagation) dominant(k FigureID) int {
	best, bi := 0.0, -1
	for i, v := range p.vars[k] {
		if v > best {
			best, bi = v, i
		}
	}
	return bi
}
