package if97

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// Region 3, IAPWS R7-97(2012) Section 6: the dimensionless Helmholtz free
// energy phi(delta, tau) = n1 ln(delta) + Σ n_i delta^I_i tau^J_i (Eq. 28),
// delta = rho/rhoc, tau = Tc/T; derivatives per Table 31, properties per
// Table 32.

// r3n1 is n1 of R7-97(2012) Table 30, the coefficient of ln(delta).
const r3n1 = 0.10658070028513e1

var region3Poly = compile(r3terms)

// r3sums holds the reduced Helmholtz sums at one (rho, T):
// f = phi, d = delta·phi_delta, dd = delta²·phi_deltadelta, t = tau·phi_tau,
// tt = tau²·phi_tautau, dt = delta·tau·phi_deltatau.
type r3sums struct{ f, d, dd, t, tt, dt float64 }

func region3Sums(rho, T float64) r3sums {
	delta := rho / Rhoc
	tau := Tc / T
	// Exponents of Table 30 span I = 0..11, J = 0..26: fixed small power
	// tables (the generic evaluator's are sized for every equation).
	var pa [r3nI]float64
	var pb [r3nJ]float64
	fillPow(pa[:], delta, 0)
	fillPow(pb[:], tau, 0)
	var g struct{ g, gi, gj, gii, gjj, gij float64 }
	for k := range region3Poly.t {
		t := &region3Poly.t[k]
		x := pa[t.i] * pb[t.j]
		g.g += t.n * x
		g.gi += t.ni * x
		g.gj += t.nj * x
		g.gii += t.nii * x
		g.gjj += t.njj * x
		g.gij += t.nij * x
	}
	return r3sums{
		f:  r3n1*math.Log(delta) + g.g,
		d:  r3n1 + g.gi,
		dd: -r3n1 + g.gii,
		t:  g.gj,
		tt: g.gjj,
		dt: g.gij,
	}
}

// Exponent ranges of R7-97(2012) Table 30 (checked in init).
const (
	r3nI = 12 // I = 0..11
	r3nJ = 27 // J = 0..26
)

func init() {
	if region3Poly.loI != 0 || region3Poly.loJ != 0 || region3Poly.nI != r3nI || region3Poly.nJ != r3nJ {
		panic("if97: region-3 exponent ranges differ from Table 30") // programming error, caught by every test
	}
}

// region3 evaluates the region-3 equation at density rho (kg/m3) and
// temperature T (K), R7-97(2012) Eq. 28 with Tables 30-32. No range checks.
func region3(rho, T float64) props {
	f := region3Sums(rho, T)
	RT := R * T
	a := f.d - f.dt // delta phi_delta - delta tau phi_deltatau
	b := 2*f.d + f.dd
	pr := props{
		p:  rho * RT * f.d,
		T:  T,
		v:  1 / rho,
		u:  RT * f.t,
		h:  RT * (f.t + f.d),
		s:  R * (f.t - f.f),
		cv: -R * f.tt,
	}
	pr.cp = pr.cv + R*a*a/b
	pr.w = sqrtPos(RT * (b - a*a/f.tt))
	return pr
}

// p3 returns the region-3 pressure (Pa) and its derivative with respect to
// density at constant T (Pa·m3/kg) at (rho, T).
func p3(rho, T float64) (p, dpdrho float64) {
	delta := rho / Rhoc
	tau := Tc / T
	var pa [r3nI]float64
	var pb [r3nJ]float64
	fillPow(pa[:], delta, 0)
	fillPow(pb[:], tau, 0)
	d, dd := r3n1, -r3n1
	for k := range region3Poly.t {
		t := &region3Poly.t[k]
		x := pa[t.i] * pb[t.j]
		d += t.ni * x
		dd += t.nii * x
	}
	RT := R * T
	return rho * RT * d, RT * (2*d + dd)
}

// r3jac holds a region-3 state and the partial derivatives a 2-D Newton
// iteration in (rho, T) needs.
type r3jac struct {
	p, h, s  float64
	pRho, pT float64 // ∂p/∂rho at T, ∂p/∂T at rho
	hRho, hT float64
	sRho, sT float64
}

