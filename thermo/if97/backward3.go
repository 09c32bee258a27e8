package if97

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// Region-3 backward equations of IAPWS SR3-03(2014) (T and v from (p,h) and
// (p,s), subregions 3a/3b) and SR5-05(2016) (v from (p,T), subregions
// 3a..3z). They are starting values only: every state returned to a caller
// is refined on the forward equation (region3.go).

var (
	t3aphPoly = compile(t3aph)
	t3bphPoly = compile(t3bph)
	v3aphPoly = compile(v3aph)
	v3bphPoly = compile(v3bph)
	t3apsPoly = compile(t3aps)
	t3bpsPoly = compile(t3bps)
	v3apsPoly = compile(v3aps)
	v3bpsPoly = compile(v3bps)
)

// h3ab is the enthalpy (J/kg) on the boundary between subregions 3a and 3b
// at p (Pa), IAPWS SR3-03(2014) Eq. 1 with its coefficients n1..n4:
// h/(1 kJ/kg) = n1 + n2 π + n3 π² + n4 π³, π = p/(1 MPa).
func h3ab(p float64) float64 {
	pi := p * 1e-6
	return (0.201464004206875e4 + pi*(0.374696550136983e1+pi*(-0.219921901054187e-1+pi*0.875131686009950e-4))) * 1e3
}

// s3c is the critical entropy that separates subregions 3a and 3b in the
// (p,s) backward equations, J/(kg·K) (SR3-03(2014) Section 3.1:
// s_c = 4.41202148223476 kJ/(kg K)).
const s3c = 4.41202148223476e3

// t3ph is the raw backward temperature (K) at p (Pa), h (J/kg), SR3-03(2014)
// Eqs. 2 (3a: θ = Σ n (π+0.240)^I (η-0.615)^J, π = p/100 MPa,
// η = h/2300 kJ/kg, T* = 760 K) and 3 (3b: (π+0.298), (η-0.720),
// η = h/2800 kJ/kg, T* = 860 K), split by h3ab(p).
func t3ph(p, h float64) float64 {
	pi := p * 1e-8
	if h <= h3ab(p) {
		return 760 * t3aphPoly.sum(pi+0.240, h/2300e3-0.615)
	}
	return 860 * t3bphPoly.sum(pi+0.298, h/2800e3-0.720)
}

// v3ph is the raw backward specific volume (m3/kg) at p (Pa), h (J/kg),
// SR3-03(2014) Eqs. 4 (3a: (π+0.128), (η-0.727), η = h/2100 kJ/kg,
// v* = 0.0028 m3/kg) and 5 (3b: (π+0.0661), (η-0.720), η = h/2800 kJ/kg,
// v* = 0.0088 m3/kg).
func v3ph(p, h float64) float64 {
	pi := p * 1e-8
	if h <= h3ab(p) {
		return 0.0028 * v3aphPoly.sum(pi+0.128, h/2100e3-0.727)
	}
	return 0.0088 * v3bphPoly.sum(pi+0.0661, h/2800e3-0.720)
}

// t3ps is the raw backward temperature (K) at p (Pa), s (J/(kg·K)),
// SR3-03(2014) Eqs. 6 (3a: (π+0.240), (σ-0.703), σ = s/4.4 kJ/(kg K),
// T* = 760 K) and 7 (3b: (π+0.760), (σ-0.818), σ = s/5.3 kJ/(kg K),
// T* = 860 K), split at s3c.
func t3ps(p, s float64) float64 {
	pi := p * 1e-8
	if s <= s3c {
		return 760 * t3apsPoly.sum(pi+0.240, s/4.4e3-0.703)
	}
	return 860 * t3bpsPoly.sum(pi+0.760, s/5.3e3-0.818)
}

