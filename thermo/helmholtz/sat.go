package helmholtz

import (
	"errors"
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/internal/fastmath"
)

// satPoint is a vapour-liquid equilibrium state of the equation itself.
type satPoint struct {
	T, p       float64 // K, Pa
	rhoL, rhoV float64 // kg/m3
	dTdp       float64 // K/Pa, slope of the saturation line (Clausius-Clapeyron); 0 when not computed
}

// maxwell solves the phase equilibrium at T by the Maxwell criterion (equal
// pressure and equal Gibbs energy in both phases) with the Newton scheme of
// Akasaka, J. Therm. Sci. Technol. 3 (2008) 442-451, in the functions
// J = delta (1 + delta ar_d) and K = delta ar_d + ar + ln delta; rl0 and rv0
// (kg/m3) are starting densities (<= 0: from the ancillaries).
func (f *Fluid) maxwell(T, rl0, rv0 float64) (satPoint, error) {
	sp, err := f.maxwellCore(T, rl0, rv0)
	if err == nil || !errors.Is(err, thermo.ErrNoConvergence) || !(f.satRef.T > 0) || T <= f.satRef.T {
		return sp, err
	}
	// Near the critical point: march from the solution at 0.99 Tc towards
	// T, halving Tc - T per step, with starting densities from the scaling
	// law rho - rho_c ~ (Tc - T)^beta (beta fitted to the last two solutions,
	// 0.35 at first); a failed step is retried with a smaller one.
	cur, prev := f.satRef, satPoint{}
	for steps := 0; steps < 200; steps++ {
		dCur := f.tc - cur.T
		var next satPoint
		var err error
		for frac := 0.5; ; frac = math.Sqrt(frac) {
			dNext := max(dCur*frac, f.tc-T)
			Tn := f.tc - dNext
			if dNext == f.tc-T {
				Tn = T
			}
			beta := 0.35
			if prev.T > 0 {
				if b := math.Log((prev.rhoL-prev.rhoV)/(cur.rhoL-cur.rhoV)) / math.Log((f.tc-prev.T)/dCur); b > 0.2 && b < 0.6 {
					beta = b
				}
			}
			r := math.Pow(dNext/dCur, beta)
			mid := 0.5 * (cur.rhoL + cur.rhoV)
			rl := mid + (cur.rhoL-mid)*r
			rv := mid - (mid-cur.rhoV)*r
			next, err = f.maxwellCore(Tn, rl, rv)
			if err == nil || frac > 0.97 {
				break
			}
		}
		if err != nil {
			return satPoint{}, err
		}
		if next.T == T {
			return next, nil
		}
		prev, cur = cur, next
	}
	return satPoint{}, fmt.Errorf("%s: Maxwell construction at T = %g K: near-critical march did not reach T: %w", f.name, T, thermo.ErrNoConvergence)
}

// maxwellAt is maxwell(T, 0, 0) through the cache f.byT (a hit is exactly
// the solve's result: it depends on T only).
func (f *Fluid) maxwellAt(T float64) (satPoint, error) {
	if c := f.byT.findT(T); c != nil {
		return *c, nil
	}
	sp, err := f.maxwell(T, 0, 0)
	if err == nil {
		c := sp
		f.byT.push(&c)
	}
	return sp, err
}

