package if97

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// Water is water and steam to IAPWS-IF97. The zero value is ready to use;
// it holds no state and is safe for concurrent use.
//
// Range (R7-97(2012) Section 2): 273.15 K <= T <= 1073.15 K at
// 0 < p <= 100 MPa, and 1073.15 K < T <= 2273.15 K at 0 < p <= 50 MPa.
// States with the pairs (p,h), (p,s) and (h,s) are solved for T (and
// density in region 3) on the basic equations, with the backward equations
// as starting values. On the saturation line (x = 0 or x = 1 exactly) the
// state carries the derivatives (cp, cv, w) of that saturated phase;
// inside the two-phase region it carries none. Saturated and wet states
// within 1e-4 K of the critical temperature (other than the critical point
// itself), where the region-3 equation does not separate the two saturated
// densities, return an error wrapping thermo.ErrNoConvergence.
type Water struct{}

var (
	_ thermo.Fluid           = Water{}
	_ thermo.Saturation      = Water{}
	_ thermo.SaturationSlope = Water{}
	_ thermo.Critical        = Water{}
)

// Name returns "water".
func (Water) Name() string { return fluidName }

// CriticalPoint returns the IF97 critical point: 647.096 K, 22.064 MPa,
// 322 kg/m3 (R7-97(2012) Eqs. 2a-2c).
func (Water) CriticalPoint() (T, p, rho float64) { return Tc, Pc, Rhoc }

// SatT returns the saturation temperature in K at p in Pa (R7-97(2012)
// Eq. 31).
func (Water) SatT(p float64) (float64, error) { return SatT(p) }

// SatP returns the saturation pressure in Pa at T in K (R7-97(2012)
// Eq. 30).
func (Water) SatP(T float64) (float64, error) { return SatP(T) }

// SatTSlope returns the saturation temperature in K at p in Pa (R7-97(2012)
// Eq. 31) and the slope of that saturation line dT/dp in K/Pa, the
// reciprocal of the analytic derivative of Eq. 30 (Eqs. 30 and 31 are
// inverses of each other). This is the exact slope of the curve SatT
// returns. Clausius-Clapeyron with the IF97 saturated states, T (v” -
// v')/(h” - h'), agrees with it only as far as the region-4 equation and
// the basic equations of regions 1-3 agree (measured: within 2e-4 up to
// 16.5 MPa, 2e-3 in region 3; see TestSatTSlope). Errors as SatT.
func (Water) SatTSlope(p float64) (T, dTdp float64, err error) {
	if T, err = SatT(p); err != nil {
		return 0, 0, err
	}
	return T, 1 / dpsatdT(T), nil
}

var pairArgs = [...][2]string{{"a", "b"}, {"p", "T"}, {"p", "h"}, {"p", "s"}, {"p", "x"}, {"T", "x"}, {"h", "s"}}

// Flash returns the state fixed by the pair (a, b) in SI units.
func (Water) Flash(pair thermo.Pair, a, b float64) (thermo.State, error) {
	if pair < thermo.PT || pair > thermo.HS {
		return thermo.State{}, fmt.Errorf("%s: input pair %v: %w", fluidName, pair, thermo.ErrUnsupported)
	}
	names := pairArgs[pair]
	if err := thermo.CheckFinite(fluidName, names[:], a, b); err != nil {
		return thermo.State{}, err
	}
	var st thermo.State
	var err error
	switch pair {
	case thermo.PT:
		st, err = flashPT(a, b)
	case thermo.PH:
		st, err = flashPH(a, b)
	case thermo.PS:
		st, err = flashPS(a, b)
	case thermo.PX:
		st, err = flashPX(a, b)
	case thermo.TX:
		st, err = flashTX(a, b)
	case thermo.HS:
		st, err = flashHSWith(a, b, flashPH)
	}
	if err != nil {
		return thermo.State{}, err
	}
	if !st.Finite() {
		return thermo.State{}, fmt.Errorf("%s: %s = %g, %s = %g: the equations gave a non-finite property: %w",
			fluidName, names[0], a, names[1], b, thermo.ErrNoConvergence)
	}
	return st, nil
}