// v3ps is the raw backward specific volume (m3/kg) at p (Pa), s
// (J/(kg·K)), SR3-03(2014) Eqs. 8 (3a: (π+0.187), (σ-0.755),
// σ = s/4.4 kJ/(kg K), v* = 0.0028 m3/kg) and 9 (3b: (π+0.298),
// (σ-0.816), σ = s/5.3 kJ/(kg K), v* = 0.0088 m3/kg).
func v3ps(p, s float64) float64 {
	pi := p * 1e-8
	if s <= s3c {
		return 0.0028 * v3apsPoly.sum(pi+0.187, s/4.4e3-0.755)
	}
	return 0.0088 * v3bpsPoly.sum(pi+0.298, s/5.3e3-0.816)
}

// SR5-05(2016) subregion boundaries T3xy(p), p in Pa, T in K.

// t3poly evaluates Eq. 1 of SR5-05(2016): θ = Σ n_i π^I_i, I_i = 0..N,
// π = p/1 MPa, T* = 1 K.
func t3poly(n []float64, p float64) float64 {
	pi := p * 1e-6
	t := 0.0
	for i := len(n) - 1; i >= 0; i-- {
		t = t*pi + n[i]
	}
	return t
}

// t3log evaluates Eq. 2 of SR5-05(2016): θ = Σ n_i (ln π)^I_i with
// I = 0, 1, 2, -1, -2, π = p/1 MPa, T* = 1 K.
func t3log(n *[5]float64, p float64) float64 {
	l := math.Log(p * 1e-6)
	return n[0] + n[1]*l + n[2]*l*l + n[3]/l + n[4]/(l*l)
}

// Coefficients n_i of the boundary equations T3xy(p), IAPWS SR5-05(2016)
// Eq. 1 (polynomials, index = I_i) and Eq. 2 (3ab, 3op, 3wx: I = 0, 1, 2,
// -1, -2), coefficient table of the boundary equations (table number not
// recalled; values verified by the release's boundary check values).
var (
	t3cdN = []float64{0.585276966696349e3, 0.278233532206915e1, -0.127283549295878e-1, 0.159090746562729e-3}
	t3ghN = []float64{-0.249284240900418e5, 0.428143584791546e4, -0.269029173140130e3, 0.751608051114157e1, -0.787105249910383e-1}
	t3ijN = []float64{0.584814781649163e3, -0.616179320924617, 0.260763050899562, -0.587071076864459e-2, 0.515308185433082e-4}
	t3jkN = []float64{0.617229772068439e3, -0.770600270141675e1, 0.697072596851896, -0.157391839848015e-1, 0.137897492684194e-3}
	t3mnN = []float64{0.535339483742384e3, 0.761978122720128e1, -0.158365725441648, 0.192871054508108e-2}
	t3quN = []float64{0.565603648239126e3, 0.529062258221222e1, -0.102020639611016, 0.122240301070145e-2}
	t3rxN = []float64{0.584561202520006e3, -0.102961025163669e1, 0.243293362700452, -0.294905044740799e-2}
	t3uvN = []float64{0.528199646263062e3, 0.890579602135307e1, -0.222814134903755, 0.286791682263697e-2}
	t3abN = [5]float64{0.154793642129415e4, -0.187661219490113e3, 0.213144632222113e2, -0.191887498864292e4, 0.918419702359447e3}
	t3opN = [5]float64{0.969461372400213e3, -0.332500170441278e3, 0.642859598466067e2, 0.773845935768222e3, -0.152313732937084e4}
	t3wxN = [5]float64{0.728052609145380e1, 0.973505869861952e2, 0.147370491183191e2, 0.329196213998375e3, 0.873371668682417e3}
)

// t3ef is the straight-line boundary of SR5-05(2016) Eq. 3:
// T3ef = 3.727888004 (p/MPa - 22.064) + 647.096 K.
func t3ef(p float64) float64 { return 3.727888004*(p*1e-6-22.064) + 647.096 }

