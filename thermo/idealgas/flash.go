package idealgas

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func (m *Mixture) checkT(T float64) error {
	if !finite(T) {
		return thermo.CheckFinite(m.name, []string{"T"}, T)
	}
	if T < m.tmin {
		return thermo.Below(m.name, "T", "K", T, m.tmin, "range of the NASA polynomials of the mixture's species")
	}
	if T > m.tmax {
		return thermo.Above(m.name, "T", "K", T, m.tmax, "range of the NASA polynomials of the mixture's species")
	}
	return nil
}

func (m *Mixture) checkP(p float64) error {
	if !finite(p) {
		return thermo.CheckFinite(m.name, []string{"p"}, p)
	}
	if p < MinPressure {
		return thermo.Below(m.name, "p", "Pa", p, MinPressure, "ideal-gas model: absolute pressure")
	}
	if p > m.pmax {
		return thermo.Above(m.name, "p", "Pa", p, m.pmax, "ideal-gas model ceiling; see idealgas.DefaultMaxPressure")
	}
	return nil
}

// state evaluates every property at (p, T), both already range checked.
func (m *Mixture) state(p, T float64) (thermo.State, error) {
	return m.stateL(p, math.Log(p), T, math.Log(T))
}

// stateL is state with ln p and ln T supplied.
func (m *Mixture) stateL(p, lnp, T, lnT float64) (thermo.State, error) {
	sg := m.seg(T)
	cp := sg.cpAt(T)
	h := sg.h(T)
	s := sg.sigmaL(T, lnT) - m.rs*lnp
	rT := m.rs * T
	cv := cp - m.rs
	st := thermo.State{
		P: p, T: T,
		V: rT / p, Rho: p / rT,
		U: h - rT, H: h, S: s,
		Cp: cp, Cv: cv, W: math.Sqrt(cp / cv * rT),
		HasDerivatives: true,
		Phase:          thermo.PhaseGas,
	}
	if !st.Finite() {
		return thermo.State{}, fmt.Errorf("%s: non-finite property at p = %g Pa, T = %g K: %w", m.name, p, T, thermo.ErrNotFinite)
	}
	return st, nil
}