// phaseOf classifies a single-phase state.
func phaseOf(p, T, rho float64, region int) thermo.Phase {
	switch {
	case p > Pc && T > Tc:
		return thermo.PhaseSupercritical
	case region == 1:
		return thermo.PhaseLiquid
	case region == 3 && T < Tc && rho > Rhoc:
		return thermo.PhaseLiquid
	}
	return thermo.PhaseVapour
}

// stateFrom converts the output of a basic equation to a single-phase
// State (with derivatives).
func stateFrom(pr props, region int, ph thermo.Phase) thermo.State {
	return thermo.State{
		P: pr.p, T: pr.T, V: pr.v, Rho: 1 / pr.v, U: pr.u, H: pr.h, S: pr.s,
		Cp: pr.cp, Cv: pr.cv, W: pr.w, HasDerivatives: true,
		Phase: ph, Region: region,
	}
}

// single builds a single-phase state from region props.
func single(pr props, region int) thermo.State {
	return stateFrom(pr, region, phaseOf(pr.p, pr.T, 1/pr.v, region))
}

// twoPhase mixes the saturated liquid l and vapour v at p, T with vapour
// fraction x. At x = 0 and x = 1 the derivatives of that phase are kept.
func twoPhase(p, T, x float64, l, v props) thermo.State {
	st := thermo.State{
		P: p, T: T, X: x, Phase: thermo.PhaseTwoPhase, Region: 4,
		V: l.v + x*(v.v-l.v),
		U: l.u + x*(v.u-l.u),
		H: l.h + x*(v.h-l.h),
		S: l.s + x*(v.s-l.s),
	}
	st.Rho = 1 / st.V
	switch x {
	case 0:
		st.Cp, st.Cv, st.W, st.HasDerivatives = l.cp, l.cv, l.w, true
	case 1:
		st.Cp, st.Cv, st.W, st.HasDerivatives = v.cp, v.cv, v.w, true
	}
	return st
}

// checkP checks the pressure against the overall IF97 bounds 0 < p <= 100 MPa.
func checkP(p float64) error {
	if p <= 0 {
		return thermo.Below(fluidName, "p", "Pa", p, 0, "IF97 applies to p > 0")
	}
	if p > Pmax {
		return thermo.Above(fluidName, "p", "Pa", p, Pmax, "IF97 applies up to 100 MPa")
	}
	return nil
}

// regionPT selects the IF97 region of (p, T) per R7-97(2012) Section 4.
func regionPT(p, T float64) (int, error) {
	if err := checkP(p); err != nil {
		return 0, err
	}
	switch {
	case T < Tmin:
		return 0, thermo.Below(fluidName, "T", "K", T, Tmin, "IF97 applies from 273.15 K")
	case T > Tmax5:
		return 0, thermo.Above(fluidName, "T", "K", T, Tmax5, "IF97 applies up to 2273.15 K")
	case T > T25:
		if p > Pmax5 {
			return 0, thermo.Above(fluidName, "p", "Pa", p, Pmax5, "IF97 region 5 (T above 1073.15 K) applies up to 50 MPa")
		}
		return 5, nil
	case T <= T13:
		if p >= psat(T) {
			return 1, nil
		}
		return 2, nil
	case p > b23p(T):
		return 3, nil
	}
	return 2, nil
}

func flashPT(p, T float64) (thermo.State, error) {
	reg, err := regionPT(p, T)
	if err != nil {
		return thermo.State{}, err
	}
	switch reg {
	case 1:
		return single(region1(p, T), 1), nil
	case 2:
		return single(region2(p, T), 2), nil
	case 5:
		return single(region5(p, T), 5), nil
	}
	return flashPT3(p, T)
}

// HPT returns the specific enthalpy in J/kg at p in Pa and T in K: the
// cheap path for callers that need h alone.
func HPT(p, T float64) (float64, error) {
	if p-p != 0 || T-T != 0 { // NaN or ±Inf
		return 0, thermo.CheckFinite(fluidName, []string{"p", "T"}, p, T)
	}
	reg, err := regionPT(p, T)
	if err != nil {
		return 0, err
	}
	switch reg {
	case 1:
		return h1(p, T), nil
	case 2:
		return h2(p, T), nil
	case 5:
		return region5(p, T).h, nil
	}
	st, err := flashPT3(p, T)
	return st.H, err
}