// Pressure limits of the SR5-05(2016) subregion selection (its Table 2 and
// Table 10), Pa.
const (
	p3cd  = 19.00881189173929e6 // lower end of T3cd, SR5-05(2016) Section 3.1
	p3uvy = 21.93161551e6       // SR5-05(2016) Table 10: 3u/3y split below pc
	p3xz  = 21.90096265e6       // SR5-05(2016) Table 10: 3x/3z split below pc
)

// psat64315 is psat(643.15 K) (R7-97(2012) Eq. 30), about 21.043 MPa, the
// pressure at which SR5-05(2016) Table 2 changes from 3s to the
// near-critical subregions.
var psat64315 = psat(643.15)

// v3sub describes one SR5-05(2016) subregion equation (its Eqs. 4 and 5):
// v/v* = [Σ n (π-a)^(c I) (θ-b)^(d J)]^e, or for 3n
// v/v* = exp(Σ n (π-a)^I (θ-b)^J), with π = p/p*, θ = T/T*.
// Reducing quantities and exponents from the SR5-05(2016) table of v*, p*,
// T*, a, b, c, d, e (table number not recalled; values verified by the
// release's check values of every subregion, TestSR505CheckValues).
type v3sub struct {
	vs, ps, ts, a, b float64
	c, d             float64 // 1, 0.5 or 0.25
	e                int     // 1 or 4; 0 marks the exponential form of 3n
	poly             *gpoly
}

var v3subs = [26]v3sub{
	{0.0024, 100e6, 760, 0.085, 0.817, 1, 1, 1, compile(v3apt)},
	{0.0041, 100e6, 860, 0.280, 0.779, 1, 1, 1, compile(v3bpt)},
	{0.0022, 40e6, 690, 0.259, 0.903, 1, 1, 1, compile(v3cpt)},
	{0.0029, 40e6, 690, 0.559, 0.939, 1, 1, 4, compile(v3dpt)},
	{0.0032, 40e6, 710, 0.587, 0.918, 1, 1, 1, compile(v3ept)},
	{0.0064, 40e6, 730, 0.587, 0.891, 0.5, 1, 4, compile(v3fpt)},
	{0.0027, 25e6, 660, 0.872, 0.971, 1, 1, 4, compile(v3gpt)},
	{0.0032, 25e6, 660, 0.898, 0.983, 1, 1, 4, compile(v3hpt)},
	{0.0041, 25e6, 660, 0.910, 0.984, 0.5, 1, 4, compile(v3ipt)},
	{0.0054, 25e6, 670, 0.875, 0.964, 0.5, 1, 4, compile(v3jpt)},
	{0.0077, 25e6, 680, 0.802, 0.935, 1, 1, 1, compile(v3kpt)},
	{0.0026, 24e6, 650, 0.908, 0.989, 1, 1, 4, compile(v3lpt)},
	{0.0028, 23e6, 650, 1.000, 0.997, 1, 0.25, 1, compile(v3mpt)},
	{0.0031, 23e6, 650, 0.976, 0.997, 1, 1, 0, compile(v3npt)},
	{0.0034, 23e6, 650, 0.974, 0.996, 0.5, 1, 1, compile(v3opt)},
	{0.0041, 23e6, 650, 0.972, 0.997, 0.5, 1, 1, compile(v3ppt)},
	{0.0022, 23e6, 650, 0.848, 0.983, 1, 1, 4, compile(v3qpt)},
	{0.0054, 23e6, 650, 0.874, 0.982, 1, 1, 1, compile(v3rpt)},
	{0.0022, 21e6, 640, 0.886, 0.990, 1, 1, 4, compile(v3spt)},
	{0.0088, 20e6, 650, 0.803, 1.020, 1, 1, 1, compile(v3tpt)},
	{0.0026, 23e6, 650, 0.902, 0.988, 1, 1, 1, compile(v3upt)},
	{0.0031, 23e6, 650, 0.960, 0.995, 1, 1, 1, compile(v3vpt)},
	{0.0039, 23e6, 650, 0.959, 0.995, 1, 1, 4, compile(v3wpt)},
	{0.0049, 23e6, 650, 0.910, 0.988, 1, 1, 1, compile(v3xpt)},
	{0.0031, 22e6, 650, 0.996, 0.994, 1, 1, 4, compile(v3ypt)},
	{0.0038, 22e6, 650, 0.993, 0.994, 1, 1, 4, compile(v3zpt)},
}

