package machine

import (
	"errors"
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/compute/uncert"
	"github.com/exergywatch/exergywatch/thermo"
)

// Input vector layout for the calculation and its propagation.
const (
	iP1 = iota
	iT1
	iH1
	iX1
	iP2
	iT2
	iX2
	iFlow
	iPower
	iHeat
	iEta
	nIn
)

var inputNames = [nIn]string{"p1", "T1", "h1", "x1", "p2", "T2", "x2", "flow", "power", "heat", "drive_efficiency"}

// inputLabels are for notes a person reads.
var inputLabels = [nIn]string{"inlet pressure", "inlet temperature", "inlet enthalpy", "inlet vapour fraction",
	"outlet pressure", "outlet temperature", "outlet vapour fraction", "mass flow", "measured power",
	"declared heat flow", "drive efficiency"}

// Ports of the flashes (memo index, error text).
const (
	portIn = iota
	portOut
	portIso
	nPorts
)

var portNames = [nPorts]string{"inlet", "outlet", "isentropic outlet"}

type evalOut struct {
	in, out, iso thermo.State
	fig          [NumFigures]float64
	poly         PolyMethod
	schultzF     float64
}

// Evaluate computes the states and figures of one machine from one set of
// inputs, with the uncertainty of every figure when spec.Uncertainty is
// set, and grades the result. Errors: ErrSpec, ErrInput, ErrStateNotFixed
// (a (p,T) state within the measurement uncertainty of saturation) and
// *StateError wrapping the thermo errors (thermo.ErrOutOfRange, ...). A
// failed evaluation is never replaced by a guess; see BadRecord.
func Evaluate(spec *Spec, in *Inputs) (*Result, error) {
	res, _, err := evaluate(spec, in, false)
	return res, err
}

// evaluate is Evaluate; full = true disables the nominal-state memo, so
// every propagation step re-runs every flash (the reference the staged
// propagation is tested against). flashes is the number of property-model
// flashes run (the saturation checks not counted).
func evaluate(spec *Spec, in *Inputs, full bool) (res *Result, flashes int, err error) {
	res, err = evaluateR(spec, in, full, nil, &flashes)
	return res, flashes, err
}

// evaluateR is the evaluation; cache (nil: none) supplies and keeps reused
// sensitivities (see Sensitivities). An error forgets the cache's anchors.
func evaluateR(spec *Spec, in *Inputs, full bool, cache *Sensitivities, flashes *int) (*Result, error) {
	res, err := evaluateC(spec, in, full, cache, flashes)
	if err != nil && cache != nil {
		cache.Reset()
	}
	return res, err
}

