package if97

import "math"

// IAPWS SR4-04(2014): backward equations p(h,s) for region 3, the region
// boundaries as functions of s (or h and s), and Tsat(h,s) for region 4.
// All functions take and return SI units (J/kg, J/(kg·K), Pa, K) and do no
// range checks; they are starting values and region locators for flashHS.

var (
	p3ahsPoly  = compile(p3ahs)
	p3bhsPoly  = compile(p3bhs)
	h1sPoly    = compile(h1sTerms)
	h3asPoly   = compile(h3asTerms)
	h2absPoly  = compile(h2absTerms)
	h2c3bsPoly = compile(h2c3bsTerms)
	hb13sPoly  = compile(hb13sTerms)
	tb23hsPoly = compile(tb23hsTerms)
	t4hsPoly   = compile(t4hsTerms)
)

// p3hs is the backward pressure (Pa) of region 3 at h (J/kg), s (J/(kg·K)),
// SR4-04(2014) Eq. 1 (3a, s <= s_c: π = Σ n (η-1.01)^I (σ-0.750)^J,
// η = h/2300 kJ/kg, σ = s/4.4 kJ/(kg K), p* = 99 MPa) and Eq. 2 (3b:
// 1/π = Σ n (η-0.681)^I (σ-0.792)^J, η = h/2800 kJ/kg, σ = s/5.3 kJ/(kg K),
// p* = 16.6 MPa).
func p3hs(h, s float64) float64 {
	if s <= s3c {
		return 99e6 * p3ahsPoly.sum(h/2300e3-1.01, s/4.4e3-0.750)
	}
	return 16.6e6 / p3bhsPoly.sum(h/2800e3-0.681, s/5.3e3-0.792)
}

// h1sat is h'1(s), the saturated-liquid enthalpy (J/kg) for
// s'(273.15 K) <= s <= s'(623.15 K), SR4-04(2014) Eq. 3:
// η = Σ n (σ-1.09)^I (σ+0.366e-4)^J, σ = s/3.8 kJ/(kg K), h* = 1700 kJ/kg.
func h1sat(s float64) float64 {
	sg := s / 3.8e3
	return 1700e3 * h1sPoly.sum(sg-1.09, sg+0.366e-4)
}

// h3asat is h'3a(s), the saturated-liquid enthalpy (J/kg) for
// s'(623.15 K) <= s <= s_c, SR4-04(2014) Eq. 4 (same form as Eq. 3).
func h3asat(s float64) float64 {
	sg := s / 3.8e3
	return 1700e3 * h3asPoly.sum(sg-1.09, sg+0.366e-4)
}

// h2absat is h"2ab(s), the saturated-vapour enthalpy (J/kg) for
// 5.85 kJ/(kg K) <= s <= s"(273.15 K), SR4-04(2014) Eq. 5:
// ln η = Σ n (1/σ1-0.513)^I (σ2-0.524)^J, σ1 = s/5.21, σ2 = s/9.2
// kJ/(kg K), h* = 2800 kJ/kg.
func h2absat(s float64) float64 {
	return 2800e3 * math.Exp(h2absPoly.sum(5.21e3/s-0.513, s/9.2e3-0.524))
}

// h2c3bsat is h"2c3b(s), the saturated-vapour enthalpy (J/kg) for
// s_c <= s <= 5.85 kJ/(kg K), SR4-04(2014) Eq. 6:
// η = [Σ n (σ-1.02)^I (σ-0.726)^J]^4, σ = s/5.9 kJ/(kg K), h* = 2800 kJ/kg.
func h2c3bsat(s float64) float64 {
	sg := s / 5.9e3
	w := h2c3bsPoly.sum(sg-1.02, sg-0.726)
	w *= w
	return 2800e3 * w * w
}

// hb13 is hB13(s), the enthalpy (J/kg) of the boundary between regions 1
// and 3 (T = 623.15 K) for s(100 MPa, 623.15 K) <= s <= s'(623.15 K),
// SR4-04(2014) Eq. 7: η = Σ n (σ-0.884)^I (σ-0.864)^J, σ = s/3.8
// kJ/(kg K), h* = 1700 kJ/kg.
func hb13(s float64) float64 {
	sg := s / 3.8e3
	return 1700e3 * hb13sPoly.sum(sg-0.884, sg-0.864)
}

// tb23hs is TB23(h,s), the temperature (K) of the boundary between regions
// 2 and 3 for 5.048096828 <= s/(kJ/(kg K)) <= 5.260578707 and
// 2563.592004 <= h/(kJ/kg) <= 2812.942061, SR4-04(2014) Eq. 8:
// θ = Σ n (η-0.727)^I (σ-0.864)^J, η = h/3000 kJ/kg, σ = s/5.3 kJ/(kg K),
// T* = 900 K.
func tb23hs(h, s float64) float64 {
	return 900 * tb23hsPoly.sum(h/3000e3-0.727, s/5.3e3-0.864)
}

// tsaths is Tsat(h,s) (K) in region 4 for s >= s"(623.15 K),
// SR4-04(2014) Eq. 9: θ = Σ n (η-0.119)^I (σ-1.07)^J, η = h/2800 kJ/kg,
// σ = s/9.2 kJ/(kg K), T* = 550 K.
func tsaths(h, s float64) float64 {
	return 550 * t4hsPoly.sum(h/2800e3-0.119, s/9.2e3-1.07)
}