func (f *Fluid) maxwellCore(T, rl0, rv0 float64) (satPoint, error) {
	if f.pseudoPure {
		return satPoint{}, fmt.Errorf("%s: pseudo-pure fluid has no Maxwell saturation (bubble and dew states differ): %w", f.name, thermo.ErrUnsupported)
	}
	if T < f.tmin {
		return satPoint{}, thermo.Below(f.name, "T", "K", T, f.tmin, "triple-point temperature of the equation")
	}
	if T >= f.tc {
		return satPoint{}, thermo.Above(f.name, "T", "K", T, f.tc, "no saturation at or above the critical temperature")
	}
	var tp tauPart
	f.q.tauPart(f.tr/T, &tp)
	if rl0 <= 0 || rv0 <= 0 {
		// Ancillaries at the corresponding temperature: they were fitted to
		// the default equation, whose critical temperature may differ
		// (ammonia-1993: 405.4 K against 405.56 K).
		rl0 = f.ancRL.eval(T*f.ancRL.tr/f.tc) * f.rhoc / f.ancRL.r
		rv0 = f.ancRV.eval(T*f.ancRV.tr/f.tc) * f.rhoc / f.ancRV.r
		if !(rl0 > rv0) {
			rl0, rv0 = 1.05*f.rhoc, 0.95*f.rhoc
		}
	}
	dL, dV := rl0/f.rhor, rv0/f.rhor
	for it := 0; it < 100; it++ {
		rL := f.q.residual(&tp, dL, false)
		rV := f.q.residual(&tp, dV, false)
		JL, JV := dL*(1+rL.D), dV*(1+rV.D)
		KL, KV := rL.D+rL.A+math.Log(dL), rV.D+rV.A+math.Log(dV)
		JdL, JdV := 1+2*rL.D+rL.DD, 1+2*rV.D+rV.DD
		KdL, KdV := (1+2*rL.D+rL.DD)/dL, (1+2*rV.D+rV.DD)/dV
		det := JdV*KdL - JdL*KdV
		if det == 0 || math.IsNaN(det) {
			break
		}
		stepL := ((KV-KL)*JdV - (JV-JL)*KdV) / det
		stepV := ((KV-KL)*JdL - (JV-JL)*KdL) / det
		// Damp steps that would cross or nearly merge the two phases (the
		// trivial solution dL = dV also satisfies both equations).
		g := 1.0
		gap := dL - dV
		for g > 1e-3 && (dL+g*stepL <= 0 || dV+g*stepV <= 0 || (dL+g*stepL)-(dV+g*stepV) < 0.5*gap ||
			math.Abs(g*stepV) > 0.5*dV) {
			g /= 2
		}
		dL += g * stepL
		dV += g * stepV
		// Newton converges quadratically: after a relative step of 1e-10
		// the error is far below rounding. (A tighter test stalls on the
		// rounding noise of J and K near the critical point.)
		if math.Abs(stepL) <= 1e-10*dL && math.Abs(stepV) <= 1e-10*dV {
			rL = f.q.residual(&tp, dL, false)
			rV = f.q.residual(&tp, dV, false)
			RT := f.r * T
			pL := dL * f.rhor * RT * (1 + rL.D)
			pV := dV * f.rhor * RT * (1 + rV.D)
			sp := satPoint{T: T, p: pV, rhoL: dL * f.rhor, rhoV: dV * f.rhor}
			if !(dL > dV*(1+1e-6)) || !(1+2*rL.D+rL.DD > 0) || !(1+2*rV.D+rV.DD > 0) ||
				!(pV > 0) || math.Abs(pL-pV) > 1e-8*pV+1e-12*dL*f.rhor*RT {
				return satPoint{}, fmt.Errorf("%s: Maxwell construction at T = %g K converged to a trivial or unstable solution: %w", f.name, T, thermo.ErrNoConvergence)
			}
			return sp, nil
		}
	}
	return satPoint{}, fmt.Errorf("%s: Maxwell construction at T = %g K did not converge: %w", f.name, T, thermo.ErrNoConvergence)
}

// satAtP finds the saturation temperature at p by Newton's method on ln p
// with the Clapeyron slope, each step a Maxwell solve.
func (f *Fluid) satAtP(p float64) (satPoint, error) { return f.satAtPc(p, true) }