// SPT returns the specific entropy in J/(kg·K) at p in Pa and T in K.
func SPT(p, T float64) (float64, error) {
	if p-p != 0 || T-T != 0 { // NaN or ±Inf
		return 0, thermo.CheckFinite(fluidName, []string{"p", "T"}, p, T)
	}
	reg, err := regionPT(p, T)
	if err != nil {
		return 0, err
	}
	switch reg {
	case 1:
		return s1(p, T), nil
	case 2:
		return s2(p, T), nil
	case 5:
		return region5(p, T).s, nil
	}
	st, err := flashPT3(p, T)
	return st.S, err
}

// checkX checks a vapour fraction.
func checkX(x float64) error {
	if x < 0 {
		return thermo.Below(fluidName, "x", "kg/kg", x, 0, "vapour mass fraction")
	}
	if x > 1 {
		return thermo.Above(fluidName, "x", "kg/kg", x, 1, "vapour mass fraction")
	}
	return nil
}

// satFromP returns Tsat and the saturated liquid and vapour at p in Pa,
// PsatMin <= p <= Pc. Above psat(623.15 K) the phases come from region 3.
func satFromP(p float64) (T float64, l, v props, err error) {
	if p >= Pc {
		T = Tc
	} else {
		T = tsat(p)
	}
	if p <= Ps13 {
		T = min(T, T13)
		return T, region1(p, T), region2(p, T), nil
	}
	l, v, err = sat3Props(T)
	return T, l, v, err
}

// satFromT returns psat and the saturated liquid and vapour at T in K,
// Tmin <= T <= Tc.
func satFromT(T float64) (p float64, l, v props, err error) {
	if T >= Tc {
		p = Pc
	} else {
		p = psat(T)
	}
	if T <= T13 {
		return p, region1(p, T), region2(p, T), nil
	}
	l, v, err = sat3Props(T)
	return p, l, v, err
}

func flashPX(p, x float64) (thermo.State, error) {
	if p < PsatMin {
		return thermo.State{}, thermo.Below(fluidName, "p", "Pa", p, PsatMin, "saturation line starts at psat(273.15 K)")
	}
	if p > Pc {
		return thermo.State{}, thermo.Above(fluidName, "p", "Pa", p, Pc, "saturation line ends at the critical pressure")
	}
	if err := checkX(x); err != nil {
		return thermo.State{}, err
	}
	T, l, v, err := satFromP(p)
	if err != nil {
		return thermo.State{}, err
	}
	return twoPhase(p, T, x, l, v), nil
}

func flashTX(T, x float64) (thermo.State, error) {
	if T < Tmin {
		return thermo.State{}, thermo.Below(fluidName, "T", "K", T, Tmin, "saturation line starts at 273.15 K")
	}
	if T > Tc {
		return thermo.State{}, thermo.Above(fluidName, "T", "K", T, Tc, "saturation line ends at the critical temperature")
	}
	if err := checkX(x); err != nil {
		return thermo.State{}, err
	}
	p, l, v, err := satFromT(T)
	if err != nil {
		return thermo.State{}, err
	}
	return twoPhase(p, T, x, l, v), nil
}

// solveT finds T in [lo, hi] with f(T) = target for a function f that
// increases with T and returns its value and derivative. T0 is the
// starting value. Newton steps that leave the bracket are replaced by
// bisection.
func solveT(f func(T float64) (y, dy float64), target, lo, hi, T0 float64) (float64, error) {
	T := T0
	if !(T > lo && T < hi) {
		T = 0.5 * (lo + hi)
	}
	for i := 0; i < 100; i++ {
		y, dy := f(T)
		r := y - target
		if r == 0 {
			return T, nil
		}
		if r > 0 {
			hi = T
		} else {
			lo = T
		}
		Tn := T - r/dy
		if Tn >= lo && Tn <= hi {
			// Newton converges quadratically: once a step is below
			// 1e-8 T the remaining error is far below 1e-12 T.
			if math.Abs(Tn-T) <= 1e-8*T {
				return Tn, nil
			}
		} else {
			Tn = 0.5 * (lo + hi)
		}
		if hi-lo <= 1e-13*T {
			return Tn, nil
		}
		T = Tn
	}
	return T, fmt.Errorf("%s: temperature iteration: %w", fluidName, thermo.ErrNoConvergence)
}

// kind selects the second variable of a (p, h) or (p, s) flash.
type kind int

const (
	kindH kind = iota // specific enthalpy, J/kg
	kindS             // specific entropy, J/(kg·K)
)