func evaluateC(spec *Spec, in *Inputs, full bool, cache *Sensitivities, flashes *int) (*Result, error) {
	c, err := resolve(spec)
	if err != nil {
		return nil, err
	}
	c.full = full
	defer func() { *flashes = c.flashes }()
	if in == nil {
		return nil, fmt.Errorf("%w: nil inputs", ErrInput)
	}
	x, err := c.vector(in)
	if err != nil {
		return nil, err
	}
	// Phase checks of (p,T) states: refuse what cannot be fixed, flag what
	// is near saturation.
	u, err := c.stdUncertainties(&x)
	if err != nil {
		return nil, err
	}
	var nearIn, nearOut bool
	if c.Inlet == ByPT {
		if nearIn, err = c.satCheck("inlet", x[iP1], x[iT1], u[iT1], u[iP1]); err != nil {
			return nil, err
		}
	}
	if c.Outlet == ByPT {
		if nearOut, err = c.satCheck("outlet", x[iP2], x[iT2], u[iT2], u[iP2]); err != nil {
			return nil, err
		}
	}
	var o evalOut
	c.recording = true
	err = c.run(&x, &o)
	c.recording = false
	if err != nil {
		return nil, err
	}
	res := &Result{
		Kind: c.Kind, Fluid: c.Fluid.Name(), Inlet: o.in, Outlet: o.out, IsentropicOutlet: o.iso,
		PolytropicMethod: o.poly, SchultzFactor: o.schultzF, T0: c.T0,
	}
	defined := c.defined(&x)
	for id := range NumFigures {
		if defined[id] {
			res.Figures[id] = Figure{Defined: true, Value: o.fig[id]}
		}
	}
	wantU := !c.Uncertainty.IsZero()
	if wantU {
		var corr []uncert.Correlation
		if c.Uncertainty.CorrT != 0 && u[iT1] > 0 && u[iT2] > 0 {
			corr = append(corr, uncert.Correlation{I: iT1, J: iT2, R: c.Uncertainty.CorrT})
		}
		if c.Uncertainty.CorrP != 0 && u[iP1] > 0 && u[iP2] > 0 {
			corr = append(corr, uncert.Correlation{I: iP1, J: iP2, R: c.Uncertainty.CorrP})
		}
		var p *propagation
		if cache != nil {
			var age int
			if p, age = cache.reuse(spec, &x, &u, corr, &o, &defined, nearIn || nearOut); p != nil {
				cache.reused++
				res.SensitivityAge = age
			}
		}
		if p == nil {
			// clean: every perturbed calculation ran, in the same phases,
			// polytropic method and finite figures as the nominal one.
			clean := true
			var tmp evalOut
			f := func(xs, y []float64) error {
				if err := c.run((*[nIn]float64)(xs), &tmp); err != nil {
					clean = false
					return err
				}
				if tmp.poly != o.poly || tmp.in.Phase != o.in.Phase || tmp.out.Phase != o.out.Phase || tmp.iso.Phase != o.iso.Phase {
					clean = false
				}
				for k := range tmp.fig {
					if finite(tmp.fig[k]) != finite(o.fig[k]) {
						clean = false
					}
				}
				copy(y, tmp.fig[:])
				return nil
			}
			pr, err := uncert.PropagateFrom(f, o.fig[:], x[:], u[:], corr)
			if err != nil {
				return nil, fmt.Errorf("uncertainty propagation: %w", err)
			}
			if p, err = propagationFrom(pr); err != nil {
				return nil, err
			}
			if cache != nil {
				cache.fresh++
				cache.store(spec, &x, &u, &o, &defined, p, clean && !nearIn && !nearOut)
			}
		}
		res.prop = p
		for id := range NumFigures {
			if u95, ok := p.u95(id); ok && res.Figures[id].Defined {
				res.Figures[id].U95, res.Figures[id].HasU95 = u95, true
			}
		}
	}
	if c.ReferencePath && c.Kind != Pump && res.Figures[PolytropicEfficiencyIntegrated].Defined {
		eta, _, err := IntegratedPolytropic(c.Fluid, o.in.P, o.in.H, o.out.P, o.out.H, c.PathSteps)
		f := &res.Figures[PolytropicEfficiencyIntegrated]
		if err != nil {
			f.Value = math.NaN()
			res.Notes = append(res.Notes, "integrated polytropic path failed: "+err.Error())
		} else {
			// Shaft basis as PolytropicEfficiency: scale by Δh/w.
			dh, w := math.Abs(o.out.H-o.in.H), o.fig[SpecificWork]
			if c.turb {
				f.Value = eta * w / dh
			} else {
				f.Value = eta * dh / w
			}
		}
	}
	c.grade(res, in, wantU, nearIn, nearOut)
	return res, nil
}