// satAtPc is satAtP; store says whether to cache the result (one
// allocation) for the next call at the same p.
//
// Below 0.99 Tc the state comes from satAtPFast (one Newton iteration on
// T and both densities); where that declines, from the Maxwell solve with
// an outer iteration on T (satAtPSlow). Both meet the same tests.
func (f *Fluid) satAtPc(p float64, store bool) (satPoint, error) {
	if f.pseudoPure {
		return satPoint{}, fmt.Errorf("%s: pseudo-pure fluid has no Maxwell saturation: %w", f.name, thermo.ErrUnsupported)
	}
	if c := f.lastSatP.Load(); c != nil && c.p == p {
		return *c, nil
	}
	if c := f.prevSatP.find(p); c != nil {
		return *c, nil
	}
	if !(p > 0) {
		return satPoint{}, thermo.Below(f.name, "p", "Pa", p, 0, "pressure must be positive")
	}
	if p >= f.pc {
		return satPoint{}, thermo.Above(f.name, "p", "Pa", p, f.pc, "no saturation at or above the critical pressure")
	}
	if p < f.satTriple.p*(1-1e-12) {
		return satPoint{}, thermo.Below(f.name, "p", "Pa", p, f.satTriple.p, "saturation pressure at the triple-point temperature")
	}
	sp, ok := f.satAtPFast(p)
	if !ok {
		var err error
		if sp, err = f.satAtPSlow(p); err != nil {
			return satPoint{}, err
		}
	}
	if store {
		c := sp
		f.prevSatP.push(f.lastSatP.Swap(&c))
	}
	return sp, nil
}

// satAtPFast solves the saturation state at p (between the triple point
// and 0.99 Tc) by Newton's method on the three equations
//
//	J(tau, delta_L) = pi tau,  J(tau, delta_V) = pi tau,  K(tau, delta_L) = K(tau, delta_V)
//
// in (tau, delta_L, delta_V), with J = delta (1 + delta ar_d) = p/(rho_r R T),
// K = delta ar_d + ar + ln delta (g/(RT) less its common ideal-gas part, as
// in maxwell) and pi = p/(rho_r R T_r), and their analytic derivatives
// (J_tau = delta^2 ar_dt, K_tau = delta ar_dt + ar_t), starting from the
// ancillary temperature and densities. Each step costs one tau evaluation
// and two residual evaluations, where satAtPSlow runs a Maxwell iteration
// per temperature. The converged state must pass the tests of the slower
// path: |p_V - p| <= 1e-12 p, |p_L - p_V| within maxwell's bound, both
// phases mechanically stable and distinct, equal Gibbs energy to 1e-10 RT.
// ok is false otherwise (and near the critical point), and the caller
// falls back to satAtPSlow. The state carries dT/dp from Clausius-Clapeyron.
func (f *Fluid) satAtPFast(p float64) (satPoint, bool) {
	if !(f.satRef.T > 0) {
		return satPoint{}, false
	}
	T := f.ancTsatFast(p) * f.tc / f.ancP.tr // corresponding temperature for this equation's Tc
	if !(T > f.tmin && T < f.satRef.T) {
		return satPoint{}, false
	}
	rl := f.ancRL.eval(T*f.ancRL.tr/f.tc) * f.rhoc / f.ancRL.r
	rv := f.ancRV.eval(T*f.ancRV.tr/f.tc) * f.rhoc / f.ancRV.r
	if !(rl > rv && rv > 0) {
		return satPoint{}, false
	}
	tau, dL, dV := f.tr/T, rl/f.rhor, rv/f.rhor
	pi := p / (f.rhor * f.r * f.tr)
	var tp tauPart
	for it := 0; it < 40; it++ {
		f.q.tauPart(tau, &tp)
		rL := f.q.residual(&tp, dL, true)
		rV := f.q.residual(&tp, dV, true)
		JdL, JdV := 1+2*rL.D+rL.DD, 1+2*rV.D+rV.DD
		if !(JdL > 0 && JdV > 0) {
			return satPoint{}, false
		}
		G1 := dL*(1+rL.D) - pi*tau
		G2 := dV*(1+rV.D) - pi*tau
		G3 := (rL.D + rL.A + math.Log(dL)) - (rV.D + rV.A + math.Log(dV))
		a1 := dL*rL.DT/tau - pi
		a2 := dV*rV.DT/tau - pi
		a3 := ((rL.DT + rL.T) - (rV.DT + rV.T)) / tau
		den := a3 - a1/dL + a2/dV
		stT := (-G3 + G1/dL - G2/dV) / den
		stL := (-G1 - a1*stT) / JdL
		stV := (-G2 - a2*stT) / JdV
		if math.IsNaN(stT) || math.IsNaN(stL) || math.IsNaN(stV) || math.IsInf(stT, 0) {
			return satPoint{}, false
		}
		if math.Abs(stT) <= 1e-13*tau && math.Abs(stL) <= 1e-10*dL && math.Abs(stV) <= 1e-10*dV {
			// Quadratic convergence: after these steps the error is far
			// below rounding. The final state is evaluated and tested.
			tau, dL, dV = tau+stT, dL+stL, dV+stV
			return f.satFastCheck(p, tau, dL, dV)
		}
		// Damp steps that would cross or nearly merge the phases (the
		// trivial solution dL = dV) or move T by more than 2 %.
		g := 1.0
		gap := dL - dV
		for g > 1e-3 && (dL+g*stL <= 0 || dV+g*stV <= 0 || (dL+g*stL)-(dV+g*stV) < 0.5*gap ||
			math.Abs(g*stV) > 0.5*dV || math.Abs(g*stT) > 0.02*tau) {
			g /= 2
		}
		if g <= 1e-3 {
			return satPoint{}, false
		}
		tau, dL, dV = tau+g*stT, dL+g*stL, dV+g*stV
	}
	return satPoint{}, false
}

