// Package if97 implements water and steam properties to the IAPWS Industrial
// Formulation 1997 (IAPWS R7-97(2012)) with the supplementary backward
// equations SR2-01(2014), SR3-03(2014), SR4-04(2014) and SR5-05(2016).
//
// Backward equations are used only as starting values: every state returned
// by Water.Flash is refined on the forward (basic) equations, so that
// h(p, T(p,h)) = h and s(p, T(p,s)) = s to 1e-9 relative.
//
// All functions take and return SI units (Pa, K, J/kg, J/(kg·K), m3/kg);
// the releases' own units (MPa, kJ/kg) are converted inside.
package if97

// props is the output of a forward equation at one state, in SI units:
// p Pa, T K, v m3/kg, u and h J/kg, s, cp and cv J/(kg·K), w m/s.
type props struct {
	p, T, v, u, h, s, cp, cv, w float64
}