// vector checks the inputs the methods use and packs them.
func (c *resolved) vector(in *Inputs) ([nIn]float64, error) {
	var x [nIn]float64
	check := func(name string, v float64, positive bool) error {
		if !finite(v) {
			return fmt.Errorf("%w: %s = %v is not finite", ErrInput, name, v)
		}
		if positive && v <= 0 {
			return fmt.Errorf("%w: %s = %v must be positive", ErrInput, name, v)
		}
		return nil
	}
	frac := func(name string, v float64) error {
		if !finite(v) || v < 0 || v > 1 {
			return fmt.Errorf("%w: %s = %v must be a vapour mass fraction in [0, 1]", ErrInput, name, v)
		}
		return nil
	}
	errs := []error{check("inlet pressure p1 (Pa)", in.P1, true), check("outlet pressure p2 (Pa)", in.P2, true)}
	x[iP1], x[iP2] = in.P1, in.P2
	switch c.Inlet {
	case ByPT:
		errs = append(errs, check("inlet temperature T1 (K)", in.T1, true))
		x[iT1] = in.T1
	case ByPX:
		errs = append(errs, frac("inlet vapour fraction x1", in.X1))
		x[iX1] = in.X1
	case ByPH:
		errs = append(errs, check("inlet enthalpy h1 (J/kg)", in.H1, false))
		x[iH1] = in.H1
	}
	switch c.Outlet {
	case ByPT:
		errs = append(errs, check("outlet temperature T2 (K)", in.T2, true))
		x[iT2] = in.T2
	case ByPX:
		errs = append(errs, frac("outlet vapour fraction x2", in.X2))
		x[iX2] = in.X2
	}
	errs = append(errs, check("mass flow (kg/s)", in.MassFlow, false), check("heat flow (W)", in.HeatFlow, false))
	if err := errors.Join(errs...); err != nil {
		return x, err
	}
	if in.MassFlow < 0 {
		return x, fmt.Errorf("%w: mass flow %v kg/s is negative", ErrInput, in.MassFlow)
	}
	if in.HeatFlow < 0 {
		return x, fmt.Errorf("%w: heat flow %v W is negative; it is the heat leaving the stream", ErrInput, in.HeatFlow)
	}
	x[iFlow], x[iHeat] = in.MassFlow, in.HeatFlow
	switch c.Power {
	case ShaftPower:
		if err := check("shaft power (W)", in.ShaftPower, true); err != nil {
			return x, err
		}
		x[iPower] = in.ShaftPower
	case ElectricalPower:
		if err := check("electrical power (W)", in.ElectricalPower, true); err != nil {
			return x, err
		}
		x[iPower] = in.ElectricalPower
		x[iEta] = c.DriveEfficiency
	}
	needFlow := c.Outlet == ByEnergyBalance || c.WorkFromPower || in.HeatFlow > 0
	if needFlow && in.MassFlow <= 0 {
		return x, fmt.Errorf("%w: the energy balance, the shaft-power basis and a declared heat flow need a positive mass flow", ErrInput)
	}
	switch {
	case c.turb && !(in.P2 < in.P1):
		return x, fmt.Errorf("%w: a turbine's outlet pressure (%g Pa) must be below its inlet pressure (%g Pa); are both absolute?", ErrInput, in.P2, in.P1)
	case !c.turb && !(in.P2 > in.P1):
		return x, fmt.Errorf("%w: a %s's outlet pressure (%g Pa) must be above its inlet pressure (%g Pa); are both absolute?", ErrInput, c.Kind, in.P2, in.P1)
	}
	return x, nil
}

// stdUncertainties returns the standard uncertainty of every used input.
func (c *resolved) stdUncertainties(x *[nIn]float64) ([nIn]float64, error) {
	var u [nIn]float64
	U := &c.Uncertainty
	u[iP1] = U.P1.of(x[iP1])
	u[iP2] = U.P2.of(x[iP2])
	tempU := func(s Std, cl uncert.TempClass, T float64, port string) (float64, error) {
		v := s.of(T)
		if !cl.IsZero() {
			uc, err := cl.StdUncertainty(T)
			if err != nil {
				return 0, fmt.Errorf("%s temperature sensor: %w", port, err)
			}
			v = math.Hypot(v, uc)
		}
		return v, nil
	}
	var err error
	switch c.Inlet {
	case ByPT:
		if u[iT1], err = tempU(U.T1, U.T1Class, x[iT1], "inlet"); err != nil {
			return u, err
		}
	case ByPX:
		u[iX1] = U.X1.of(x[iX1])
	case ByPH:
		u[iH1] = U.H1.of(x[iH1])
	}
	switch c.Outlet {
	case ByPT:
		if u[iT2], err = tempU(U.T2, U.T2Class, x[iT2], "outlet"); err != nil {
			return u, err
		}
	case ByPX:
		u[iX2] = U.X2.of(x[iX2])
	}
	if x[iFlow] > 0 {
		u[iFlow] = U.MassFlow.of(x[iFlow])
	}
	if x[iHeat] > 0 {
		u[iHeat] = U.HeatFlow.of(x[iHeat])
	}
	if c.Power != NoPower {
		u[iPower] = U.Power.of(x[iPower])
	}
	if c.Power == ElectricalPower {
		u[iEta] = U.DriveEfficiency.of(x[iEta])
	}
	return u, nil
}