// satFastCheck evaluates and tests the converged state of satAtPFast.
func (f *Fluid) satFastCheck(p, tau, dL, dV float64) (satPoint, bool) {
	T := f.tr / tau
	if !(T > f.tmin && T < f.tc) {
		return satPoint{}, false
	}
	var tp tauPart
	f.q.tauPart(tau, &tp)
	rL := f.q.residual(&tp, dL, true)
	rV := f.q.residual(&tp, dV, true)
	RT := f.r * T
	pL := dL * f.rhor * RT * (1 + rL.D)
	pV := dV * f.rhor * RT * (1 + rV.D)
	gL := rL.D + rL.A + math.Log(dL)
	gV := rV.D + rV.A + math.Log(dV)
	if !(dL > dV*(1+1e-6)) || !(1+2*rL.D+rL.DD > 0) || !(1+2*rV.D+rV.DD > 0) || !(pV > 0) ||
		math.Abs(pV-p) > 1e-12*p || math.Abs(pL-pV) > 1e-8*pV+1e-12*dL*f.rhor*RT || math.Abs(gL-gV) > 1e-10 {
		return satPoint{}, false
	}
	sp := satPoint{T: T, p: p, rhoL: dL * f.rhor, rhoV: dV * f.rhor}
	sp.dTdp = clapeyronSlope(T, RT, sp.rhoL, sp.rhoV, &rL, &rV)
	return sp, true
}

// clapeyronSlope is dT/dp along the saturation line at T (RT = R T) with
// saturated densities rhoL, rhoV and their residual parts: Clausius-Clapeyron,
// dT/dp = T (v” - v')/(h” - h'), where h” - h' = RT ((tau ar_t + delta
// ar_d)” - (...)') as the ideal-gas part is common to both phases.
func clapeyronSlope(T, RT, rhoL, rhoV float64, rL, rV *resid) float64 {
	dh := RT * ((rV.T + rV.D) - (rL.T + rL.D))
	return T * (1/rhoV - 1/rhoL) / dh
}

// satSlope returns sp with dTdp filled in (Clausius-Clapeyron).
func (f *Fluid) satSlope(sp satPoint) satPoint {
	if sp.dTdp != 0 {
		return sp
	}
	var tp tauPart
	f.q.tauPart(f.tr/sp.T, &tp)
	rL := f.q.residual(&tp, sp.rhoL/f.rhor, true)
	rV := f.q.residual(&tp, sp.rhoV/f.rhor, true)
	sp.dTdp = clapeyronSlope(sp.T, f.r*sp.T, sp.rhoL, sp.rhoV, &rL, &rV)
	return sp
}