func (k kind) name() (q, unit string) {
	if k == kindH {
		return "h", "J/kg"
	}
	return "s", "J/(kg K)"
}

// val returns h or s of the region-1, -2 or -5 basic equation at (p, T).
func val(k kind, region int, p, T float64) float64 {
	switch {
	case region == 1 && k == kindH:
		return h1(p, T)
	case region == 1:
		return s1(p, T)
	case region == 2 && k == kindH:
		return h2(p, T)
	case region == 2:
		return s2(p, T)
	}
	pr := region5(p, T)
	if k == kindH {
		return pr.h
	}
	return pr.s
}

// of returns h or s of pr.
func (k kind) of(pr props) float64 {
	if k == kindH {
		return pr.h
	}
	return pr.s
}

// phsResult is the solution of a (p, h) or (p, s) flash: the region and
// T for regions 1, 2 and 5; the full props for region 3; Tsat, x and the
// saturated phases for region 4.
type phsResult struct {
	region int
	T, x   float64
	pr     props // region 3
	l, v   props // region 4
}

// solveTreg solves h(p,T) = y or s(p,T) = y in region 1, 2 or 5 between
// lo and hi, starting from T0.
func solveTreg(k kind, region int, p, y, lo, hi, T0 float64) (float64, error) {
	switch {
	case region == 1 && k == kindH:
		return solveT(func(T float64) (float64, float64) { return hcp1(p, T) }, y, lo, hi, T0)
	case region == 1:
		return solveT(func(T float64) (float64, float64) { s, cp := scp1(p, T); return s, cp / T }, y, lo, hi, T0)
	case region == 2 && k == kindH:
		return solveT(func(T float64) (float64, float64) { return hcp2(p, T) }, y, lo, hi, T0)
	case region == 2:
		return solveT(func(T float64) (float64, float64) { s, cp := scp2(p, T); return s, cp / T }, y, lo, hi, T0)
	case k == kindH:
		return solveT(func(T float64) (float64, float64) { pr := region5(p, T); return pr.h, pr.cp }, y, lo, hi, T0)
	}
	return solveT(func(T float64) (float64, float64) { pr := region5(p, T); return pr.s, pr.cp / T }, y, lo, hi, T0)
}

// backward returns the backward-equation starting value of region 1 or 2.
func backward(k kind, region int, p, y float64) float64 {
	switch {
	case region == 1 && k == kindH:
		return t1ph(p, y)
	case region == 1:
		return t1ps(p, y)
	case k == kindH:
		return t2ph(p, y)
	}
	return t2ps(p, y)
}