// satCheck refuses a (p,T) state within the measurement uncertainty of
// saturation (there p and T do not fix h and s: a wet turbine exhaust reads
// T = Tsat(p) whatever its wetness) and flags one within the margin.
func (c *resolved) satCheck(port string, p, T, uT, up float64) (near bool, err error) {
	if c.sat == nil || p >= c.pc {
		return false, nil
	}
	var ts, dTdp float64
	if ss, ok := c.sat.(thermo.SaturationSlope); ok {
		// One saturation solve gives Tsat and its slope (Clausius–Clapeyron
		// or the analytic derivative of the model's saturation curve).
		var err error
		if ts, dTdp, err = ss.SatTSlope(p); err != nil {
			// Outside the saturation range of the model (e.g. below the
			// triple point): no boundary to be near; the flash decides.
			return false, nil
		}
	} else {
		var err error
		if ts, err = c.sat.SatT(p); err != nil {
			return false, nil // as above
		}
		dp := 1e-6 * p
		if ts2, err := c.sat.SatT(p + dp); err == nil {
			dTdp = (ts2 - ts) / dp
		}
	}
	band := math.Max(minFixBand, uncert.K95*math.Hypot(uT, dTdp*up))
	d := T - ts
	if math.Abs(d) <= band {
		return true, fmt.Errorf("%w: %s T = %.3f K is within %.3f K of the saturation temperature %.3f K at p = %g Pa (U95 of T - Tsat); "+
			"give the state by (p,x) or fix the outlet by an energy balance from shaft or generator power", ErrStateNotFixed, port, T, band, ts, p)
	}
	return c.SaturationMargin > 0 && math.Abs(d) < c.SaturationMargin, nil
}

// defined says which figures apply to this spec and these inputs.
func (c *resolved) defined(x *[nIn]float64) [NumFigures]bool {
	var d [NumFigures]bool
	for _, id := range [...]FigureID{IsentropicEfficiency, SpecificWork, IsentropicSpecificWork,
		SpecificEntropyGeneration, SpecificLostWork, SecondLawEfficiency} {
		d[id] = true
	}
	if c.Kind != Pump {
		d[PolytropicEfficiency], d[PolytropicHead] = true, true
		d[PolytropicEfficiencyIntegrated] = c.ReferencePath
	} else {
		d[PumpHead] = true
	}
	if x[iFlow] > 0 {
		d[EntropyGenerationRate], d[LostWorkRate], d[Power] = true, true, true
		d[PowerMismatch] = c.Power != NoPower && c.Outlet != ByEnergyBalance && !c.WorkFromPower
		d[HeatFlow] = c.WorkFromPower
	}
	return d
}

// memo is a state of the nominal evaluation. The propagation perturbs one
// input at a time, so most of its flashes repeat a nominal one exactly;
// those are answered from the memo. Same inputs, same state: the
// calculation is unchanged. The evaluation is thus staged (inlet state ->
// outlet state -> isentropic end state -> figures) and a perturbed input
// recomputes only the stages it reaches:
//
//	p1, T1, h1, x1            inlet, isentropic end state (and an energy-balance outlet)
//	p2                        outlet, isentropic end state
//	T2, x2                    outlet
//	flow, power, heat, eta    none (an energy-balance outlet only)
//
// TestStagedPropagationEqualsFullReevaluation counts the flashes against
// this table and compares every figure, sensitivity and U95 with the
// unstaged calculation.
type memo struct {
	ok   bool
	pair thermo.Pair
	a, b float64
	s    thermo.State
}

func (c *resolved) flash(port int, pair thermo.Pair, a, b float64) (thermo.State, error) {
	m := &c.memo[port]
	if m.ok && !c.full && m.pair == pair && m.a == a && m.b == b {
		return m.s, nil
	}
	c.flashes++
	s, err := c.Fluid.Flash(pair, a, b)
	if err != nil {
		return s, &StateError{Port: portNames[port], Pair: pair, A: a, B: b, Err: err}
	}
	if c.recording {
		*m = memo{ok: true, pair: pair, a: a, b: b, s: s}
	}
	return s, nil
}

