package if97

import (
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// Fluid name used in errors.
const fluidName = "water"

// Constants of IAPWS R7-97(2012), Section 1 (Eqs. 1 and 2, the critical point).
const (
	// R is the specific gas constant of water, J/(kg·K) (R7-97(2012) Eq. 1).
	R = 461.526
	// Tc, Pc and Rhoc are the critical temperature (K), pressure (Pa) and
	// density (kg/m3) (R7-97(2012) Eqs. 2a-2c).
	Tc   = 647.096
	Pc   = 22.064e6
	Rhoc = 322.0
)

// Range limits of IAPWS R7-97(2012) Section 4 and Fig. 1.
const (
	Tmin  = 273.15  // K, lower temperature bound of regions 1, 2 and 4
	Tmax5 = 2273.15 // K, upper temperature bound of region 5
	T25   = 1073.15 // K, boundary between regions 2 and 5
	T13   = 623.15  // K, boundary between regions 1 and 3
	Pmax  = 100e6   // Pa, upper pressure bound of regions 1-3
	Pmax5 = 50e6    // Pa, upper pressure bound of region 5
	// PsatMin is psat(273.15 K) from Eq. 30, Pa: the lowest saturation pressure.
	PsatMin = 611.212677444
	// Ps13 is psat(623.15 K) from Eq. 30, Pa: the pressure above which the
	// saturated phases lie in region 3.
	Ps13 = 16.529164252605e6
)

// Coefficients of the saturation-pressure equation, IAPWS R7-97(2012)
// Table 34 (n1..n10 of Eqs. 28-31).
const (
	n4_1  = 0.11670521452767e4
	n4_2  = -0.72421316703206e6
	n4_3  = -0.17073846940092e2
	n4_4  = 0.12020824702470e5
	n4_5  = -0.32325550322333e7
	n4_6  = 0.14915108613530e2
	n4_7  = -0.48232657361591e4
	n4_8  = 0.40511340542057e6
	n4_9  = -0.23855557567849
	n4_10 = 0.65017534844798e3
)

// psat is the saturation pressure in Pa at T in K, IAPWS R7-97(2012) Eq. 30,
// without range checks.
func psat(T float64) float64 {
	th := T + n4_9/(T-n4_10)
	A := (th+n4_1)*th + n4_2
	B := (n4_3*th+n4_4)*th + n4_5
	C := (n4_6*th+n4_7)*th + n4_8
	x := 2 * C / (-B + math.Sqrt(B*B-4*A*C))
	x *= x
	return x * x * 1e6
}

// tsat is the saturation temperature in K at p in Pa, IAPWS R7-97(2012)
// Eq. 31, without range checks.
func tsat(p float64) float64 {
	beta := math.Sqrt(math.Sqrt(p * 1e-6))
	E := (beta+n4_3)*beta + n4_6
	F := (n4_1*beta+n4_4)*beta + n4_7
	G := (n4_2*beta+n4_5)*beta + n4_8
	D := 2 * G / (-F - math.Sqrt(F*F-4*E*G))
	a := n4_10 + D
	return 0.5 * (a - math.Sqrt(a*a-4*(n4_9+n4_10*D)))
}

// dpsatdT is the derivative of psat with respect to T, Pa/K, by
// differentiating Eq. 30 analytically.
func dpsatdT(T float64) float64 {
	d := T - n4_10
	th := T + n4_9/d
	dth := 1 - n4_9/(d*d)
	A := (th+n4_1)*th + n4_2
	B := (n4_3*th+n4_4)*th + n4_5
	C := (n4_6*th+n4_7)*th + n4_8
	dA := (2*th + n4_1) * dth
	dB := (2*n4_3*th + n4_4) * dth
	dC := (2*n4_6*th + n4_7) * dth
	r := math.Sqrt(B*B - 4*A*C)
	den := -B + r
	x := 2 * C / den
	dr := (2*B*dB - 4*(dA*C+A*dC)) / (2 * r)
	dx := (2*dC*den - 2*C*(-dB+dr)) / (den * den)
	return 4 * x * x * x * dx * 1e6
}

// SatP returns the saturation pressure in Pa at T in K (IAPWS R7-97(2012)
// Eq. 30), for 273.15 K <= T <= 647.096 K.
func SatP(T float64) (float64, error) {
	if T-T != 0 { // NaN or ±Inf
		return 0, thermo.CheckFinite(fluidName, []string{"T"}, T)
	}
	if T < Tmin {
		return 0, thermo.Below(fluidName, "T", "K", T, Tmin, "IF97 saturation line starts at 273.15 K")
	}
	if T > Tc {
		return 0, thermo.Above(fluidName, "T", "K", T, Tc, "IF97 saturation line ends at the critical temperature")
	}
	if T == Tc {
		return Pc, nil
	}
	return psat(T), nil
}

// SatT returns the saturation temperature in K at p in Pa (IAPWS R7-97(2012)
// Eq. 31), for psat(273.15 K) = 611.213 Pa <= p <= 22.064 MPa.
func SatT(p float64) (float64, error) {
	if p-p != 0 { // NaN or ±Inf
		return 0, thermo.CheckFinite(fluidName, []string{"p"}, p)
	}
	if p < PsatMin {
		return 0, thermo.Below(fluidName, "p", "Pa", p, PsatMin, "IF97 saturation line starts at psat(273.15 K)")
	}
	if p > Pc {
		return 0, thermo.Above(fluidName, "p", "Pa", p, Pc, "IF97 saturation line ends at the critical pressure")
	}
	if p == Pc {
		return Tc, nil
	}
	return tsat(p), nil
}
