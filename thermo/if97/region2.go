package if97

import "math"

// Region 2, IAPWS R7-97(2012) Section 6.1: γ = γ° + γʳ with π = p/1 MPa,
// τ = 540 K/T.
const T2star = 540.0

// Ideal-gas part of region 2, IAPWS R7-97(2012) Table 10:
// γ° = ln π + Σ n° τ^J°.
var region2J0 = [9]int{0, 1, -5, -4, -3, -2, -1, 2, 3}
var region2N0 = [9]float64{
	-0.96927686500217e1, 0.10086655968018e2, -0.56087911283020e-2,
	0.71452738081455e-1, -0.40710498223928, 0.14240819171444e1,
	-0.43839511319450e1, -0.28408632460772, 0.21268463753307e-1,
}

// Residual part of region 2, IAPWS R7-97(2012) Table 11:
// γʳ = Σ n π^I (τ-0.5)^J.
var region2Terms = []ijn{
	{1, 0, -0.17731742473213e-2}, {1, 1, -0.17834862292358e-1}, {1, 2, -0.45996013696365e-1},
	{1, 3, -0.57581259083432e-1}, {1, 6, -0.50325278727930e-1}, {2, 1, -0.33032641670203e-4},
	{2, 2, -0.18948987516315e-3}, {2, 4, -0.39392777243355e-2}, {2, 7, -0.43797295650573e-1},
	{2, 36, -0.26674547914087e-4}, {3, 0, 0.20481737692309e-7}, {3, 1, 0.43870667284435e-6},
	{3, 3, -0.32277677238570e-4}, {3, 6, -0.15033924542148e-2}, {3, 35, -0.40668253562649e-1},
	{4, 1, -0.78847309559367e-9}, {4, 2, 0.12790717852285e-7}, {4, 3, 0.48225372718507e-6},
	{5, 7, 0.22922076337661e-5}, {6, 3, -0.16714766451061e-10}, {6, 16, -0.21171472321355e-2},
	{6, 35, -0.23895741934104e2}, {7, 0, -0.59059564324270e-17}, {7, 11, -0.12621808899101e-5},
	{7, 25, -0.38946842435739e-1}, {8, 8, 0.11256211360459e-10}, {8, 36, -0.82311340897998e1},
	{9, 13, 0.19809712802088e-7}, {10, 4, 0.10406965210174e-18}, {10, 10, -0.10234747095929e-12},
	{10, 14, -0.10018179379511e-8}, {16, 29, -0.80882908646985e-10}, {16, 50, 0.10693031879409},
	{18, 57, -0.33662250574171}, {20, 20, 0.89185845355421e-24}, {20, 35, 0.30629316876232e-12},
	{20, 48, -0.42002467698208e-5}, {21, 21, -0.59056029685639e-25}, {22, 53, 0.37826947613457e-5},
	{23, 39, -0.12768608934681e-14}, {24, 26, 0.73087610595061e-28}, {24, 40, 0.55414715350778e-16},
	{24, 58, -0.94369707241210e-6},
}

var region2Poly = compile(region2Terms)

// ideal2 returns γ°-ln π, γ°_τ and γ°_ττ of region 2 at τ.
func ideal2(tau float64) (g, gt, gtt float64) {
	r := 1 / tau
	r2 := r * r
	r3 := r2 * r
	r4 := r2 * r2
	r5 := r4 * r
	t2 := tau * tau
	n := &region2N0
	g = n[0] + n[1]*tau + n[2]*r5 + n[3]*r4 + n[4]*r3 + n[5]*r2 + n[6]*r + n[7]*t2 + n[8]*t2*tau
	gt = n[1] - 5*n[2]*r5*r - 4*n[3]*r5 - 3*n[4]*r4 - 2*n[5]*r3 - n[6]*r2 + 2*n[7]*tau + 3*n[8]*t2
	gtt = 30*n[2]*r5*r2 + 20*n[3]*r5*r + 12*n[4]*r5 + 6*n[5]*r4 + 2*n[6]*r3 + 2*n[7] + 6*n[8]*tau
	return
}

// ideal2tau returns γ°_τ only.
func ideal2tau(tau float64) float64 {
	r := 1 / tau
	r2 := r * r
	r4 := r2 * r2
	n := &region2N0
	return n[1] - 5*n[2]*r4*r2 - 4*n[3]*r4*r - 3*n[4]*r4 - 2*n[5]*r2*r - n[6]*r2 + 2*n[7]*tau + 3*n[8]*tau*tau
}

// region2 evaluates the region-2 basic equation (R7-97(2012) Eqs. 15-17 and
// Table 12) at p in Pa and T in K.
func region2(p, T float64) props {
	pi, tau := p*1e-6, T2star/T
	b := tau - 0.5
	g0, g0t, g0tt := ideal2(tau)
	s := region2Poly.all(pi, b)
	// residual derivatives times powers of π, to avoid dividing by small π
	pgr := s.gi     // π γʳ_π
	ppgrr := s.gii  // π² γʳ_ππ
	grt := s.gj / b // γʳ_τ
	grtt := s.gjj / (b * b)
	pgrpt := s.gij / b // π γʳ_πτ
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

// h2 is the region-2 specific enthalpy in J/kg at p in Pa and T in K.
func h2(p, T float64) float64 {
	tau := T2star / T
	b := tau - 0.5
	return R * T * tau * (ideal2tau(tau) + fr2J(p*1e-6, b)/b)
}

// s2 is the region-2 specific entropy in J/(kg·K) at p in Pa and T in K.
func s2(p, T float64) float64 {
	tau := T2star / T
	b := tau - 0.5
	pi := p * 1e-6
	g0, g0t, _ := ideal2(tau)
	g, gj := fr2GJ(pi, b)
	return R * (tau*(g0t+gj/b) - (math.Log(pi) + g0 + g))
}

// hcp2 returns h in J/kg and cp in J/(kg·K) of region 2.
func hcp2(p, T float64) (h, cp float64) {
	tau := T2star / T
	b := tau - 0.5
	_, g0t, g0tt := ideal2(tau)
	gj, gjj := fr2JJJ(p*1e-6, b)
	return R * T * tau * (g0t + gj/b), -R * tau * tau * (g0tt + gjj/(b*b))
}

// scp2 returns s and cp in J/(kg·K) of region 2.
func scp2(p, T float64) (s, cp float64) {
	tau := T2star / T
	b := tau - 0.5
	pi := p * 1e-6
	g0, g0t, g0tt := ideal2(tau)
	g, gj, gjj := fr2GJJJ(pi, b)
	return R * (tau*(g0t+gj/b) - (math.Log(pi) + g0 + g)), -R * tau * tau * (g0tt + gjj/(b*b))
}