// satAtPSlow finds the saturation temperature at p by Newton's method on
// ln p with the Clapeyron slope, each step a Maxwell solve (with its
// near-critical march).
func (f *Fluid) satAtPSlow(p float64) (satPoint, error) {
	T := f.ancTsat(p) * f.tc / f.ancP.tr // corresponding temperature for this equation's Tc
	lo, hi := f.tmin, f.tc
	if !(T > lo && T < hi) {
		T = 0.5 * (lo + hi)
	}
	rl, rv := 0.0, 0.0
	for it := 0; it < 80; it++ {
		sp, err := f.maxwell(T, rl, rv)
		if err != nil {
			if sp, err = f.maxwell(T, 0, 0); err != nil {
				// Too close to the critical point for the Maxwell solve:
				// the answer lies lower if p is not within rounding of pc.
				if errors.Is(err, thermo.ErrNoConvergence) && T > f.satRef.T && f.satRef.T > 0 {
					hi = T
					T = 0.5 * (lo + hi)
					rl, rv = 0, 0
					continue
				}
				return satPoint{}, err
			}
		}
		rl, rv = sp.rhoL, sp.rhoV
		if sp.p > p {
			hi = T
		} else {
			lo = T
		}
		if math.Abs(sp.p-p) <= 1e-12*p {
			sp.p = p
			return sp, nil
		}
		// Clapeyron: dp/dT = (sV - sL)/(vV - vL).
		var tp tauPart
		f.q.tauPart(f.tr/T, &tp)
		rL := f.q.residual(&tp, rl/f.rhor, true)
		rV := f.q.residual(&tp, rv/f.rhor, true)
		ds := f.r * ((rV.T - rL.T) - math.Log(rv/rl) - (rV.A - rL.A))
		dpdT := ds / (1/rv - 1/rl)
		Tn := T - (sp.p-p)/dpdT
		if !(Tn > lo && Tn < hi) || math.IsNaN(Tn) {
			Tn = 0.5 * (lo + hi)
		}
		if math.Abs(Tn-T) <= 1e-13*T {
			if math.Abs(sp.p-p) <= 1e-10*p {
				sp.p = p
				return sp, nil
			}
		}
		T = Tn
	}
	return satPoint{}, fmt.Errorf("%s: saturation temperature at p = %g Pa did not converge: %w", f.name, p, thermo.ErrNoConvergence)
}

// ancTsat inverts the saturation-pressure ancillary (starting value only).
func (f *Fluid) ancTsat(p float64) float64 {
	T, _ := f.ancInvert(&f.ancP, p)
	return T
}

// ancTsatFast is ancTsat by Newton's method in 1/T on ln p with the
// analytic slope of the ancillary (one evaluation per step instead of
// three), safeguarded by bisection; when it fails it returns ancTsat(p).
// It is only a starting value.
func (f *Fluid) ancTsatFast(p float64) float64 {
	a := &f.ancP
	lo, hi := f.tmin, math.Min(f.tc, a.tr)*(1-1e-9)
	lp := math.Log(p)
	vlo, vhi := f.ancLnLo, f.ancLnHi // a.lnEval at lo and hi
	if !(vlo < lp && lp < vhi) {
		return f.ancTsat(p) // outside the ancillary's range: its nearer end
	}
	// ln p is nearly linear in 1/T: interpolate for the start.
	x := 1/lo + (lp-vlo)/(vhi-vlo)*(1/hi-1/lo)
	T := 1 / x
	for it := 0; it < 50; it++ {
		v, d := a.lnEval(T)
		v -= lp
		if v > 0 {
			hi = T
		} else {
			lo = T
		}
		// d ln p/d(1/T) = -T^2 d ln p/dT
		Tn := 1 / (1/T + v/(T*T*d))
		if math.Abs(Tn-T) < 1e-12*T {
			return Tn
		}
		if !(Tn > lo && Tn < hi) {
			Tn = 0.5 * (lo + hi)
		}
		T = Tn
	}
	return f.ancTsat(p)
}

// lnEval returns ln a.eval(T) and its derivative with respect to T.
func (a *ancillary) lnEval(T float64) (v, dvdT float64) {
	th := 1 - T/a.tr
	var s, ds float64 // sum n theta^t and d/dT of it
	if th > 0 {
		lth := math.Log(th)
		for i, n := range a.n {
			w := n * fastmath.Exp(a.t[i]*lth)
			s += w
			ds += w * a.t[i]
		}
		ds /= -th * a.tr
	}
	switch a.kind {
	case 0:
		return math.Log(a.r * (1 + s)), ds / (1 + s)
	case 1:
		return math.Log(a.r) + a.tr/T*s, a.tr / T * (ds - s/T)
	default:
		return math.Log(a.r) + s, ds
	}
}