// solvePY solves the (p, h) or (p, s) flash for the region and state.
func solvePY(k kind, p, y float64) (phsResult, error) {
	if err := checkP(p); err != nil {
		return phsResult{}, err
	}
	q, unit := k.name()
	liquid := func(hiT float64) (phsResult, error) {
		ymin := val(k, 1, p, Tmin)
		if y < ymin {
			return phsResult{}, thermo.Below(fluidName, q, unit, y, ymin, "IF97 starts at 273.15 K")
		}
		T, err := solveTreg(k, 1, p, y, Tmin, hiT, backward(k, 1, p, y))
		return phsResult{region: 1, T: T}, err
	}
	Tlo := Tmin // lower temperature bound of region 2 at p
	switch {
	case p < PsatMin:
		ymin := val(k, 2, p, Tmin)
		if y < ymin {
			return phsResult{}, thermo.Below(fluidName, q, unit, y, ymin, "IF97 starts at 273.15 K")
		}
	case p <= Ps13:
		Ts := min(tsat(p), T13)
		// Fast path: a backward value well inside region 2 is solved in
		// [Tsat, 1073.15 K]; a solution strictly inside that bracket
		// proves y lies in region 2 (y(p,T) increases with T). Otherwise
		// the saturated states decide.
		if T0 := backward(k, 2, p, y); T0 > Ts+1 && T0 < T25-0.5 {
			T, err := solveTreg(k, 2, p, y, Ts, T25, T0)
			if err == nil && T > Ts*(1+1e-12) && T < T25*(1-1e-12) {
				return phsResult{region: 2, T: T}, nil
			}
		}
		yV := val(k, 2, p, Ts)
		if y < yV {
			l := region1(p, Ts)
			yL := k.of(l)
			if y < yL {
				return liquid(Ts)
			}
			v := region2(p, Ts)
			return phsResult{region: 4, T: Ts, x: (y - yL) / (yV - yL), l: l, v: v}, nil
		}
		Tlo = Ts
	default:
		// above psat(623.15 K): region 2 lies beyond the B23 line; below
		// it come region 1 (up to 623.15 K), the two-phase region (up to
		// the critical pressure) and region 3
		Tlo = b23T(p)
		if y < val(k, 2, p, Tlo) {
			if y <= val(k, 1, p, T13) {
				return liquid(T13)
			}
			if p <= Pc {
				Ts, l, v, err := satFromP(p)
				if err != nil {
					return phsResult{}, err
				}
				yL, yV := k.of(l), k.of(v)
				if y >= yL && y <= yV {
					x := 0.0
					if yV > yL {
						x = (y - yL) / (yV - yL)
					}
					return phsResult{region: 4, T: Ts, x: x, l: l, v: v}, nil
				}
			}
			pr, err := solve3(k, p, y)
			return phsResult{region: 3, T: pr.T, pr: pr}, err
		}
	}
	// vapour side: region 2 up to 1073.15 K, then region 5. The backward
	// value tells whether y can lie beyond 1073.15 K; a solution that ends
	// on that bound is checked against y(p, 1073.15 K) as well.
	T0 := backward(k, 2, p, y)
	if T0 < T25-0.5 {
		T, err := solveTreg(k, 2, p, y, Tlo, T25, T0)
		if err != nil || T < T25*(1-1e-12) {
			return phsResult{region: 2, T: T}, err
		}
	}
	y25 := val(k, 2, p, T25)
	if y <= y25 {
		T, err := solveTreg(k, 2, p, y, Tlo, T25, T0)
		return phsResult{region: 2, T: T}, err
	}
	if p > Pmax5 {
		return phsResult{}, thermo.Above(fluidName, q, unit, y, y25, "above 50 MPa IF97 ends at 1073.15 K")
	}
	ymax := val(k, 5, p, Tmax5)
	if y > ymax {
		return phsResult{}, thermo.Above(fluidName, q, unit, y, ymax, "IF97 ends at 2273.15 K")
	}
	T5 := T25 + (Tmax5-T25)*(y-y25)/(ymax-y25)
	T, err := solveTreg(k, 5, p, y, T25, Tmax5, T5)
	return phsResult{region: 5, T: T}, err
}

// stateOf builds the State of a solved (p, h) or (p, s) flash.
func stateOf(p float64, r phsResult) thermo.State {
	switch r.region {
	case 1:
		return single(region1(p, r.T), 1)
	case 2:
		return single(region2(p, r.T), 2)
	case 3:
		return single(r.pr, 3)
	case 4:
		return twoPhase(p, r.T, r.x, r.l, r.v)
	}
	return single(region5(p, r.T), 5)
}

// flashPH returns the state at p in Pa and h in J/kg.
func flashPH(p, h float64) (thermo.State, error) {
	r, err := solvePY(kindH, p, h)
	if err != nil {
		return thermo.State{}, err
	}
	return stateOf(p, r), nil
}

// flashPS returns the state at p in Pa and s in J/(kg·K).
func flashPS(p, s float64) (thermo.State, error) {
	r, err := solvePY(kindS, p, s)
	if err != nil {
		return thermo.State{}, err
	}
	return stateOf(p, r), nil
}

// TPH returns the temperature in K at p in Pa and h in J/kg, solved on
// the basic equations (Tsat inside the two-phase region).
func TPH(p, h float64) (float64, error) {
	if p-p != 0 || h-h != 0 { // NaN or ±Inf
		return 0, thermo.CheckFinite(fluidName, []string{"p", "h"}, p, h)
	}
	r, err := solvePY(kindH, p, h)
	return r.T, err
}

// TPS returns the temperature in K at p in Pa and s in J/(kg·K), solved
// on the basic equations (Tsat inside the two-phase region).
func TPS(p, s float64) (float64, error) {
	if p-p != 0 || s-s != 0 { // NaN or ±Inf
		return 0, thermo.CheckFinite(fluidName, []string{"p", "s"}, p, s)
	}
	r, err := solvePY(kindS, p, s)
	return r.T, err
}
