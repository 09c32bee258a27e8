package gerg2008

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// Plausibility bounds on the gas root, documented on Mixture.Flash.
const (
	zMin         = 0.05 // a gas root with Z below this is rejected as liquid-like or spurious
	zMax         = 20.0 // ... and above this as spurious
	deltaMax     = 6    // no root is sought above 6 times the reducing density
	scanFromDelt = 0.2  // roots denser than this get the stability scan below them
	scanPoints   = 8    // points of the scan (k/scanPoints of the root density)
)

// density solves p(T, D) = p for the gas (vapour-like) root. p is in kPa,
// T is held in tc; the result is in mol/dm3.
//
// Newton's method in ln D (with Halley's correction, see densitySolve)
// starts from the truncated virial equation
// Z = 1 + B D (or the ideal gas D = p/(RT) if that has no root) and is kept
// inside a bracket [lo, hi]: points with f = p(D) - p < 0 and dp/dD > 0 raise
// lo; points with f > 0, or with dp/dD <= 0 (mechanically unstable: the gas
// root lies at a lower density), lower hi; a step leaving the bracket is
// replaced by a geometric bisection. The converged root is then checked:
// dp/dD > 0, Z within [zMin, zMax], dp/dD > 0 at scanPoints densities
// between 0 and the root (so no unstable loop lies below it, i.e. it is on the
// gas branch, not a liquid root reached across the loop; skipped above the
// mixture's loop-free temperature tLoop, see loopFreeTemperature), and not liquid-like
// (T below the reducing temperature with the density above the reducing
// density). A failed check is an error wrapping thermo.ErrPhase.
//
// D0 > 0 is a starting value (a nearby root, for warm starts).
func (m *Mixture) density(tc *tauCache, p, D0 float64) (float64, error) {
	D, err := m.densitySolve(tc, p, D0)
	if err != nil {
		return 0, err
	}
	P, dPdD := m.pressure(tc, D)
	if err := m.checkRoot(tc, p, D, P, dPdD); err != nil {
		return 0, err
	}
	return D, nil
}

// densitySolve is the iteration of density, without the checks of the
// converged root (checkRoot), which need p and dp/dD at the root: a caller
// that evaluates the residual part there anyway takes them from it.
//
// The steps are Halley's in ln D (d2p/dD2 from the third delta derivative)
// when its correction to the Newton step is moderate, Newton's otherwise;
// the convergence test is on the size of the step, as before.
func (m *Mixture) densitySolve(tc *tauCache, p, D0 float64) (float64, error) {
	T := tc.T
	RT := m.rgas * T
	D := p / RT
	if q := 1 + 4*tc.B*D; tc.B != 0 && q > 0 {
		// Truncated virial equation Z = 1 + B D: a better start than the
		// ideal gas at moderate pressure; the iteration below does the rest.
		D = 2 * D / (1 + math.Sqrt(q))
	}
	if D0 > 0 && D0 < deltaMax*m.dr {
		D = D0
	}
	lo, hi := 0.0, deltaMax*m.dr
	if D >= hi { // far above any gas density (e.g. 70 MPa at 60 K): start inside the bracket
		D = 0.5 * hi
	}
	unstableHi := false // hi was set by a mechanically unstable point
	for it := 0; it < 200; it++ {
		P, dPdD, d2P := m.pressure3(tc, D, true)
		if !(dPdD > 0) || math.IsNaN(P) {
			hi, unstableHi = D, true
		} else {
			f := P - p
			if f < 0 {
				lo = D
			} else {
				hi, unstableHi = D, false
			}
			g1 := D * dPdD
			step := -f / g1 // Newton step in ln D
			if math.Abs(step) < 1e-10 {
				D *= math.Exp(step) // quadratic convergence: the applied step leaves ~1e-20
				return D, nil
			}
			// Halley in y = ln D: g' = D p', g'' = D p' + D^2 p''.
			if c := 1 + 0.5*step*(g1+D*D*d2P)/g1; c >= 0.5 && c <= 2 {
				step /= c
			}
			step = math.Max(-1, math.Min(1, step))
			if Dn := D * math.Exp(step); Dn > lo && Dn < hi {
				D = Dn
				continue
			}
		}
		if hi-lo <= 1e-14*hi {
			break
		}
		if lo > 0 {
			D = math.Sqrt(lo * hi)
		} else {
			D = hi / 2
		}
	}
	if unstableHi || hi-lo <= 1e-14*hi {
		return 0, fmt.Errorf("%s: no gas root at T = %g K, p = %g Pa: the pressure exceeds the gas branch of the isotherm (liquid or two-phase): %w",
			m.name, T, 1000*p, thermo.ErrPhase)
	}
	return 0, fmt.Errorf("%s: density at T = %g K, p = %g Pa: %w", m.name, T, 1000*p, thermo.ErrNoConvergence)
}