// Flash implements thermo.Fluid for the pairs PT, PH, PS and HS. PX and TX
// return an error wrapping thermo.ErrUnsupported (an ideal gas has no
// two-phase region). Every state has Phase thermo.PhaseGas.
//
// PH and PS solve h(T) = h, respectively s(T, p) = s, by Newton's method on
// T (safeguarded by bisection, started from a table of 1025 points) until
// the Newton step is below 1e-6 T, which by quadratic convergence leaves T
// within about 1e-12 relative (h and s to 1e-9 relative or better).
// HS finds T from h alone (h of an ideal gas does not depend on p), then
// p = P0 exp((s0(T) - s)/Rs).
func (m *Mixture) Flash(pair thermo.Pair, a, b float64) (thermo.State, error) {
	switch pair {
	case thermo.PT:
		if !finite(a) || !finite(b) {
			return thermo.State{}, thermo.CheckFinite(m.name, []string{"p", "T"}, a, b)
		}
		if err := m.checkP(a); err != nil {
			return thermo.State{}, err
		}
		if err := m.checkT(b); err != nil {
			return thermo.State{}, err
		}
		return m.state(a, b)
	case thermo.PH:
		if !finite(a) || !finite(b) {
			return thermo.State{}, thermo.CheckFinite(m.name, []string{"p", "h"}, a, b)
		}
		if err := m.checkP(a); err != nil {
			return thermo.State{}, err
		}
		T, err := m.tFromH(b)
		if err != nil {
			return thermo.State{}, err
		}
		return m.state(a, T)
	case thermo.PS:
		if !finite(a) || !finite(b) {
			return thermo.State{}, thermo.CheckFinite(m.name, []string{"p", "s"}, a, b)
		}
		if err := m.checkP(a); err != nil {
			return thermo.State{}, err
		}
		lnp := math.Log(a)
		T, lnT, err := m.tFromSigma(b+m.rs*lnp, a, b)
		if err != nil {
			return thermo.State{}, err
		}
		return m.stateL(a, lnp, T, lnT)
	case thermo.HS:
		if !finite(a) || !finite(b) {
			return thermo.State{}, thermo.CheckFinite(m.name, []string{"h", "s"}, a, b)
		}
		T, err := m.tFromH(a)
		if err != nil {
			return thermo.State{}, err
		}
		sigma := m.seg(T).sigma(T)
		// s = sigma - Rs ln p  =>  ln p = (sigma - s)/Rs.
		lp := (sigma - b) / m.rs
		// A state at the pressure limits must flash back despite the
		// rounding of T(h): within 1e-9 relative the limit is the answer.
		if lmax := math.Log(m.pmax); lp > lmax && lp-lmax <= 1e-9 {
			lp = lmax
		}
		if lmin := math.Log(MinPressure); lp < lmin && lmin-lp <= 1e-9 {
			lp = lmin
		}
		if lp > math.Log(m.pmax) {
			return thermo.State{}, thermo.Below(m.name, "s", "J/(kg K)", b, sigma-m.rs*math.Log(m.pmax),
				fmt.Sprintf("h,s flash at T = %.6g K: the implied pressure is above the ceiling %g Pa", T, m.pmax))
		}
		if lp < math.Log(MinPressure) {
			return thermo.State{}, thermo.Above(m.name, "s", "J/(kg K)", b, sigma-m.rs*math.Log(MinPressure),
				fmt.Sprintf("h,s flash at T = %.6g K: the implied pressure is below %g Pa", T, MinPressure))
		}
		p := math.Exp(lp)
		if lp == math.Log(m.pmax) {
			p = m.pmax
		} else if lp == math.Log(MinPressure) {
			p = MinPressure
		}
		return m.state(p, T)
	case thermo.PX, thermo.TX:
		return thermo.State{}, fmt.Errorf("%s: %v flash: an ideal-gas mixture has no two-phase region: %w", m.name, pair, thermo.ErrUnsupported)
	}
	return thermo.State{}, fmt.Errorf("%s: input pair %v: %w", m.name, pair, thermo.ErrUnsupported)
}

// edgeTol is the relative rounding allowance at the ends of the h and s
// ranges: a state computed at tmin or tmax must flash back.
const edgeTol = 1e-13

// tFromH solves h(T) = h for T; h must be finite.
func (m *Mixture) tFromH(h float64) (float64, error) {
	// Values a rounding error outside the range are the range ends.
	if h < m.hInv.lo && m.hInv.lo-h <= edgeTol*math.Abs(m.hInv.lo) {
		return m.tmin, nil
	}
	if h > m.hInv.hi && h-m.hInv.hi <= edgeTol*math.Abs(m.hInv.hi) {
		return m.tmax, nil
	}
	if h < m.hInv.lo {
		return 0, thermo.Below(m.name, "h", "J/kg", h, m.hInv.lo, fmt.Sprintf("h at the lowest temperature %g K", m.tmin))
	}
	if h > m.hInv.hi {
		return 0, thermo.Above(m.name, "h", "J/kg", h, m.hInv.hi, fmt.Sprintf("h at the highest temperature %g K", m.tmax))
	}
	T, _, ok := m.solveT(h, false)
	if !ok {
		return 0, fmt.Errorf("%s: T from h = %g J/kg: %w", m.name, h, thermo.ErrNoConvergence)
	}
	return T, nil
}