func region3Jac(rho, T float64) r3jac {
	f := region3Sums(rho, T)
	RT := R * T
	var j r3jac
	j.p = rho * RT * f.d
	j.h = RT * (f.t + f.d)
	j.s = R * (f.t - f.f)
	// ∂(delta phi_d)/∂rho = (phi_d + delta phi_dd)/rhoc = (d + dd)/rho.
	j.pRho = RT * (2*f.d + f.dd)
	// ∂p/∂T = rho R (delta phi_d - delta tau phi_dt).
	j.pT = rho * R * (f.d - f.dt)
	// h = R T (tau phi_t + delta phi_d).
	j.hRho = RT * (f.dt + f.d + f.dd) / rho
	j.hT = R * (f.d - f.dt - f.tt)
	// s = R (tau phi_t - phi).
	j.sRho = R * (f.dt - f.d) / rho
	j.sT = -R * f.tt / T
	return j
}

// Limits of the region-3 solvers.
const (
	r3RhoMin = 1.0    // kg/m3, far below any region-3 density
	r3RhoMax = 1500.0 // kg/m3, far above any region-3 density
)

// rho3PT returns the density (kg/m3) in region 3 at p (Pa) and T (K). The
// SR5-05(2016) backward equation v(p,T) of the subregion that contains the
// state gives the starting value; Newton's method on p3(rho, T) = p then
// refines it until the relative pressure residual is below 1e-13 (so the
// density solves the forward equation to about 1e-12 relative or better).
// The root found is the one on the branch of the backward equation (liquid-
// like or vapour-like): every step must keep ∂p/∂rho > 0. An error wrapping
// thermo.ErrNoConvergence is returned if that fails; inputs outside region 3
// return an error wrapping thermo.ErrOutOfRange.
func rho3PT(p, T float64) (float64, error) {
	v, _, err := v3pt(p, T)
	if err != nil {
		return 0, err
	}
	return refineRho3(p, T, 1/v)
}

// refineRho3 solves p3(rho, T) = p by a safeguarded Newton iteration that
// starts at rho0 and stays on the stable branch through rho0.
func refineRho3(p, T, rho0 float64) (float64, error) {
	rho := rho0
	lo, hi := 0.0, math.Inf(1) // bracket on the branch, once known
	for it := 0; it < 60; it++ {
		pp, dp := p3(rho, T)
		if math.IsNaN(pp) || math.IsNaN(dp) {
			break
		}
		r := pp - p
		if math.Abs(r) <= 1e-13*p {
			if dp <= 0 {
				break // converged onto the unstable branch
			}
			return rho, nil
		}
		if r > 0 {
			hi = math.Min(hi, rho)
		} else {
			lo = math.Max(lo, rho)
		}
		var next float64
		if dp > 0 {
			next = rho - r/dp
		} else {
			next = math.NaN()
		}
		// Keep the step inside the bracket and within 10 % of rho.
		if !(next > lo && next < hi) || math.Abs(next-rho) > 0.1*rho {
			switch {
			case !math.IsInf(hi, 1) && lo > 0:
				next = 0.5 * (lo + hi)
			case r > 0:
				next = rho * 0.95
			default:
				next = rho * 1.05
			}
		}
		if math.Abs(next-rho) <= 1e-15*rho {
			if dp > 0 && math.Abs(r) <= 1e-11*p {
				return rho, nil
			}
			break
		}
		// A full Newton step this small on the stable branch leaves a
		// residual of second order (far below 1e-13): accept it without
		// another evaluation.
		if dp > 0 && math.Abs(next-rho) <= 1e-9*rho && next == rho-r/dp {
			return next, nil
		}
		rho = next
		if rho < r3RhoMin || rho > r3RhoMax {
			break
		}
	}
	return 0, fmt.Errorf("%s: region 3 density at p = %g Pa, T = %g K: %w", fluidName, p, T, thermo.ErrNoConvergence)
}

