package if97

import (
	"errors"
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// The (h,s) flash. The backward equations p(h,s) of SR2-01(2014) (regions 1
// and 2) and SR4-04(2014) (region 3), or Tsat(h,s) of SR4-04 in the wet
// region, give a starting pressure; the state is then solved on the forward
// equations through the (p,h) flash: at constant h, (∂s/∂p)_h = -v/T in
// every phase (dh = T ds + v dp), so s(p, h) is strictly decreasing in p and
// Newton's method in ln p, safeguarded by bisection, converges from any
// start inside [hsPmin, Pmax].

// Entropies that separate the branches of the SR4-04(2014) boundary
// equations (its Section 4; J/(kg·K)).
const (
	hsSB13   = 3.397782955e3 // s(100 MPa, 623.15 K), lower end of hB13(s)
	hsSL623  = 3.778281340e3 // s'(623.15 K)
	hsSV623  = 5.210887825e3 // s''(623.15 K)
	hsS2ab   = 5.85e3        // boundary of h''2ab(s) and h''2c3b(s)
	hsSV273  = 9.155759395e3 // s''(273.15 K)
	hsSB23lo = 5.048096828e3 // range of TB23(h,s): lower s
	hsSB23hi = 5.260578707e3 // range of TB23(h,s): upper s
)

// hsPmin is the lowest pressure of the (h,s) flash: psat(273.15 K), the
// lower end of the h-s range of SR2-01(2014) and SR4-04(2014).
const hsPmin = PsatMin

// phFlash is the signature of the (p,h) flash the (h,s) flash refines on.
type phFlash func(p, h float64) (thermo.State, error)

// hsStartP returns a starting pressure (Pa) for the (h,s) flash, located
// with the SR4-04(2014) boundary equations: p1hs, p2hs (SR2-01) or p3hs
// (SR4-04) in the single-phase regions, psat(Tsat(h,s)) in the wet region.
// It never fails: a start outside [hsPmin, Pmax] is replaced by 1 MPa.
func hsStartP(h, s float64) float64 {
	var p float64
	switch {
	case s <= hsSL623:
		switch {
		case h < h1sat(s):
			// Wet, liquid side: at constant s the wet state is colder than
			// the saturated liquid of entropy s, T(1 MPa, s) by Eq. 13 of
			// R7-97 (liquid entropy hardly depends on p); start there.
			p = psat(clamp(t1ps(1e6, s), Tmin, T13))
		case s >= hsSB13 && h > hb13(s):
			p = p3hs(h, s)
		default:
			p = p1hs(h, s)
		}
	case s <= s3c:
		if h < h3asat(s) {
			p = 0.5 * (Ps13 + Pc)
		} else {
			p = p3hs(h, s)
		}
	case s <= hsS2ab:
		switch {
		case h < h2c3bsat(s):
			if s >= hsSV623 {
				p = psat(clamp(tsaths(h, s), Tmin, Tc-1e-3))
			} else {
				p = 0.5 * (Ps13 + Pc)
			}
		case s < hsSB23lo:
			p = p3hs(h, s)
		case s > hsSB23hi:
			p = p2hs(h, s)
		default:
			p2 := p2hs(h, s)
			if p2 <= b23p(clamp(tb23hs(h, s), T13, 863.15)) {
				p = p2
			} else {
				p = p3hs(h, s)
			}
		}
	case s <= hsSV273 && h < h2absat(s):
		p = psat(clamp(tsaths(h, s), Tmin, Tc-1e-3))
	default:
		p = p2hs(h, s)
	}
	if !(p >= hsPmin && p <= Pmax) {
		return 1e6
	}
	return p
}

func clamp(x, lo, hi float64) float64 {
	if !(x >= lo) {
		return lo
	}
	if x > hi {
		return hi
	}
	return x
}

// flashHSWith solves the state with enthalpy h (J/kg) and entropy s
// (J/(kg·K)) on the (p,h) flash ph; see the comment at the top of the file.
// The returned state reproduces h and s to 1e-9 relative or better (s
// relative to max(|s|, 100 J/(kg K))). Inputs for which no pressure in
// [hsPmin, Pmax] gives s return a *thermo.RangeError.
func flashHSWith(h, s float64, ph phFlash) (thermo.State, error) {
	if err := thermo.CheckFinite(fluidName, []string{"h", "s"}, h, s); err != nil {
		return thermo.State{}, err
	}
	// h outside [h(pmin, 273.15 K), h(pmin, 2273.15 K)] is out of range at
	// every pressure (at 273.15 K h grows with p; in region 5 it falls).
	if hmin := region1(hsPmin, Tmin).h; h < hmin {
		return thermo.State{}, thermo.Below(fluidName, "h", "J/kg", h, hmin, "below h(611.213 Pa, 273.15 K)")
	}
	if hmax := region5(hsPmin, Tmax5).h; h > hmax {
		return thermo.State{}, thermo.Above(fluidName, "h", "J/kg", h, hmax, "above h(611.213 Pa, 2273.15 K)")
	}
	tol := 1e-11 * math.Max(math.Abs(s), 100)
	lnMin, lnMax := math.Log(hsPmin), math.Log(Pmax)
	// Bracket in ln p: F(lnp) = s(p,h) - s is decreasing. lnLo has F > 0
	// (or is the range limit lnMin, or a pressure too low for the (p,h)
	// flash); lnHi has F < 0 (or is lnMax, or a pressure at which h is out
	// of range). A Newton step past an unevaluated range limit first tries
	// the limit itself, so that out-of-range inputs are found in a few steps.
	lnLo, lnHi := lnMin, lnMax
	loTried, hiTried := false, false
	gapTries := 0              // near-critical retries, see below
	okLo, okHi := false, false // a solved state with F > 0 / F < 0 exists
	var stLo thermo.State      // the solved state at lnLo, when okLo
	x := math.Log(hsStartP(h, s))
	var last error
	for it := 0; it < 100; it++ {
		if x <= lnMin {
			x, loTried = lnMin, true
		}
		if x >= lnMax {
			x, hiTried = lnMax, true
		}
		p := math.Exp(x)
		switch x {
		case lnMin:
			p = hsPmin // exactly: exp(log(p)) may round past the limit
		case lnMax:
			p = Pmax
		}
		st, err := ph(p, h)
		if err != nil {
			var re *thermo.RangeError
			switch {
			case errors.As(err, &re) && re.Quantity == "p" && !re.Above:
				lnLo, loTried = x, true // pressure too low for the (p,h) flash
			case errors.Is(err, thermo.ErrOutOfRange):
				lnHi, hiTried = x, true // h unreachable here: valid p lie below
			case errors.Is(err, thermo.ErrNoConvergence) && math.Abs(p-Pc) < 100 && gapTries < 2:
				// The saturated phases are not resolved within 1e-4 K of Tc
				// (sat3TcGap), so the (p,h) flash fails for p within about
				// 27 Pa below pc. Try pc itself, then pc - 50 Pa, instead.
				gapTries++
				next := math.Log(Pc)
				if gapTries == 2 {
					next = math.Log(Pc - 50)
				}
				if next > lnLo && next < lnHi {
					last, x = err, next
					continue
				}
				return thermo.State{}, err
			default:
				return thermo.State{}, err
			}
			last = err
			if lnHi-lnLo < 1e-14 || (okLo && lnHi-lnLo < 1e-9) {
				break // the valid pressures end at lnHi: see below
			}
			x = 0.5 * (lnLo + lnHi)
			continue
		}
		F := st.S - s
		if math.Abs(F) <= tol {
			if math.Abs(st.H-h) > 1e-9*math.Max(math.Abs(h), 1e3) {
				return thermo.State{}, fmt.Errorf("%s: (p,h) flash at p = %g Pa returned h = %g J/kg for %g: %w", fluidName, p, st.H, h, thermo.ErrNoConvergence)
			}
			return st, nil
		}
		switch {
		case F < 0 && x == lnMin:
			// Even the lowest pressure gives a lower entropy: s is too high.
			return thermo.State{}, thermo.Above(fluidName, "s", "J/(kg K)", s, st.S,
				fmt.Sprintf("at h = %g J/kg the largest IF97 entropy is s(%g Pa, h)", h, hsPmin))
		case F > 0 && x == lnMax:
			return thermo.State{}, thermo.Below(fluidName, "s", "J/(kg K)", s, st.S,
				fmt.Sprintf("at h = %g J/kg the smallest IF97 entropy is s(%g Pa, h)", h, Pmax))
		case F > 0:
			lnLo, okLo, stLo = x, true, st
		default:
			lnHi, okHi = x, true
		}
		// Newton step in ln p: dF/dlnp = -p v / T.
		next := x + F*st.T/(p*st.V)
		switch {
		case next <= lnLo && lnLo == lnMin && !loTried:
			next = lnMin
		case next >= lnHi && lnHi == lnMax && !hiTried:
			next = lnMax
		case !(next > lnLo && next < lnHi):
			next = 0.5 * (lnLo + lnHi)
		}
		if lnHi-lnLo < 1e-15 {
			break
		}
		x = next
	}
	switch {
	case okLo && !okHi:
		// Every solved pressure gives a higher entropy, up to the highest
		// pressure at which h is reachable: s is too low.
		return thermo.State{}, thermo.Below(fluidName, "s", "J/(kg K)", s, stLo.S,
			fmt.Sprintf("at h = %g J/kg the smallest IF97 entropy is about s(%.6g Pa, h); h is out of range at higher pressures", h, math.Exp(lnLo)))
	case !okLo && !okHi && last != nil:
		// The (p,h) flash failed at every pressure tried.
		var re *thermo.RangeError
		if errors.As(last, &re) {
			return thermo.State{}, re
		}
	}
	return thermo.State{}, fmt.Errorf("%s: (h,s) flash at h = %g J/kg, s = %g J/(kg K): %w", fluidName, h, s, thermo.ErrNoConvergence)
}

// flashHS returns the state with enthalpy h (J/kg) and entropy s
// (J/(kg·K)) over all IF97 regions including the wet region, refined on the
// forward equations through flashPH (see flashHSWith).
func flashHS(h, s float64) (thermo.State, error) { return flashHSWith(h, s, flashPH) }
