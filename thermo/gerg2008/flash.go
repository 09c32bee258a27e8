package gerg2008

import (
	"errors"
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// Name is the config name of the natural-gas model.
const Name = "natural-gas"

// Validity range. Kunz & Wagner (2012), abstract, and ISO 20765-2: the normal
// range is 90-450 K at p <= 35 MPa; the extended range, which this package
// accepts, is 60-700 K at p <= 70 MPa. Outside it Flash returns a
// *thermo.RangeError; InNormalRange tells whether a state is in the normal range.
const (
	TMin       = 60.0  // K, extended range
	TMax       = 700.0 // K, extended range
	PMax       = 70e6  // Pa, extended range
	TMinNormal = 90.0  // K
	TMaxNormal = 450.0 // K
	PMaxNormal = 35e6  // Pa
)

var _ thermo.Fluid = (*Mixture)(nil)

// Name returns "natural-gas".
func (m *Mixture) Name() string { return m.name }

// InNormalRange reports whether p in Pa and T in K lie in the normal range of
// GERG-2008 (90-450 K, p <= 35 MPa), where its stated uncertainty in gas
// density is 0.1 %.
func InNormalRange(p, T float64) bool {
	return T >= TMinNormal && T <= TMaxNormal && p > 0 && p <= PMaxNormal
}

func (m *Mixture) checkPT(p, T float64) error {
	if err := thermo.CheckFinite(m.name, []string{"p", "T"}, p, T); err != nil {
		return err
	}
	switch {
	case !(p > 0):
		return thermo.Below(m.name, "p", "Pa", p, 0, "pressure must be positive")
	case p > m.pMax:
		return thermo.Above(m.name, "p", "Pa", p, m.pMax, m.rangeCtx)
	case T < m.tMin:
		return thermo.Below(m.name, "T", "K", T, m.tMin, m.rangeCtx)
	case T > m.tMax:
		return thermo.Above(m.name, "T", "K", T, m.tMax, m.rangeCtx)
	}
	return nil
}

// PropertiesPT returns every property of the gas at pressure p in Pa and
// temperature T in K, in molar SI units. Errors are as for Flash.
func (m *Mixture) PropertiesPT(p, T float64) (Properties, error) {
	return m.propertiesPT(p, T, 0)
}

// propertiesPT is PropertiesPT with a starting density D0 in mol/m3 (0: ideal gas).
func (m *Mixture) propertiesPT(p, T, D0 float64) (Properties, error) {
	if err := m.checkPT(p, T); err != nil {
		return Properties{}, err
	}
	var tc tauCache
	m.setTau(&tc, T)
	pk := p / 1000
	D, err := m.densitySolve(&tc, pk, D0/1000)
	if err != nil {
		return Properties{}, err
	}
	// The residual part at the root gives both the checks of density and
	// the properties.
	r := m.residual(&tc, D/m.dr)
	RT := m.rgas * T
	if err := m.checkRoot(&tc, pk, D, D*RT*(1+r.d), RT*(1+2*r.d+r.dd)); err != nil {
		return Properties{}, err
	}
	pr := m.propsR(&tc, D, r)
	if !finiteProps(&pr) {
		return Properties{}, fmt.Errorf("%s: non-finite property at T = %g K, p = %g Pa: %w", m.name, T, p, thermo.ErrNoConvergence)
	}
	pr.P = p // equal to p(T, D) within 1e-9 relative (density checks this); report the input exactly
	return pr, nil
}

// PropertiesTD returns every property at temperature T in K and molar
// density D in mol/m3, with no phase check (the equation is explicit in T and
// D; inside the two-phase region the result is the equation's
// single-phase continuation, not a physical state). T must be in 60-700 K and
// D positive and at most 6 times the reducing density.
func (m *Mixture) PropertiesTD(T, D float64) (Properties, error) {
	if err := thermo.CheckFinite(m.name, []string{"T", "rho"}, T, D); err != nil {
		return Properties{}, err
	}
	switch {
	case T < m.tMin:
		return Properties{}, thermo.Below(m.name, "T", "K", T, m.tMin, m.rangeCtx)
	case T > m.tMax:
		return Properties{}, thermo.Above(m.name, "T", "K", T, m.tMax, m.rangeCtx)
	case !(D > 0):
		return Properties{}, thermo.Below(m.name, "rho", "mol/m3", D, 0, "")
	case D > deltaMax*m.dr*1000:
		return Properties{}, thermo.Above(m.name, "rho", "mol/m3", D, deltaMax*m.dr*1000, "6 times the reducing density")
	}
	var tc tauCache
	m.setTau(&tc, T)
	pr := m.props(&tc, D/1000)
	if !finiteProps(&pr) {
		return Properties{}, fmt.Errorf("%s: non-finite property at T = %g K, D = %g mol/m3: %w", m.name, T, D, thermo.ErrNoConvergence)
	}
	return pr, nil
}

func finiteProps(p *Properties) bool {
	for _, v := range [...]float64{p.P, p.D, p.Z, p.DPDD, p.D2PDD2, p.DPDT, p.U, p.H, p.S, p.G, p.Cv, p.Cp, p.W, p.JT, p.Kappa} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return p.Cv > 0 && p.Cp > 0 && p.W > 0
}

// Z returns the compressibility factor p/(rho R T) at p in Pa and T in K.
func (m *Mixture) Z(p, T float64) (float64, error) {
	pr, err := m.PropertiesPT(p, T)
	if err != nil {
		return 0, err
	}
	return pr.Z, nil
}

// state converts molar properties into a thermo.State (per kg).
func (m *Mixture) state(pr *Properties) (thermo.State, error) {
	if m.checkStability {
		stable, err := m.Stable(pr.P, pr.T)
		if err != nil {
			return thermo.State{}, err
		}
		if !stable {
			return thermo.State{}, fmt.Errorf("%s: the gas at T = %g K, p = %g Pa is unstable and splits into two phases (tangent-plane test; inside the phase envelope): %w",
				m.name, pr.T, pr.P, thermo.ErrPhase)
		}
	}
	M := pr.M
	s := thermo.State{
		P:              pr.P,
		T:              pr.T,
		Rho:            pr.D * M,
		V:              1 / (pr.D * M),
		U:              pr.U / M,
		H:              pr.H / M,
		S:              pr.S / M,
		Cp:             pr.Cp / M,
		Cv:             pr.Cv / M,
		W:              pr.W,
		HasDerivatives: true,
		Phase:          thermo.PhaseGas,
	}
	if !s.Finite() {
		return thermo.State{}, fmt.Errorf("%s: non-finite state at T = %g K, p = %g Pa: %w", m.name, pr.T, pr.P, thermo.ErrNoConvergence)
	}
	return s, nil
}

// Flash returns the gas state fixed by (p, T), (p, h) or (p, s) in SI units
// (Pa, K, J/kg, J/(kg K)); h and s follow GERG-2008's ideal-gas reference
// state (h = 0 at 298.15 K, s = 0 at 298.15 K and 101.325 kPa, ideal gas,
// mixing term included). Phase is always thermo.PhaseGas: the model does not
// locate the mixture's critical point.
//
// Range: 60-700 K and 0 < p <= 70 MPa (GERG-2008 extended range; NewDetail:
// 143-676 K, p <= 280 MPa); outside it, a *thermo.RangeError. PX, TX and HS return thermo.ErrUnsupported.
//
// Phase checks (errors wrap thermo.ErrPhase): the density is the gas root of
// p(T, rho) found from the ideal-gas estimate; it must be mechanically stable
// (dp/drho > 0), have 0.05 <= Z <= 20, have dp/drho > 0 at 7 densities between
// 0 and the root (no van der Waals loop below it, so it is not a liquid root),
// and must not be liquid-like (T below the reducing temperature T_r(x) with
// rho above rho_r(x); for NewDetail the Kay's-rule pseudo-critical T and
// density from the GERG-2008 critical data); a pressure above the gas branch of the isotherm has no
// gas root. These checks do not test material stability: a mechanically
// stable gas between the dew point and the spinodal (supersaturated, inside
// the phase envelope) passes them. A Mixture made with WithStabilityCheck
// also runs the tangent-plane stability test (Stable) on every state it
// returns and rejects such states; it costs about 1-3 ms of CPU per call
// instead of about 10 µs (11-component gas).
//
// The (p, h) and (p, s) flashes iterate on T inside a bracket with
// dh/dT = cp (ds/d ln T = cp): Newton steps in T (p,h) or ln T (p,s), with a
// Halley correction whose curvature is the secant of cp between iterates;
// each density solve starts on the isobar's tangent from the previous
// state. They stop when the Newton step is below 1e-11 T.
func (m *Mixture) Flash(pair thermo.Pair, a, b float64) (thermo.State, error) {
	switch pair {
	case thermo.PT:
		pr, err := m.PropertiesPT(a, b)
		if err != nil {
			return thermo.State{}, err
		}
		return m.state(&pr)
	case thermo.PH, thermo.PS:
		names := []string{"p", "h"}
		if pair == thermo.PS {
			names[1] = "s"
		}
		if err := thermo.CheckFinite(m.name, names, a, b); err != nil {
			return thermo.State{}, err
		}
		pr, err := m.flashPX(pair, a, b)
		if err != nil {
			return thermo.State{}, err
		}
		return m.state(&pr)
	case thermo.PX, thermo.TX, thermo.HS:
		return thermo.State{}, fmt.Errorf("%s: %v: %w (GERG-2008 here covers the single-phase gas; use p,T, p,h or p,s)", m.name, pair, thermo.ErrUnsupported)
	}
	return thermo.State{}, fmt.Errorf("%s: %v: %w", m.name, pair, thermo.ErrUnsupported)
}

// flashPX solves T at pressure p for a target enthalpy (PH, J/kg) or
// entropy (PS, J/(kg K)).
func (m *Mixture) flashPX(pair thermo.Pair, p, target float64) (Properties, error) {
	if err := m.checkPT(p, 300); err != nil {
		return Properties{}, err
	}
	M := m.mg / 1000
	quantity, unit := "h", "J/kg"
	if pair == thermo.PS {
		quantity, unit = "s", "J/(kg K)"
	}
	// f(T) = property(T) - target, increasing in T; slope cp or cp/T.
	// Each state is solved from the previous one: its density moved along
	// the isobar's tangent, (dD/dT)_p = -(dp/dT)_D / (dp/dD)_T.
	var last Properties // the previous state (last.T = 0: none)
	eval := func(T float64) (Properties, float64, float64, error) {
		D0 := 0.0
		if last.T > 0 {
			D0 = last.D * last.T / T
			if g := last.D - last.DPDT/last.DPDD*(T-last.T); g > 0.5*last.D && g < 2*last.D {
				D0 = g
			}
		}
		pr, err := m.propertiesPT(p, T, D0)
		if err != nil {
			return pr, 0, 0, err
		}
		last = pr
		if pair == thermo.PH {
			return pr, pr.H/M - target, pr.Cp / M, nil
		}
		return pr, pr.S/M - target, pr.Cp / M / T, nil
	}
	// The steps are taken in x = T (PH) or x = ln T (PS), in which the
	// slope of f is cp for both: Newton's step, or Halley's with the
	// curvature dcp/dx from the previous iterate (a secant of cp) once there
	// is one and the correction is moderate. The convergence test is the
	// Newton step in T, as the doc of Flash says.
	xOf := func(T float64) float64 {
		if pair == thermo.PS {
			return math.Log(T)
		}
		return T
	}
	var xPrev, cpPrev float64
	havePrev := false
	lo, hi := m.tMin, m.tMax
	loPhase := false // lo is a temperature where no gas state exists
	var hiSeen, loSeen bool
	T := 300.0
	for it := 0; it < 200; it++ {
		pr, f, slope, err := eval(T)
		if err != nil {
			if !errors.Is(err, thermo.ErrPhase) {
				return pr, err
			}
			lo, loPhase, loSeen = T, true, true
			havePrev = false
		} else {
			if f > 0 {
				hi, hiSeen = T, true
			} else {
				lo, loPhase, loSeen = T, false, true
			}
			dT := -f / slope
			if math.Abs(dT) <= 1e-11*T {
				// Newton converges quadratically: T is within |dT| of the
				// root, 1e-11 relative, well inside the 1e-9 promised.
				return pr, nil
			}
			cp := pr.Cp / M
			x := xOf(T)
			dx := -f / cp
			if havePrev && x != xPrev {
				if c := 1 + 0.5*dx*(cp-cpPrev)/(x-xPrev)/cp; c >= 0.5 && c <= 2 {
					dx /= c
				}
			}
			xPrev, cpPrev, havePrev = x, cp, true
			Tn := T + dx
			if pair == thermo.PS {
				Tn = T * math.Exp(dx)
			}
			if Tn > lo && Tn < hi {
				T = Tn
				continue
			}
			// The step leaves the bracket: test the bounds of the range.
			if Tn >= hi && !hiSeen && hi == m.tMax && T != m.tMax {
				T = m.tMax
				continue
			}
			if Tn <= lo && !loSeen && lo == m.tMin && T != m.tMin {
				T = m.tMin
				continue
			}
			if T == m.tMax && f < 0 {
				return pr, thermo.Above(m.name, quantity, unit, target, f+target, fmt.Sprintf("%s at %g K and %g Pa, the upper temperature limit", quantity, m.tMax, p))
			}
			if T == m.tMin && f > 0 {
				return pr, thermo.Below(m.name, quantity, unit, target, f+target, fmt.Sprintf("%s at %g K and %g Pa, the lower temperature limit", quantity, m.tMin, p))
			}
		}
		if hi-lo <= 1e-12*hi {
			break
		}
		T = 0.5 * (lo + hi)
	}
	if loPhase {
		return Properties{}, fmt.Errorf("%s: %s = %g %s at p = %g Pa lies below the gas region (two-phase or liquid): %w",
			m.name, quantity, target, unit, p, thermo.ErrPhase)
	}
	return Properties{}, fmt.Errorf("%s: T from (p, %s) = (%g Pa, %g %s): %w", m.name, quantity, p, target, unit, thermo.ErrNoConvergence)
}