// ancInvert solves a.eval(T) = p for T in [T_min, min(Tc, a.tr)] (Newton on
// ln p with a numerical slope, safeguarded by bisection). ok is false when
// p lies outside the ancillary's range there (T is then the nearer end).
func (f *Fluid) ancInvert(a *ancillary, p float64) (T float64, ok bool) {
	lo, hi := f.tmin, math.Min(f.tc, a.tr)*(1-1e-9)
	lp := math.Log(p)
	if math.Log(a.eval(lo)) > lp {
		return lo, false
	}
	if math.Log(a.eval(hi)) < lp {
		return hi, false
	}
	T = 0.5 * (lo + hi)
	for it := 0; it < 100; it++ {
		v := math.Log(a.eval(T)) - lp
		if v > 0 {
			hi = T
		} else {
			lo = T
		}
		h := 1e-6 * T
		d := (math.Log(a.eval(T+h)) - math.Log(a.eval(T-h))) / (2 * h)
		Tn := T - v/d
		if !(Tn > lo && Tn < hi) {
			Tn = 0.5 * (lo + hi)
		}
		if math.Abs(Tn-T) < 1e-12*T {
			return Tn, true
		}
		T = Tn
	}
	return T, true
}

// SatP returns the saturation pressure in Pa at T in K (Maxwell criterion
// on the equation itself). Pseudo-pure air returns ErrUnsupported.
func (f *Fluid) SatP(T float64) (float64, error) {
	if err := thermo.CheckFinite(f.name, []string{"T"}, T); err != nil {
		return 0, err
	}
	sp, err := f.maxwellAt(T)
	if err != nil {
		return 0, err
	}
	return sp.p, nil
}

// SatT returns the saturation temperature in K at p in Pa. Pseudo-pure
// air returns ErrUnsupported.
func (f *Fluid) SatT(p float64) (float64, error) {
	if err := thermo.CheckFinite(f.name, []string{"p"}, p); err != nil {
		return 0, err
	}
	sp, err := f.satAtP(p)
	if err != nil {
		return 0, err
	}
	return sp.T, nil
}

// SatTSlope returns the saturation temperature T in K at p in Pa and the
// slope of the saturation line dT/dp in K/Pa from Clausius-Clapeyron,
// dT/dp = T (v” - v')/(h” - h'), with the saturated states of the same
// solution (exact for the equation, no difference quotient). Errors as
// SatT; pseudo-pure air returns ErrUnsupported.
func (f *Fluid) SatTSlope(p float64) (T, dTdp float64, err error) {
	if err := thermo.CheckFinite(f.name, []string{"p"}, p); err != nil {
		return 0, 0, err
	}
	sp, err := f.satAtP(p)
	if err != nil {
		return 0, 0, err
	}
	sp = f.satSlope(sp)
	return sp.T, sp.dTdp, nil
}

// Saturated returns the saturated liquid and vapour states at T in K.
func (f *Fluid) Saturated(T float64) (liquid, vapour thermo.State, err error) {
	if err = thermo.CheckFinite(f.name, []string{"T"}, T); err != nil {
		return
	}
	sp, err := f.maxwellAt(T)
	if err != nil {
		return
	}
	liquid, vapour = f.satStates(sp)
	return
}

// satStates evaluates both saturated phases.
func (f *Fluid) satStates(sp satPoint) (liquid, vapour thermo.State) {
	var tp tauPart
	f.q.tauPart(f.tr/sp.T, &tp)
	i := f.q.ideal(tp.tau)
	liquid, _ = f.propsRI(&tp, sp.T, sp.rhoL, f.q.residual(&tp, sp.rhoL/f.rhor, true), i)
	vapour, _ = f.propsRI(&tp, sp.T, sp.rhoV, f.q.residual(&tp, sp.rhoV/f.rhor, true), i)
	liquid.P, vapour.P = sp.p, sp.p
	liquid.Phase, vapour.Phase = thermo.PhaseLiquid, thermo.PhaseVapour
	return
}
