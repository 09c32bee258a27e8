package if97

import "math"

// Region 5, IAPWS R7-97(2012) Section 9.1 (the 2007 revision of the
// region-5 equation): γ = γ° + γʳ with π = p/1 MPa, τ = 1000 K/T.
const T5star = 1000.0

// Ideal-gas part of region 5, IAPWS R7-97(2012) Table 37:
// γ° = ln π + Σ n° τ^J°, J° = 0, 1, -3, -2, -1, 2.
var region5N0 = [6]float64{
	-0.13179983674201e2, 0.68540841634434e1, -0.24805148933466e-1,
	0.36901534980333, -0.31161318213925e1, -0.32961626538917,
}

// Residual part of region 5, IAPWS R7-97(2012) Table 38:
// γʳ = Σ n π^I τ^J.
var region5Terms = []ijn{
	{1, 1, 0.15736404855259e-2}, {1, 2, 0.90153761673944e-3}, {1, 3, -0.50270077677648e-2},
	{2, 3, 0.22440037409485e-5}, {2, 9, -0.41163275453471e-5}, {3, 7, 0.37919454822955e-7},
}

var region5Poly = compile(region5Terms)

// ideal5 returns γ°-ln π, γ°_τ and γ°_ττ of region 5 at τ.
func ideal5(tau float64) (g, gt, gtt float64) {
	r := 1 / tau
	r2 := r * r
	r3 := r2 * r
	n := &region5N0
	g = n[0] + n[1]*tau + n[2]*r3 + n[3]*r2 + n[4]*r + n[5]*tau*tau
	gt = n[1] - 3*n[2]*r3*r - 2*n[3]*r3 - n[4]*r2 + 2*n[5]*tau
	gtt = 12*n[2]*r3*r2 + 6*n[3]*r3*r + 2*n[4]*r3 + 2*n[5]
	return
}

// region5 evaluates the region-5 basic equation (R7-97(2012) Eqs. 32-34 and
// Table 39) at p in Pa and T in K.
func region5(p, T float64) props {
	pi, tau := p*1e-6, T5star/T
	g0, g0t, g0tt := ideal5(tau)
	s := region5Poly.all(pi, tau)
	pgr := s.gi
	ppgrr := s.gii
	grt := s.gj / tau
	grtt := s.gjj / (tau * tau)
	pgrpt := s.gij / tau
	RT := R * T
	gt := g0t + grt
	gtt := g0tt + grtt
	d := 1 + pgr - tau*pgrpt
	return props{
		p:  p,
		T:  T,
		v:  RT / p * (1 + pgr),
		u:  RT * (tau*gt - (1 + pgr)),
		h:  RT * tau * gt,
		s:  R * (tau*gt - (math.Log(pi) + g0 + s.g)),
		cp: -R * tau * tau * gtt,
		cv: R * (-tau*tau*gtt - d*d/(1-ppgrr)),
		w:  sqrtPos(RT * (1 + 2*pgr + pgr*pgr) / ((1 - ppgrr) + d*d/(tau*tau*gtt))),
	}
}