// v3subEval evaluates the v(p,T) equation of subregion sub ('a'..'z') at
// p (Pa), T (K), without checking that (p,T) lies in it.
func v3subEval(sub byte, p, T float64) float64 {
	q := &v3subs[sub-'a']
	x := p/q.ps - q.a
	y := T/q.ts - q.b
	switch q.c {
	case 0.5:
		x = math.Sqrt(x)
	}
	switch q.d {
	case 0.25:
		y = math.Sqrt(math.Sqrt(y))
	}
	w := q.poly.sum(x, y)
	switch q.e {
	case 0:
		return q.vs * math.Exp(w)
	case 4:
		w *= w
		return q.vs * w * w
	}
	return q.vs * w
}

// v3subregion returns the SR5-05(2016) subregion ('a'..'z') of the region-3
// state (p Pa, T K), following its Table 2 and, for the near-critical
// auxiliary subregions 3u..3z, its Table 10. The caller has checked that
// (p, T) lies in region 3.
func v3subregion(p, T float64) byte {
	switch {
	case p > 40e6:
		if T <= t3log(&t3abN, p) {
			return 'a'
		}
		return 'b'
	case p > 25e6:
		switch {
		case T <= t3poly(t3cdN, p):
			return 'c'
		case T <= t3log(&t3abN, p):
			return 'd'
		case T <= t3ef(p):
			return 'e'
		}
		return 'f'
	case p > 23.5e6:
		switch {
		case T <= t3poly(t3cdN, p):
			return 'c'
		case T <= t3poly(t3ghN, p):
			return 'g'
		case T <= t3ef(p):
			return 'h'
		case T <= t3poly(t3ijN, p):
			return 'i'
		case T <= t3poly(t3jkN, p):
			return 'j'
		}
		return 'k'
	case p > 23e6:
		switch {
		case T <= t3poly(t3cdN, p):
			return 'c'
		case T <= t3poly(t3ghN, p):
			return 'l'
		case T <= t3ef(p):
			return 'h'
		case T <= t3poly(t3ijN, p):
			return 'i'
		case T <= t3poly(t3jkN, p):
			return 'j'
		}
		return 'k'
	case p > 22.5e6:
		switch {
		case T <= t3poly(t3cdN, p):
			return 'c'
		case T <= t3poly(t3ghN, p):
			return 'l'
		case T <= t3poly(t3mnN, p):
			return 'm'
		case T <= t3ef(p):
			return 'n'
		case T <= t3log(&t3opN, p):
			return 'o'
		case T <= t3poly(t3ijN, p):
			return 'p'
		case T <= t3poly(t3jkN, p):
			return 'j'
		}
		return 'k'
	case p > psat64315:
		switch {
		case T <= t3poly(t3cdN, p):
			return 'c'
		case T <= t3poly(t3quN, p):
			return 'q'
		case T <= t3poly(t3rxN, p):
			return v3auxiliary(p, T)
		case T <= t3poly(t3jkN, p):
			return 'r'
		}
		return 'k'
	case p > 20.5e6:
		switch {
		case T <= t3poly(t3cdN, p):
			return 'c'
		case T <= tsat(p):
			return 's'
		case T <= t3poly(t3jkN, p):
			return 'r'
		}
		return 'k'
	case p > p3cd:
		switch {
		case T <= t3poly(t3cdN, p):
			return 'c'
		case T <= tsat(p):
			return 's'
		}
		return 't'
	}
	if T <= tsat(p) {
		return 'c'
	}
	return 't'
}