// tFromSigma solves sigma(T) = sigma for T; p and s are only for messages.
func (m *Mixture) tFromSigma(sigma, p, s float64) (T, lnT float64, err error) {
	if sigma < m.sInv.lo && m.sInv.lo-sigma <= edgeTol*math.Abs(m.sInv.lo) {
		return m.tmin, math.Log(m.tmin), nil
	}
	if sigma > m.sInv.hi && sigma-m.sInv.hi <= edgeTol*math.Abs(m.sInv.hi) {
		return m.tmax, math.Log(m.tmax), nil
	}
	if sigma < m.sInv.lo {
		return 0, 0, thermo.Below(m.name, "s", "J/(kg K)", s, m.sInv.lo-m.rs*math.Log(p), fmt.Sprintf("s at p = %g Pa and the lowest temperature %g K", p, m.tmin))
	}
	if sigma > m.sInv.hi {
		return 0, 0, thermo.Above(m.name, "s", "J/(kg K)", s, m.sInv.hi-m.rs*math.Log(p), fmt.Sprintf("s at p = %g Pa and the highest temperature %g K", p, m.tmax))
	}
	T, lnT, ok := m.solveT(sigma, true)
	if !ok {
		return 0, 0, fmt.Errorf("%s: T from p = %g Pa, s = %g J/(kg K): %w", m.name, p, s, thermo.ErrNoConvergence)
	}
	return T, lnT, nil
}

// H returns the specific enthalpy in J/kg at T in K (independent of
// pressure; includes the species' enthalpies of formation at 298.15 K).
func (m *Mixture) H(T float64) (float64, error) {
	if err := m.checkT(T); err != nil {
		return 0, err
	}
	return m.seg(T).h(T), nil
}

// S returns the specific entropy in J/(kg·K) at T in K and p in Pa,
// including the ideal mixing term -Rs sum x_i ln x_i.
func (m *Mixture) S(T, p float64) (float64, error) {
	if err := m.checkT(T); err != nil {
		return 0, err
	}
	if err := m.checkP(p); err != nil {
		return 0, err
	}
	return m.seg(T).sigma(T) - m.rs*math.Log(p), nil
}

// Cp returns the isobaric specific heat capacity in J/(kg·K) at T in K.
func (m *Mixture) Cp(T float64) (float64, error) {
	if err := m.checkT(T); err != nil {
		return 0, err
	}
	return m.seg(T).cpAt(T), nil
}

// TFromH returns the temperature in K at which the specific enthalpy is h
// in J/kg.
func (m *Mixture) TFromH(h float64) (float64, error) {
	if !finite(h) {
		return 0, thermo.CheckFinite(m.name, []string{"h"}, h)
	}
	return m.tFromH(h)
}

// TFromPS returns the temperature in K at pressure p in Pa and specific
// entropy s in J/(kg·K).
func (m *Mixture) TFromPS(p, s float64) (float64, error) {
	if !finite(p) || !finite(s) {
		return 0, thermo.CheckFinite(m.name, []string{"p", "s"}, p, s)
	}
	if err := m.checkP(p); err != nil {
		return 0, err
	}
	T, _, err := m.tFromSigma(s+m.rs*math.Log(p), p, s)
	return T, err
}

// IsentropicT returns the isentropic end temperature T2s in K: the
// temperature at p2 (Pa) with the entropy of (p1 Pa, T1 K), solved by
// Newton's method so that s(p2, T2s) = s(p1, T1) to 1e-9 relative or
// better.
func (m *Mixture) IsentropicT(p1, T1, p2 float64) (float64, error) {
	if !finite(p1) || !finite(T1) || !finite(p2) {
		return 0, thermo.CheckFinite(m.name, []string{"p1", "T1", "p2"}, p1, T1, p2)
	}
	if err := m.checkP(p1); err != nil {
		return 0, err
	}
	if err := m.checkT(T1); err != nil {
		return 0, err
	}
	if err := m.checkP(p2); err != nil {
		return 0, err
	}
	// sigma(T2) = sigma(T1) + Rs ln(p2/p1).
	sig1 := m.seg(T1).sigma(T1)
	lr := math.Log(p2 / p1)
	T2, _, err := m.tFromSigma(sig1+m.rs*lr, p2, sig1-m.rs*math.Log(p1))
	return T2, err
}

var _ thermo.Fluid = (*Mixture)(nil)
