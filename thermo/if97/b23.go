package if97

import "math"

// Boundary between regions 2 and 3, IAPWS R7-97(2012) Section 4, Eqs. 5
// and 6, coefficients of Table 1.
const (
	nb23_1 = 0.34805185628969e3
	nb23_2 = -0.11671859879975e1
	nb23_3 = 0.10192970039326e-2
	nb23_4 = 0.57254459862746e3
	nb23_5 = 0.13918839778870e2
)

// b23p is the pressure in Pa of the B23 boundary at T in K (Eq. 5), valid
// for 623.15 K <= T <= 863.15 K.
func b23p(T float64) float64 {
	return (nb23_1 + (nb23_2+nb23_3*T)*T) * 1e6
}

// b23T is the temperature in K of the B23 boundary at p in Pa (Eq. 6),
// valid for 16.529 MPa <= p <= 100 MPa.
func b23T(p float64) float64 {
	x := (p*1e-6 - nb23_5) / nb23_3
	if x < 0 {
		x = 0
	}
	return nb23_4 + math.Sqrt(x)
}