// checkRoot checks a converged density D (mol/dm3) at T (in tc) and target
// p in kPa, given P = p(T, D) in kPa and dP/dD there: see density.
func (m *Mixture) checkRoot(tc *tauCache, p, D, P, dPdD float64) error {
	T := tc.T
	RT := m.rgas * T
	Z := P / (D * RT)
	if !(dPdD > 0) || math.Abs(P-p) > 1e-9*p {
		return fmt.Errorf("%s: density root at T = %g K, p = %g Pa is not a stable solution (dp/drho = %g): %w",
			m.name, T, 1000*p, dPdD, thermo.ErrPhase)
	}
	if !(Z >= zMin && Z <= zMax) {
		return fmt.Errorf("%s: density root at T = %g K, p = %g Pa has Z = %g against the ideal gas, outside [%g, %g]: %w",
			m.name, T, 1000*p, Z, zMin, zMax, thermo.ErrPhase)
	}
	delta := D / m.dr
	if delta > scanFromDelt && T <= m.tLoop {
		for k := 1; k < scanPoints; k++ {
			if _, d := m.pressure(tc, D*float64(k)/scanPoints); !(d > 0) {
				return fmt.Errorf("%s: at T = %g K, p = %g Pa the only root found (%g kg/m3) lies beyond an unstable part of the isotherm (liquid side): %w",
					m.name, T, 1000*p, D*m.mg, thermo.ErrPhase)
			}
		}
	}
	if T < m.tLiq && D > m.dLiq {
		return fmt.Errorf("%s: T = %g K, p = %g Pa gives a liquid-like state (T below the pseudo-critical %.2f K, density %g kg/m3 above the pseudo-critical %g kg/m3): %w",
			m.name, T, 1000*p, m.tLiq, D*m.mg, m.dLiq*m.mg, thermo.ErrPhase)
	}
	return nil
}

// hasLoop reports whether the isotherm T has a mechanically unstable part
// (dp/dD <= 0) at reduced densities 0.05, 0.10, ... up to deltaMax.
func (m *Mixture) hasLoop(T float64) bool {
	var tc tauCache
	m.setTau(&tc, T)
	for k := 1; float64(k)*0.05 <= deltaMax; k++ {
		if _, d := m.pressure(&tc, m.dr*float64(k)*0.05); !(d > 0) {
			return true
		}
	}
	return false
}

// loopFreeTemperature returns a temperature above which the mixture's
// isotherms have no unstable part on the scanned grid, so that the gas-branch
// scan of density can be skipped: the boundary found by bisection between
// TMin and TMax, raised by 5 % and 5 K, after checking 10 temperatures above
// it (if any of them has a loop, or TMax has one, the result is +Inf: always
// scan). It costs about a millisecond, once per mixture.
func (m *Mixture) loopFreeTemperature() float64 {
	if m.hasLoop(m.tMax) {
		return math.Inf(1)
	}
	if !m.hasLoop(m.tMin) {
		lo := m.tMin
		for k := 1; k <= 10; k++ {
			if m.hasLoop(lo + (m.tMax-lo)*float64(k)/11) {
				return math.Inf(1)
			}
		}
		return m.tMin
	}
	lo, hi := m.tMin, m.tMax // loop at lo, none at hi
	for hi-lo > 0.5 {
		mid := 0.5 * (lo + hi)
		if m.hasLoop(mid) {
			lo = mid
		} else {
			hi = mid
		}
	}
	t := math.Min(m.tMax, 1.05*hi+5)
	for k := 1; k <= 10; k++ {
		if m.hasLoop(hi + (m.tMax-hi)*float64(k)/11) {
			return math.Inf(1)
		}
	}
	return t
}
