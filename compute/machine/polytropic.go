package machine

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// idealGasTol is the relative tolerance on p v/T for treating a fluid as an
// ideal gas (p v/T = R at every state; models report it to rounding).
const idealGasTol = 1e-9

// polytropic returns the polytropic head |∫v dp| (J/kg) and the
// path (enthalpy-basis) efficiency of the constant-efficiency path through
// the end states, the method used and the Schultz factor f (0 unless Schultz).
// See FigureID for the definitions and sources.
func polytropic(expansion bool, s1, s2, s2s *thermo.State) (head, etaPath float64, method PolyMethod, f float64) {
	lnpr := math.Log(s2.P / s1.P)
	dh := s2.H - s1.H
	if isIdealGas(s1, s2, s2s) {
		// Ideal gas, exact for any cp(T): along dh = v dp/eta (compression)
		// cp dT/T = (R/eta) dp/p, so s°(T2) - s°(T1) = (R/eta) ln(p2/p1);
		// along dh = eta v dp (expansion) s°(T2) - s°(T1) = eta R ln(p2/p1).
		R := s1.P * s1.V / s1.T
		ds0 := s2.S - s1.S + R*lnpr // s°(T2) - s°(T1)
		if expansion {
			etaPath = safeDiv(ds0, R*lnpr)
			head = safeDiv(-dh, etaPath)
		} else {
			etaPath = safeDiv(R*lnpr, ds0)
			head = etaPath * dh
		}
		return head, etaPath, PolyIdealGas, 0
	}
	// Schultz (1962), ASME PTC 10-1997: polytropic volume exponents written
	// as (n-1)/n = 1 - ln(v1/v2)/ln(p2/p1), which stays finite for an
	// incompressible end (n -> ∞).
	p1v1 := s1.P * s1.V
	ks := 1 - math.Log(s1.V/s2s.V)/lnpr // (n_s - 1)/n_s
	k := 1 - math.Log(s1.V/s2.V)/lnpr   // (n - 1)/n
	f = safeDiv(s2s.H-s1.H, polyWork(ks, p1v1, s2.P*s2s.V, lnpr))
	head = math.Abs(f * polyWork(k, p1v1, s2.P*s2.V, lnpr))
	if expansion {
		etaPath = safeDiv(-dh, head)
	} else {
		etaPath = safeDiv(head, dh)
	}
	return head, etaPath, PolySchultz, f
}

// polyWork is n/(n-1) (p2 v2 - p1 v1) with k = (n-1)/n, and its isothermal
// limit p1 v1 ln(p2/p1) as k -> 0.
func polyWork(k, p1v1, p2v2, lnpr float64) float64 {
	if math.Abs(k) < 1e-9 {
		return p1v1 * lnpr
	}
	return (p2v2 - p1v1) / k
}

func isIdealGas(ss ...*thermo.State) bool {
	R := ss[0].P * ss[0].V / ss[0].T
	for _, s := range ss {
		if s.Phase != thermo.PhaseGas {
			return false
		}
		if math.Abs(s.P*s.V/s.T-R) > idealGasTol*R {
			return false
		}
	}
	return true
}

// IntegratedPolytropic finds the constant-efficiency polytropic path from
// (p1, h1) to p2 that ends at h2, by integrating dh/d(ln p) = p v(p, h)/eta
// (compression, p2 > p1) or = eta p v(p, h) (expansion) with the classical
// fourth-order Runge–Kutta method in `steps` equal steps of ln p, and
// solving for eta by the secant method. It returns the path efficiency
// (enthalpy basis) and the polytropic head |∫v dp|, which is eta |h2 - h1|
// for compression and |h2 - h1|/eta for expansion.
// It is the reference against which the Schultz figure is checked (the
// direct integration that ASME PTC 10-1997 §5 and Schultz (1962) approximate);
// it needs about 4·steps·(4..8) flashes, so it is slow.
func IntegratedPolytropic(fl thermo.Fluid, p1, h1, p2, h2 float64, steps int) (eta, head float64, err error) {
	if fl == nil {
		return 0, 0, fmt.Errorf("%w: no fluid", ErrSpec)
	}
	for _, v := range [...]float64{p1, h1, p2, h2} {
		if !finite(v) {
			return 0, 0, fmt.Errorf("%w: non-finite path end", ErrInput)
		}
	}
	if p1 <= 0 || p2 <= 0 || p1 == p2 || steps < 4 {
		return 0, 0, fmt.Errorf("%w: path from %g Pa to %g Pa in %d steps", ErrInput, p1, p2, steps)
	}
	expansion := p2 < p1
	dh := h2 - h1
	if (expansion && dh >= 0) || (!expansion && dh <= 0) {
		return 0, 0, fmt.Errorf("%w: enthalpy must fall in an expansion and rise in a compression (h1 %g, h2 %g J/kg)", ErrInput, h1, h2)
	}
	lnp1, dx := math.Log(p1), (math.Log(p2)-math.Log(p1))/float64(steps)
	// end integrates with factor g (dh/dln p = g p v) and returns h at p2.
	end := func(g float64) (float64, error) {
		h := h1
		deriv := func(lnp, h float64) (float64, error) {
			p := math.Exp(lnp)
			s, err := fl.Flash(thermo.PH, p, h)
			if err != nil {
				return 0, err
			}
			return g * p * s.V, nil
		}
		for i := range steps {
			x := lnp1 + float64(i)*dx
			k1, err := deriv(x, h)
			if err != nil {
				return 0, err
			}
			k2, err := deriv(x+dx/2, h+dx/2*k1)
			if err != nil {
				return 0, err
			}
			k3, err := deriv(x+dx/2, h+dx/2*k2)
			if err != nil {
				return 0, err
			}
			k4, err := deriv(x+dx, h+dx*k3)
			if err != nil {
				return 0, err
			}
			h += dx / 6 * (k1 + 2*k2 + 2*k3 + k4)
		}
		return h, nil
	}
	// g = 1 is the isentrope (dh = v dp); start the secant from it and from
	// the ratio of the enthalpy changes.
	ga := 1.0
	ha, err := end(ga)
	if err != nil {
		return 0, 0, fmt.Errorf("integrated path: %w", err)
	}
	gb := dh / (ha - h1)
	hb, err := end(gb)
	if err != nil {
		return 0, 0, fmt.Errorf("integrated path: %w", err)
	}
	tol := 1e-10 * math.Abs(dh)
	for range 50 {
		if math.Abs(hb-h2) <= tol {
			// ∫v dp = Δh/g on both paths.
			if expansion {
				return gb, math.Abs(dh) / gb, nil
			}
			return 1 / gb, math.Abs(dh) / gb, nil
		}
		if hb == ha {
			break
		}
		gn := gb - (hb-h2)*(gb-ga)/(hb-ha)
		if !finite(gn) || gn <= 0 {
			break
		}
		ga, ha = gb, hb
		gb = gn
		if hb, err = end(gb); err != nil {
			return 0, 0, fmt.Errorf("integrated path: %w", err)
		}
	}
	return 0, 0, fmt.Errorf("integrated polytropic path: %w", thermo.ErrNoConvergence)
}
