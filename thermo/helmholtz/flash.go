package helmholtz

import (
	"errors"
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

var (
	_ thermo.Fluid           = (*Fluid)(nil)
	_ thermo.Saturation      = (*Fluid)(nil)
	_ thermo.SaturationSlope = (*Fluid)(nil)
	_ thermo.Critical        = (*Fluid)(nil)
)

// Flash returns the state fixed by (a, b). Supported pairs: PT, PH, PS, PX,
// TX and HS. A (p,T) exactly on the saturation line does not fix the state
// and returns ErrPhase (use PX or TX). Pseudo-pure air has no two-phase
// model: PX, TX and states between its dew and bubble lines return errors
// wrapping ErrUnsupported or ErrPhase. Within about 1e-5 (relative) of the
// critical point the Maxwell solve, and so SatT, SatP, PX, TX and the (p,h),
// (p,s) flashes at p just below pc, may return ErrNoConvergence.
func (f *Fluid) Flash(pair thermo.Pair, a, b float64) (thermo.State, error) {
	names := pairArgNames(pair)
	if err := thermo.CheckFinite(f.name, names[:], a, b); err != nil {
		return thermo.State{}, err
	}
	var (
		s   thermo.State
		err error
	)
	switch pair {
	case thermo.PT:
		s, err = f.flashPT(a, b)
	case thermo.PH:
		s, err = f.flashPY(a, b, true)
	case thermo.PS:
		s, err = f.flashPY(a, b, false)
	case thermo.PX:
		s, err = f.flashPX(a, b)
	case thermo.TX:
		s, err = f.flashTX(a, b)
	case thermo.HS:
		s, err = f.flashHS(a, b)
	default:
		return thermo.State{}, fmt.Errorf("%s: input pair %v: %w", f.name, pair, thermo.ErrUnsupported)
	}
	if err != nil {
		return thermo.State{}, err
	}
	if !s.Finite() {
		return thermo.State{}, fmt.Errorf("%s: %v flash (%g, %g) produced a non-finite property: %w", f.name, pair, a, b, thermo.ErrNoConvergence)
	}
	return s, nil
}

func pairArgNames(p thermo.Pair) [2]string {
	switch p {
	case thermo.PT:
		return [2]string{"p", "T"}
	case thermo.PH:
		return [2]string{"p", "h"}
	case thermo.PS:
		return [2]string{"p", "s"}
	case thermo.PX:
		return [2]string{"p", "x"}
	case thermo.TX:
		return [2]string{"T", "x"}
	case thermo.HS:
		return [2]string{"h", "s"}
	}
	return [2]string{"a", "b"}
}

// classify decides the phase at (T, p). Below the critical temperature the
// ancillary saturation pressure decides when p is clearly away from it;
// inside the band f.ancMargin, and above 0.99 Tc, the Maxwell solution does
// and is returned for bracketing the density.
func (f *Fluid) classify(T, p float64) (thermo.Phase, satPoint, error) {
	if T >= f.tc {
		if p >= f.pc {
			return thermo.PhaseSupercritical, satPoint{}, nil
		}
		return thermo.PhaseVapour, satPoint{}, nil
	}
	if f.pseudoPure {
		if T >= f.ancPL.tr || p >= f.pc {
			return thermo.PhaseLiquid, satPoint{}, nil
		}
		pb, pd := f.ancPL.eval(T), f.ancPV.eval(T)
		switch {
		case p >= pb:
			return thermo.PhaseLiquid, satPoint{}, nil
		case p <= pd:
			return thermo.PhaseVapour, satPoint{}, nil
		}
		return 0, satPoint{}, fmt.Errorf("%s: p = %g Pa at T = %g K lies between the dew (%g Pa) and bubble (%g Pa) pressures; two-phase air is not modelled: %w", f.name, p, T, pd, pb, thermo.ErrPhase)
	}
	if p >= f.pc {
		return thermo.PhaseLiquid, satPoint{}, nil
	}
	if T < 0.99*f.tc {
		pa := f.ancP.eval(T)
		if p > pa*(1+f.ancMargin) {
			return thermo.PhaseLiquid, satPoint{}, nil
		}
		if p < pa*(1-f.ancMargin) {
			return thermo.PhaseVapour, satPoint{}, nil
		}
	}
	sp, err := f.maxwellAt(T)
	if err != nil {
		return 0, satPoint{}, err
	}
	switch {
	case p > sp.p:
		return thermo.PhaseLiquid, sp, nil
	case p < sp.p:
		return thermo.PhaseVapour, sp, nil
	}
	return 0, satPoint{}, fmt.Errorf("%s: p = %g Pa is the saturation pressure at T = %g K; (p,T) does not fix the state, use PX or TX: %w", f.name, p, T, thermo.ErrPhase)
}

func (f *Fluid) flashPT(p, T float64) (thermo.State, error) {
	s, _, err := f.flashPTr(p, T)
	return s, err
}

// flashPTr is flashPT, also returning the residual derivatives at the state.
func (f *Fluid) flashPTr(p, T float64) (thermo.State, resid, error) {
	if err := f.checkP(p); err != nil {
		return thermo.State{}, resid{}, err
	}
	if err := f.checkT(T); err != nil {
		return thermo.State{}, resid{}, err
	}
	ph, sp, err := f.classify(T, p)
	if err != nil {
		return thermo.State{}, resid{}, err
	}
	var spp *satPoint // the Maxwell solution when classify needed it
	if sp.T > 0 {
		spp = &sp
	}
	return f.statePTr(p, T, ph, spp, 0)
}

// statePT solves the density on the given branch and evaluates the state.
func (f *Fluid) statePT(p, T float64, ph thermo.Phase, sp *satPoint, guess float64) (thermo.State, error) {
	s, _, err := f.statePTr(p, T, ph, sp, guess)
	return s, err
}

// statePTr is statePT, also returning the residual derivatives at the state.
func (f *Fluid) statePTr(p, T float64, ph thermo.Phase, sp *satPoint, guess float64) (thermo.State, resid, error) {
	var tp tauPart
	f.q.tauPart(f.tr/T, &tp)
	rho, r, err := f.density(&tp, T, p, ph, sp, guess)
	if err != nil {
		return thermo.State{}, resid{}, err
	}
	s, _ := f.propsR(&tp, T, rho, r)
	s.P = p
	s.Phase = ph
	return s, r, nil
}

// mix returns the two-phase state of quality x on the saturation line sp.
func (f *Fluid) mix(sp satPoint, x float64) thermo.State {
	l, v := f.satStates(sp)
	var s thermo.State
	s.P = sp.p
	s.T = sp.T
	s.V = l.V + x*(v.V-l.V)
	s.Rho = 1 / s.V
	s.U = l.U + x*(v.U-l.U)
	s.H = l.H + x*(v.H-l.H)
	s.S = l.S + x*(v.S-l.S)
	s.X = x
	s.Phase = thermo.PhaseTwoPhase
	return s
}

func (f *Fluid) checkX(x float64) error {
	if x < 0 {
		return thermo.Below(f.name, "x", "1", x, 0, "vapour mass fraction")
	}
	if x > 1 {
		return thermo.Above(f.name, "x", "1", x, 1, "vapour mass fraction")
	}
	return nil
}

func (f *Fluid) flashTX(T, x float64) (thermo.State, error) {
	if err := f.checkX(x); err != nil {
		return thermo.State{}, err
	}
	sp, err := f.maxwellAt(T)
	if err != nil {
		return thermo.State{}, err
	}
	return f.mix(sp, x), nil
}

func (f *Fluid) flashPX(p, x float64) (thermo.State, error) {
	if err := f.checkX(x); err != nil {
		return thermo.State{}, err
	}
	sp, err := f.satAtP(p)
	if err != nil {
		return thermo.State{}, err
	}
	return f.mix(sp, x), nil
}

// flashPY solves (p, h) (isH) or (p, s): two-phase detection with the
// saturation state at p, then Newton on T with the density re-solved on the
// known branch at each step, safeguarded by bisection.
func (f *Fluid) flashPY(p, y float64, isH bool) (thermo.State, error) {
	return f.flashPYc(p, y, isH, true)
}

// flashPYc is flashPY; store says whether the phase boundary at p may be
// cached (the (h,s) flash visits many pressures once each and does not).
func (f *Fluid) flashPYc(p, y float64, isH, store bool) (thermo.State, error) {
	if err := f.checkP(p); err != nil {
		return thermo.State{}, err
	}
	lo, hi := f.tmin, f.tmax
	branch := thermo.PhaseUnknown // decided per T by classify
	var sat *thermo.State
	if p >= f.pc {
		branch = thermo.PhaseSupercritical // liquid below Tc, set per T in solveT
	} else {
		e, err := f.edges(p, store)
		if err != nil {
			return thermo.State{}, err
		}
		if e.vOnly {
			yv := e.v.S
			if isH {
				yv = e.v.H
			}
			if y < yv {
				return thermo.State{}, fmt.Errorf("%s: p = %g Pa is below the bubble pressure at the triple point and this h or s lies below the dew-point vapour (%g K); two-phase air is not modelled: %w", f.name, p, e.v.T, thermo.ErrPhase)
			}
			lo, branch, sat = e.v.T, thermo.PhaseVapour, &e.v
		}
		if e.split {
			yl, yv := e.l.S, e.v.S
			if isH {
				yl, yv = e.l.H, e.v.H
			}
			switch {
			case y < yl:
				hi, branch, sat = e.l.T, thermo.PhaseLiquid, &e.l
			case y > yv:
				lo, branch, sat = e.v.T, thermo.PhaseVapour, &e.v
			case e.pure:
				return f.mix(e.sat, (y-yl)/(yv-yl)), nil
			default:
				return thermo.State{}, fmt.Errorf("%s: p = %g Pa with this h or s lies between the bubble (%g K) and dew (%g K) states; two-phase air is not modelled: %w", f.name, p, e.l.T, e.v.T, thermo.ErrPhase)
			}
		}
	}
	return f.solveT(p, y, isH, lo, hi, branch, sat)
}

// solveT is the one-dimensional Newton iteration on T at fixed p.
func (f *Fluid) solveT(p, y float64, isH bool, lo, hi float64, branch thermo.Phase, edge *thermo.State) (thermo.State, error) {
	value := func(s *thermo.State) (v, d float64) {
		if isH {
			return s.H, s.Cp
		}
		return s.S, s.Cp / s.T
	}
	state := func(T, guess float64) (thermo.State, resid, error) {
		switch branch {
		case thermo.PhaseLiquid, thermo.PhaseVapour:
			// The branch is known from the phase boundary at p; above Tc
			// the vapour branch continues as gas below pc.
			return f.statePTr(p, T, branch, nil, guess)
		case thermo.PhaseSupercritical:
			ph := thermo.PhaseSupercritical
			if T < f.tc {
				ph = thermo.PhaseLiquid
			}
			return f.statePTr(p, T, ph, nil, guess)
		}
		return f.flashPTr(p, T)
	}
	// Starting temperature.
	var T float64
	if edge != nil {
		v, d := value(edge)
		T = edge.T + (y-v)/d
		if !isH {
			T = edge.T * math.Exp((y-v)/edge.Cp) // ds = cp dT/T
		}
	} else {
		// Ideal-gas-like guess around 1.2 Tc, corrected by Newton.
		T = min(max(1.2*f.tc, lo), hi)
	}
	if !(T > lo && T < hi) {
		T = 0.5 * (lo + hi)
	}
	loKnown, hiKnown := edge != nil && branch == thermo.PhaseVapour, edge != nil && branch == thermo.PhaseLiquid
	guess := 0.0 // density of the previous iterate: start of the next density solve
	fxPrev := math.Inf(1)
	for it := 0; it < 100; it++ {
		s, r, err := state(T, guess)
		if err != nil {
			return thermo.State{}, err
		}
		v, d := value(&s)
		fx := v - y
		scale := d * T                   // y change for dT = T
		if math.Abs(fx) <= 1e-11*scale { // |T error| <= 1e-11 T
			return s, nil
		}
		if fx > 0 {
			hi, hiKnown = T, true
		} else {
			lo, loKnown = T, true
		}
		Tn := T - fx/d
		if !(d > 0) || math.IsNaN(Tn) {
			Tn = math.NaN()
		}
		// Newton can cycle across the pseudo-critical inflection of h(T)
		// or s(T); when the residual has not at least halved, bisect.
		if loKnown && hiKnown && math.Abs(fx) > 0.5*fxPrev {
			Tn = 0.5 * (lo + hi)
		}
		fxPrev = math.Abs(fx)
		switch {
		case !(Tn > lo):
			if !loKnown {
				Tn = lo
			} else {
				Tn = 0.5 * (lo + hi)
			}
		case !(Tn < hi):
			if !hiKnown {
				Tn = hi
			} else {
				Tn = 0.5 * (lo + hi)
			}
		}
		if Tn == T {
			break // bracket collapsed without meeting the tolerance
		}
		if (Tn == lo && !loKnown) || (Tn == hi && !hiKnown) {
			// Evaluate the bound; if the target is beyond it, report range.
			sb, _, err := state(Tn, 0)
			if err != nil {
				return thermo.State{}, err
			}
			vb, db := value(&sb)
			if (Tn == lo && vb > y) || (Tn == hi && vb < y) {
				if math.Abs(vb-y) <= 1e-11*db*Tn {
					return sb, nil // at the limit within rounding
				}
				return thermo.State{}, f.outside(isH, y, sb, vb-y)
			}
			if Tn == lo {
				loKnown = true
			} else {
				hiKnown = true
			}
			Tn = 0.5 * (lo + hi)
		}
		if math.Abs(Tn-T) <= 1e-14*T && math.Abs(fx) <= 1e-9*scale {
			return s, nil
		}
		// Start the next density solve from the isobar's tangent:
		// (drho/dT)_p = -(dp/dT)_rho / (dp/drho)_T = -rho X/(T Y).
		guess = s.Rho
		if X, Y := 1+r.D-r.DT, 1+2*r.D+r.DD; Y > 0 {
			if g := s.Rho * (1 - X/Y*(Tn-T)/T); g > 0.5*s.Rho && g < 2*s.Rho {
				guess = g
			}
		}
		T = Tn
	}
	q := "s"
	if isH {
		q = "h"
	}
	return thermo.State{}, fmt.Errorf("%s: (p,%s) flash at p = %g Pa, %s = %g did not converge: %w", f.name, q, p, q, y, thermo.ErrNoConvergence)
}

// outside builds the range error for an h or s beyond the state sb at a
// temperature limit (fx = value - target there).
func (f *Fluid) outside(isH bool, y float64, sb thermo.State, fx float64) error {
	q, unit, lim := "s", "J/(kg K)", sb.S
	if isH {
		q, unit, lim = "h", "J/kg", sb.H
	}
	ctx := fmt.Sprintf("value at T = %g K and p = %g Pa", sb.T, sb.P)
	if fx > 0 {
		return thermo.Below(f.name, q, unit, y, lim, ctx)
	}
	return thermo.Above(f.name, q, unit, y, lim, ctx)
}

// edgeSet holds the phase boundary at one pressure below pc: the saturated
// liquid and vapour (pure fluids, Maxwell) or the bubble-point liquid and
// dew-point vapour (pseudo-pure air, from CoolProp's ancillaries). split is
// false when p is below the triple-point pressure (vapour only) or outside
// the air ancillaries' range.
type edgeSet struct {
	p     float64
	split bool
	vOnly bool // air below the triple-point bubble pressure: only the dew edge exists
	pure  bool
	sat   satPoint
	l, v  thermo.State
}

// edges returns the phase boundary at p, reusing one of the last four
// computed when p is the same (one machine's outlet pressure in a
// monitoring loop, and its perturbations in an uncertainty propagation).
func (f *Fluid) edges(p float64, store bool) (edgeSet, error) {
	if c := f.lastEdges.Load(); c != nil && c.p == p {
		return *c, nil
	}
	if c := f.prevEdges.find(p); c != nil {
		return *c, nil
	}
	e := edgeSet{p: p, pure: !f.pseudoPure}
	if !f.pseudoPure {
		if p >= f.satTriple.p {
			sp, err := f.satAtPc(p, store)
			if err != nil {
				return edgeSet{}, err
			}
			e.sat, e.split = sp, true
			e.l, e.v = f.satStates(sp)
		}
	} else {
		Tb, okb := f.ancInvert(&f.ancPL, p)
		Td, okd := f.ancInvert(&f.ancPV, p)
		if okb && okd && Tb < Td {
			l, err := f.statePT(p, Tb, thermo.PhaseLiquid, nil, 0)
			if err != nil {
				return edgeSet{}, err
			}
			v, err := f.statePT(p, Td, thermo.PhaseVapour, nil, 0)
			if err != nil {
				return edgeSet{}, err
			}
			e.l, e.v, e.split = l, v, true
		} else if okd && !okb {
			v, err := f.statePT(p, Td, thermo.PhaseVapour, nil, 0)
			if err != nil {
				return edgeSet{}, err
			}
			e.v, e.vOnly = v, true
		}
	}
	if store {
		c := e
		f.prevEdges.push(f.lastEdges.Swap(&c))
	}
	return e, nil
}

// flashHS solves (h, s) as a one-dimensional problem in pressure: along an
// isenthalp s(p) falls monotonically with (ds/dp)_h = -v/T in every phase,
// so Newton's method in ln p on s(p, h) - s, each step a (p,h) flash,
// safeguarded by bisection between 1 Pa and p_max, converges from any start.
func (f *Fluid) flashHS(h, s float64) (thermo.State, error) {
	loP, hiP := 1.0, f.pmax
	loKnown, hiKnown := false, false
	lnp := math.Log(min(1e6, f.pc))
	var last error
	for it := 0; it < 200; it++ {
		p := min(max(math.Exp(lnp), 1), f.pmax)
		st, err := f.flashPYc(p, h, true, false)
		if err != nil {
			var re *thermo.RangeError
			if errors.As(err, &re) && re.Quantity == "h" {
				// h below the (p, T_min) state: p too high for this h (a
				// liquid there), or too low when (p, T_min) is vapour, i.e.
				// p under the triple-point saturation pressure; h above
				// (p, T_max): p too low.
				pTrip := f.satTriple.p
				if f.pseudoPure {
					pTrip = f.ancPV.eval(f.tmin)
				}
				if !re.Above && p > pTrip {
					hiP, hiKnown = p, true
				} else {
					loP, loKnown = p, true
				}
				if hiP/loP < 1+1e-12 {
					return thermo.State{}, err
				}
				lnp = 0.5 * (math.Log(loP) + math.Log(hiP))
				last = err
				continue
			}
			e, eerr := f.edges(p, false)
			if !errors.Is(err, thermo.ErrPhase) || !f.pseudoPure || eerr != nil || !e.split {
				return thermo.State{}, err
			}
			// Air between its bubble and dew states at this p: no model
			// there, but a lever-rule estimate between the two edges tells
			// which way the single-phase answer lies.
			x := (h - e.l.H) / (e.v.H - e.l.H)
			st = thermo.State{P: p, T: e.l.T + x*(e.v.T-e.l.T), V: e.l.V + x*(e.v.V-e.l.V), S: e.l.S + x*(e.v.S-e.l.S)}
			if math.Abs(st.S-s) <= 1e-9*max(math.Abs(s), f.r) {
				return thermo.State{}, err // the (h,s) state is inside the band
			}
		}
		if !st.Finite() {
			return thermo.State{}, fmt.Errorf("%s: (h,s) flash: non-finite state at p = %g Pa: %w", f.name, p, thermo.ErrNoConvergence)
		}
		fx := st.S - s // decreasing in p
		if math.Abs(fx) <= 1e-11*max(math.Abs(s), f.r) && err == nil {
			return st, nil
		}
		if fx < 0 && p <= 1 {
			return thermo.State{}, thermo.Above(f.name, "s", "J/(kg K)", s, st.S, fmt.Sprintf("value at h = %g J/kg and p = %g Pa", h, p))
		}
		if fx > 0 && p >= f.pmax {
			return thermo.State{}, thermo.Below(f.name, "s", "J/(kg K)", s, st.S, fmt.Sprintf("value at h = %g J/kg and p = %g Pa", h, p))
		}
		if fx > 0 {
			loP, loKnown = p, true
		} else {
			hiP, hiKnown = p, true
		}
		// d s / d ln p = -p v / T at constant h
		d := -p * st.V / st.T
		next := lnp - fx/d
		if !(next > math.Log(loP)) || !(next < math.Log(hiP)) || math.IsNaN(next) {
			switch {
			case !(next > math.Log(loP)) && !loKnown:
				next = math.Log(loP)
			case !(next < math.Log(hiP)) && !hiKnown:
				next = math.Log(hiP)
			default:
				next = 0.5 * (math.Log(loP) + math.Log(hiP))
			}
		}
		if loKnown && hiKnown && hiP/loP < 1+1e-14 {
			break
		}
		lnp = next
	}
	if last != nil {
		return thermo.State{}, fmt.Errorf("%s: (h,s) flash at h = %g J/kg, s = %g J/(kg K) did not converge (%v): %w", f.name, h, s, last, thermo.ErrNoConvergence)
	}
	return thermo.State{}, fmt.Errorf("%s: (h,s) flash at h = %g J/kg, s = %g J/(kg K) did not converge: %w", f.name, h, s, thermo.ErrNoConvergence)
}
