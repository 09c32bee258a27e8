package helmholtz

import (
	"errors"
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// satPoint is a vapour-liquid equilibrium state of the equation itself.
type satPoint struct {
	T, p       float64 // K, Pa
	rhoL, rhoV float64 // kg/m3
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
func (f *Fluid) satAtPc(p float64, store bool) (satPoint, error) {
	if f.pseudoPure {
		return satPoint{}, fmt.Errorf("%s: pseudo-pure fluid has no Maxwell saturation: %w", f.name, thermo.ErrUnsupported)
	}
	if c := f.lastSatP.Load(); c != nil && c.p == p {
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
			if store {
				c := sp
				f.lastSatP.Store(&c)
			}
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
				if store {
					c := sp
					f.lastSatP.Store(&c)
				}
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
	sp, err := f.maxwell(T, 0, 0)
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

// Saturated returns the saturated liquid and vapour states at T in K.
func (f *Fluid) Saturated(T float64) (liquid, vapour thermo.State, err error) {
	if err = thermo.CheckFinite(f.name, []string{"T"}, T); err != nil {
		return
	}
	sp, err := f.maxwell(T, 0, 0)
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