// v3auxiliary selects among the near-critical subregions 3u..3z for
// T3qu(p) < T <= T3rx(p), SR5-05(2016) Table 10.
func v3auxiliary(p, T float64) byte {
	switch {
	case p > 22.11e6:
		switch {
		case T <= t3poly(t3uvN, p):
			return 'u'
		case T <= t3ef(p):
			return 'v'
		case T <= t3log(&t3wxN, p):
			return 'w'
		}
		return 'x'
	case p > Pc:
		switch {
		case T <= t3poly(t3uvN, p):
			return 'u'
		case T <= t3ef(p):
			return 'y'
		case T <= t3log(&t3wxN, p):
			return 'z'
		}
		return 'x'
	}
	// Below the critical pressure: liquid side (T <= Tsat) and vapour side.
	if T <= tsat(p) {
		if p <= p3uvy || T <= t3poly(t3uvN, p) {
			return 'u'
		}
		return 'y'
	}
	if p <= p3xz || T > t3log(&t3wxN, p) {
		return 'x'
	}
	return 'z'
}

// v3sat returns the SR5-05(2016) starting volume (m3/kg) of the saturated
// liquid (vapour false) or vapour (vapour true) at T (K) and p = psat(T),
// from the subregion equations the release assigns to the saturation lines
// (Section 3.3 and Table 10: liquid 3c, 3s, 3u, 3y; vapour 3t, 3r, 3x, 3z).
func v3sat(p, T float64, vapour bool) float64 {
	var sub byte
	if !vapour {
		switch {
		case p <= p3cd:
			sub = 'c'
		case p <= psat64315:
			sub = 's'
		case p <= p3uvy:
			sub = 'u'
		default:
			sub = 'y'
		}
	} else {
		switch {
		case p <= 20.5e6:
			sub = 't'
		case p <= psat64315:
			sub = 'r'
		case p <= p3xz:
			sub = 'x'
		default:
			sub = 'z'
		}
	}
	return v3subEval(sub, p, T)
}

// v3pt is the raw SR5-05(2016) backward volume (m3/kg) at p (Pa), T (K) and
// the subregion letter used. Inputs outside region 3 (T < 623.15 K,
// p > 100 MPa, p below the B23 boundary, T above TB23(p)) return an error
// wrapping thermo.ErrOutOfRange.
func v3pt(p, T float64) (float64, byte, error) {
	if err := region3CheckPT(p, T); err != nil {
		return 0, 0, err
	}
	sub := v3subregion(p, T)
	v := v3subEval(sub, p, T)
	if !(v > 0) || math.IsInf(v, 0) {
		return 0, sub, fmt.Errorf("%s: SR5-05 subregion 3%c gives v = %g at p = %g Pa, T = %g K: %w", fluidName, sub, v, p, T, thermo.ErrNoConvergence)
	}
	return v, sub, nil
}

// region3CheckPT returns a *thermo.RangeError (or ErrNotFinite) if (p, T)
// is not in region 3 of R7-97(2012) (Section 4: 623.15 K <= T, p between
// the B23 boundary and 100 MPa).
func region3CheckPT(p, T float64) error {
	if err := thermo.CheckFinite(fluidName, []string{"p", "T"}, p, T); err != nil {
		return err
	}
	if T < T13 {
		return thermo.Below(fluidName, "T", "K", T, T13, "IF97 region 3 starts at 623.15 K")
	}
	if p > Pmax {
		return thermo.Above(fluidName, "p", "Pa", p, Pmax, "IF97 region 3 ends at 100 MPa")
	}
	if T > 863.15 {
		return thermo.Above(fluidName, "T", "K", T, 863.15, "IF97 region 3 lies below the B23 boundary, at most 863.15 K")
	}
	if pb := b23p(T); p < pb {
		return thermo.Below(fluidName, "p", "Pa", p, pb, "IF97 region 3 lies above the B23 boundary pB23(T)")
	}
	return nil
}