// newton3 is the 2-D Newton iteration in (rho, T) on p3(rho,T) = p and
// g(rho,T) = target, where g is h (useS false) or s (useS true). It stops
// when both relative residuals are below 1e-13 (or the step stalls with
// residuals below 1e-11).
func newton3(p, target float64, useS bool, rho, T float64) (float64, float64, error) {
	scale := math.Abs(target)
	if useS {
		scale = math.Max(scale, 1e3) // s near zero: compare with 1 kJ/(kg K)
	}
	for it := 0; it < 50; it++ {
		j := region3Jac(rho, T)
		g, gRho, gT := j.h, j.hRho, j.hT
		if useS {
			g, gRho, gT = j.s, j.sRho, j.sT
		}
		rp := j.p - p
		rg := g - target
		if math.IsNaN(rp) || math.IsNaN(rg) {
			break
		}
		if math.Abs(rp) <= 1e-13*p && math.Abs(rg) <= 1e-13*scale {
			return rho, T, nil
		}
		det := j.pRho*gT - j.pT*gRho
		if det == 0 || math.IsNaN(det) {
			break
		}
		dRho := (-rp*gT + rg*j.pT) / det
		dT := (-rg*j.pRho + rp*gRho) / det
		// Damp large steps: at most 10 % in rho and 20 K in T.
		f := 1.0
		if a := 0.1 * rho / math.Abs(dRho); a < f {
			f = a
		}
		if a := 20 / math.Abs(dT); a < f {
			f = a
		}
		dRho *= f
		dT *= f
		if math.Abs(dRho) <= 1e-15*rho && math.Abs(dT) <= 1e-15*T {
			if math.Abs(rp) <= 1e-11*p && math.Abs(rg) <= 1e-11*scale {
				return rho, T, nil
			}
			break
		}
		rho += dRho
		T += dT
		// A full Newton step this small leaves residuals of second order
		// (below 1e-18 relative): accept it without another evaluation.
		if f == 1 && math.Abs(dRho) <= 1e-10*rho && math.Abs(dT) <= 1e-10*T {
			return rho, T, nil
		}
		if rho < r3RhoMin || rho > r3RhoMax || T < 500 || T > 1200 {
			break
		}
	}
	what := "h"
	if useS {
		what = "s"
	}
	return 0, 0, fmt.Errorf("%s: region 3 state at p = %g Pa, %s = %g: %w", fluidName, p, what, target, thermo.ErrNoConvergence)
}

// region3PH returns density (kg/m3) and temperature (K) of the region-3
// state at p (Pa) and h (J/kg): start from the SR3-03(2014) backward
// equations T(p,h), v(p,h), then 2-D Newton on the forward equation. The
// caller has established that the state lies in region 3 and is single-
// phase (outside the saturation dome).
func region3PH(p, h float64) (rho, T float64, err error) {
	if err := thermo.CheckFinite(fluidName, []string{"p", "h"}, p, h); err != nil {
		return 0, 0, err
	}
	T0, v0 := t3ph(p, h), v3ph(p, h)
	if !(T0 > 0 && v0 > 0) || math.IsInf(T0, 0) || math.IsInf(v0, 0) {
		return 0, 0, fmt.Errorf("%s: region 3 backward start at p = %g Pa, h = %g J/kg: %w", fluidName, p, h, thermo.ErrNoConvergence)
	}
	return newton3(p, h, false, 1/v0, T0)
}

// region3PS is region3PH for (p, s), s in J/(kg·K), starting from the
// SR3-03(2014) backward equations T(p,s), v(p,s).
func region3PS(p, s float64) (rho, T float64, err error) {
	if err := thermo.CheckFinite(fluidName, []string{"p", "s"}, p, s); err != nil {
		return 0, 0, err
	}
	T0, v0 := t3ps(p, s), v3ps(p, s)
	if !(T0 > 0 && v0 > 0) || math.IsInf(T0, 0) || math.IsInf(v0, 0) {
		return 0, 0, fmt.Errorf("%s: region 3 backward start at p = %g Pa, s = %g J/(kg K): %w", fluidName, p, s, thermo.ErrNoConvergence)
	}
	return newton3(p, s, true, 1/v0, T0)
}
