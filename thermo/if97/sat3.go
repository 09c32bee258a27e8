package if97

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// sat3TcGap is how close to the critical temperature sat3 works: for
// Tc - T < sat3TcGap it returns an error wrapping thermo.ErrNoConvergence.
// At Tc - 1e-4 K the two densities (323.02 and 321.19 kg/m3) are still
// found reliably; from about Tc - 5e-5 K on, p3(rho, T) = psat(T) has a
// single root: the region-3 equation (Eq. 28) and the saturation-pressure
// equation (Eq. 30) are not consistent closely enough there to give two
// phases (measured on this implementation; psat then differs from pc by
// less than 30 Pa).
const sat3TcGap = 1e-4 // K

// sat3 returns the saturated-liquid and saturated-vapour densities (kg/m3)
// at T (K) for 623.15 K <= T <= Tc - sat3TcGap, and rhoc for both at the
// critical temperature itself (Tc - 1e-9 K <= T <= Tc). In between it
// returns an error wrapping thermo.ErrNoConvergence (see sat3TcGap). Away
// from Tc the densities are the two outer roots of
// p3(rho, T) = psat(T), R7-97(2012) Eq. 28 and Eq. 30 (the IF97 definition
// of saturated states in region 3; the phase-equilibrium condition is not
// imposed). Starting values come from the SR5-05(2016) subregion equations
// of the saturation lines; each root is refined by a safeguarded Newton
// iteration that keeps ∂p/∂rho > 0 (the stable branch).
func sat3(T float64) (rhoL, rhoV float64, err error) {
	if err := thermo.CheckFinite(fluidName, []string{"T"}, T); err != nil {
		return 0, 0, err
	}
	if T < T13 {
		return 0, 0, thermo.Below(fluidName, "T", "K", T, T13, "saturated states lie in region 3 from 623.15 K")
	}
	if T > Tc-sat3TcGap {
		if T <= Tc && T >= Tc-1e-9 {
			// The critical point itself (to 1e-9 K, where psat differs from
			// pc by less than 1 mPa): both phases are the critical state,
			// rho = rhoc (R7-97(2012) Eq. 2c), which region 3 reproduces.
			return Rhoc, Rhoc, nil
		}
		if T > Tc {
			return 0, 0, thermo.Above(fluidName, "T", "K", T, Tc, "no saturated states above the critical temperature")
		}
		return 0, 0, fmt.Errorf("%s: T = %.6f K is within %g K of the critical temperature, where the region-3 saturated densities are not separated: %w",
			fluidName, T, sat3TcGap, thermo.ErrNoConvergence)
	}
	ps := psat(T)
	rhoL, errL := sat3Root(ps, T, 1/v3sat(ps, T, false), true)
	rhoV, errV := sat3Root(ps, T, 1/v3sat(ps, T, true), false)
	if errL != nil || errV != nil || !(rhoL > Rhoc && rhoV < Rhoc) {
		return 0, 0, fmt.Errorf("%s: region 3 saturated densities at T = %g K (psat = %g Pa): %w", fluidName, T, ps, thermo.ErrNoConvergence)
	}
	return rhoL, rhoV, nil
}

// sat3Root finds the liquid (liquid true: the largest) or vapour (the
// smallest) root of p3(rho, T) = p, starting at rho0. Newton steps that
// would leave the stable branch are replaced by bisection inside a bracket
// kept on the branch's side of the critical density.
func sat3Root(p, T, rho0 float64, liquid bool) (float64, error) {
	// Bracket: the liquid root lies in (Rhoc, r3RhoMax) above every other
	// root, so p3 - p < 0 just below it and > 0 above it; the vapour root
	// lies in (r3RhoMin, Rhoc) with p3 - p < 0 below it.
	lo, hi := Rhoc, r3RhoMax
	if !liquid {
		lo, hi = r3RhoMin, Rhoc
	}
	rho := rho0
	if !(rho > lo && rho < hi) {
		rho = 0.5 * (lo + hi)
	}
	for it := 0; it < 100; it++ {
		pp, dp := p3(rho, T)
		if math.IsNaN(pp) {
			break
		}
		r := pp - p
		if math.Abs(r) <= 1e-13*p && dp > 0 {
			return rho, nil
		}
		// Update the bracket. For the liquid, a point with r > 0 lies above
		// the root; a point with r < 0 and dp > 0 lies below it only on the
		// stable branch, which a negative slope rules out: there we move up.
		if liquid {
			if r > 0 && dp > 0 {
				hi = rho
			} else {
				lo = rho
			}
		} else {
			if r < 0 && dp > 0 {
				lo = rho
			} else {
				hi = rho
			}
		}
		next := math.NaN()
		if dp > 0 {
			next = rho - r/dp
		}
		if !(next > lo && next < hi) {
			next = 0.5 * (lo + hi)
		}
		if hi-lo <= 1e-14*rho || math.Abs(next-rho) <= 1e-15*rho {
			if math.Abs(r) <= 1e-11*p && dp > 0 {
				return rho, nil
			}
			break
		}
		rho = next
	}
	return 0, fmt.Errorf("%s: saturated density at T = %g K: %w", fluidName, T, thermo.ErrNoConvergence)
}