// run is the calculation: states, then figures. It is called once at the
// nominal inputs and twice per uncertain input by the propagation.
func (c *resolved) run(x *[nIn]float64, o *evalOut) error {
	var err error
	switch c.Inlet {
	case ByPT:
		o.in, err = c.flash(portIn, thermo.PT, x[iP1], x[iT1])
	case ByPX:
		o.in, err = c.flash(portIn, thermo.PX, x[iP1], x[iX1])
	case ByPH:
		o.in, err = c.flash(portIn, thermo.PH, x[iP1], x[iH1])
	}
	if err != nil {
		return err
	}
	m, Q := x[iFlow], x[iHeat]
	// Fluid power from the measured power: W, magnitude.
	var wf float64
	switch c.Power {
	case ShaftPower:
		wf = x[iPower]
	case ElectricalPower:
		if c.turb {
			wf = x[iPower] / x[iEta]
		} else {
			wf = x[iPower] * x[iEta]
		}
	}
	if c.Power != NoPower {
		if c.turb {
			wf += c.MechanicalLoss
		} else {
			wf -= c.MechanicalLoss
		}
	}
	switch c.Outlet {
	case ByPT:
		o.out, err = c.flash(portOut, thermo.PT, x[iP2], x[iT2])
	case ByPX:
		o.out, err = c.flash(portOut, thermo.PX, x[iP2], x[iX2])
	case ByEnergyBalance:
		// Steady-flow energy balance, kinetic and potential terms neglected:
		// turbine ṁ(h1 - h2) = W + Q; pump/compressor ṁ(h2 - h1) = W - Q.
		var h2 float64
		if c.turb {
			h2 = o.in.H - (wf+Q)/m
		} else {
			h2 = o.in.H + (wf-Q)/m
		}
		o.out, err = c.flash(portOut, thermo.PH, x[iP2], h2)
	}
	if err != nil {
		return err
	}
	o.iso, err = c.flash(portIso, thermo.PS, x[iP2], o.in.S)
	if err != nil {
		return err
	}
	s1, s2, s2s := &o.in, &o.out, &o.iso
	dh := s2.H - s1.H
	var q, w float64 // J/kg: heat leaving the stream, shaft work (magnitudes)
	if m > 0 {
		q = Q / m
	}
	switch {
	case c.Outlet == ByEnergyBalance || c.WorkFromPower:
		w = wf / m
		if c.turb {
			q = -dh - w
		} else {
			q = w - dh
		}
	case c.turb:
		w = -dh - q
	default:
		w = dh + q
	}
	var ws float64
	if c.turb {
		ws = s1.H - s2s.H
	} else {
		ws = s2s.H - s1.H
	}
	f := &o.fig
	for i := range f {
		f[i] = math.NaN()
	}
	f[SpecificWork] = w
	f[IsentropicSpecificWork] = ws
	f[IsentropicEfficiency] = ratio(c.turb, w, ws)
	o.poly, o.schultzF = PolyNone, 0
	if c.Kind != Pump {
		head, _, method, sf := polytropic(c.turb, s1, s2, s2s)
		o.poly, o.schultzF = method, sf
		f[PolytropicHead] = head
		f[PolytropicEfficiency] = ratio(c.turb, w, head)
	} else {
		f[PumpHead] = (s2.P - s1.P) * (s1.V + s2.V) / (2 * StandardGravity)
	}
	sgen := s2.S - s1.S + q/c.HeatRejectionT
	f[SpecificEntropyGeneration] = sgen
	f[SpecificLostWork] = c.T0 * sgen
	dpsi := dh - c.T0*(s2.S-s1.S) // ψ2 - ψ1
	if c.turb {
		f[SecondLawEfficiency] = safeDiv(w, -dpsi)
	} else {
		f[SecondLawEfficiency] = safeDiv(dpsi, w)
	}
	if m > 0 {
		f[EntropyGenerationRate] = m * sgen
		f[LostWorkRate] = m * c.T0 * sgen
		f[Power] = m * w
		if c.Power != NoPower {
			f[PowerMismatch] = safeDiv(m*w-wf, wf)
		}
		f[HeatFlow] = m * q
	}
	return nil
}

// ratio is the efficiency: expansion actual/ideal, compression ideal/actual.
func ratio(expansion bool, actual, ideal float64) float64 {
	if expansion {
		return safeDiv(actual, ideal)
	}
	return safeDiv(ideal, actual)
}

func safeDiv(a, b float64) float64 {
	if b == 0 || !finite(a) || !finite(b) {
		return math.NaN()
	}
	return a / b
}
