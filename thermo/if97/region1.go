package if97

import "math"

// This file holds the polynomial evaluator shared by the IF97 equations of
// this package (regions 1, 2, 5 and the backward equations) and region 1.

// ijn is one published term n·a^I·b^J of an IF97 equation.
type ijn struct {
	i, j int
	n    float64
}

// gterm is a compiled term with the derived coefficients the derivatives
// need, so that no multiplication by I or J happens at run time.
type gterm struct {
	i, j                     int32 // exponents shifted to index the power tables
	n, ni, nj, nii, njj, nij float64
}

// gpoly is a polynomial Σ n·a^I·b^J compiled for fast evaluation: powers
// of a and b are tabulated once per call by repeated multiplication (no
// math.Pow).
type gpoly struct {
	t                []gterm
	loI, nI, loJ, nJ int // exponent ranges: loI .. loI+nI-1
}

// maxSpan bounds the exponent range of one variable over all equations.
const maxSpan = 104

func compile(terms []ijn) *gpoly {
	q := &gpoly{t: make([]gterm, len(terms))}
	loI, hiI, loJ, hiJ := terms[0].i, terms[0].i, terms[0].j, terms[0].j
	for _, c := range terms {
		loI, hiI = min(loI, c.i), max(hiI, c.i)
		loJ, hiJ = min(loJ, c.j), max(hiJ, c.j)
	}
	q.loI, q.nI, q.loJ, q.nJ = loI, hiI-loI+1, loJ, hiJ-loJ+1
	if q.nI > maxSpan || q.nJ > maxSpan {
		panic("if97: exponent span too large") // programming error in a table, caught by every test
	}
	for k, c := range terms {
		fi, fj := float64(c.i), float64(c.j)
		q.t[k] = gterm{
			i: int32(c.i - loI), j: int32(c.j - loJ),
			n: c.n, ni: c.n * fi, nj: c.n * fj,
			nii: c.n * fi * (fi - 1), njj: c.n * fj * (fj - 1), nij: c.n * fi * fj,
		}
	}
	return q
}

// fillPow sets dst[k] = x^(lo+k) by repeated multiplication.
func fillPow(dst []float64, x float64, lo int) {
	hi := lo + len(dst) - 1
	if hi >= 0 {
		p := 1.0
		e := 0
		for ; e < lo; e++ {
			p *= x
		}
		for ; e <= hi; e++ {
			dst[e-lo] = p
			p *= x
		}
	}
	if lo < 0 {
		r := 1 / x
		p := r
		e := -1
		for ; e > hi; e-- {
			p *= r
		}
		for ; e >= lo; e-- {
			dst[e-lo] = p
			p *= r
		}
	}
}

// gsums holds Σ n A B and its weighted variants, A = a^I, B = b^J:
// g = Σ n A B, gi = Σ n I A B, gj = Σ n J A B, gii = Σ n I(I-1) A B,
// gjj = Σ n J(J-1) A B, gij = Σ n I J A B. Dividing by a or b gives the
// partial derivatives.
type gsums struct{ g, gi, gj, gii, gjj, gij float64 }

func (q *gpoly) all(a, b float64) gsums {
	var pa, pb [maxSpan]float64
	A, B := pa[:q.nI], pb[:q.nJ]
	fillPow(A, a, q.loI)
	fillPow(B, b, q.loJ)
	var s gsums
	for k := range q.t {
		t := &q.t[k]
		x := A[t.i] * B[t.j]
		s.g += t.n * x
		s.gi += t.ni * x
		s.gj += t.nj * x
		s.gii += t.nii * x
		s.gjj += t.njj * x
		s.gij += t.nij * x
	}
	return s
}

// sum returns Σ n a^I b^J.
func (q *gpoly) sum(a, b float64) float64 {
	var pa, pb [maxSpan]float64
	A, B := pa[:q.nI], pb[:q.nJ]
	fillPow(A, a, q.loI)
	fillPow(B, b, q.loJ)
	var s0, s1 float64
	t := q.t
	k := 0
	for ; k+1 < len(t); k += 2 {
		s0 += t[k].n * A[t[k].i] * B[t[k].j]
		s1 += t[k+1].n * A[t[k+1].i] * B[t[k+1].j]
	}
	if k < len(t) {
		s0 += t[k].n * A[t[k].i] * B[t[k].j]
	}
	return s0 + s1
}

// sumJ returns Σ n J a^I b^J.
func (q *gpoly) sumJ(a, b float64) float64 {
	var pa, pb [maxSpan]float64
	A, B := pa[:q.nI], pb[:q.nJ]
	fillPow(A, a, q.loI)
	fillPow(B, b, q.loJ)
	var s0, s1 float64
	t := q.t
	k := 0
	for ; k+1 < len(t); k += 2 {
		s0 += t[k].nj * A[t[k].i] * B[t[k].j]
		s1 += t[k+1].nj * A[t[k+1].i] * B[t[k+1].j]
	}
	if k < len(t) {
		s0 += t[k].nj * A[t[k].i] * B[t[k].j]
	}
	return s0 + s1
}

// sum0J returns Σ n a^I b^J and Σ n J a^I b^J.
func (q *gpoly) sum0J(a, b float64) (g, gj float64) {
	var pa, pb [maxSpan]float64
	A, B := pa[:q.nI], pb[:q.nJ]
	fillPow(A, a, q.loI)
	fillPow(B, b, q.loJ)
	for k := range q.t {
		t := &q.t[k]
		x := A[t.i] * B[t.j]
		g += t.n * x
		gj += t.nj * x
	}
	return g, gj
}

// sumJJJ returns Σ n J a^I b^J and Σ n J(J-1) a^I b^J.
func (q *gpoly) sumJJJ(a, b float64) (gj, gjj float64) {
	var pa, pb [maxSpan]float64
	A, B := pa[:q.nI], pb[:q.nJ]
	fillPow(A, a, q.loI)
	fillPow(B, b, q.loJ)
	for k := range q.t {
		t := &q.t[k]
		x := A[t.i] * B[t.j]
		gj += t.nj * x
		gjj += t.njj * x
	}
	return gj, gjj
}

// sum0JJJ returns Σ n A B, Σ n J A B and Σ n J(J-1) A B.
func (q *gpoly) sum0JJJ(a, b float64) (g, gj, gjj float64) {
	var pa, pb [maxSpan]float64
	A, B := pa[:q.nI], pb[:q.nJ]
	fillPow(A, a, q.loI)
	fillPow(B, b, q.loJ)
	for k := range q.t {
		t := &q.t[k]
		x := A[t.i] * B[t.j]
		g += t.n * x
		gj += t.nj * x
		gjj += t.njj * x
	}
	return g, gj, gjj
}

// Region 1, IAPWS R7-97(2012) Section 5.1.

// Reducing quantities of region 1 (R7-97(2012) Eq. 7): p* = 16.53 MPa,
// T* = 1386 K.
const (
	p1star = 16.53e6
	T1star = 1386.0
)

// Coefficients and exponents of the region-1 Gibbs free energy,
// IAPWS R7-97(2012) Table 2: γ = Σ n (7.1-π)^I (τ-1.222)^J.
var region1Terms = []ijn{
	{0, -2, 0.14632971213167}, {0, -1, -0.84548187169114}, {0, 0, -0.37563603672040e1},
	{0, 1, 0.33855169168385e1}, {0, 2, -0.95791963387872}, {0, 3, 0.15772038513228},
	{0, 4, -0.16616417199501e-1}, {0, 5, 0.81214629983568e-3}, {1, -9, 0.28319080123804e-3},
	{1, -7, -0.60706301565874e-3}, {1, -1, -0.18990068218419e-1}, {1, 0, -0.32529748770505e-1},
	{1, 1, -0.21841717175414e-1}, {1, 3, -0.52838357969930e-4}, {2, -3, -0.47184321073267e-3},
	{2, 0, -0.30001780793026e-3}, {2, 1, 0.47661393906987e-4}, {2, 3, -0.44141845330846e-5},
	{2, 17, -0.72694996297594e-15}, {3, -4, -0.31679644845054e-4}, {3, 0, -0.28270797985312e-5},
	{3, 6, -0.85205128120103e-9}, {4, -5, -0.22425281908000e-5}, {4, -2, -0.65171222895601e-6},
	{4, 10, -0.14341729937924e-12}, {5, -8, -0.40516996860117e-6}, {8, -11, -0.12734301741641e-8},
	{8, -6, -0.17424871230634e-9}, {21, -29, -0.68762131295531e-18}, {23, -31, 0.14478307828521e-19},
	{29, -38, 0.26335781662795e-22}, {30, -39, -0.11947622640071e-22}, {31, -40, 0.18228094581404e-23},
	{32, -41, -0.93537087292458e-25},
}

var region1Poly = compile(region1Terms)

// region1 evaluates the region-1 basic equation (R7-97(2012) Eq. 7 and
// Table 3) at p in Pa and T in K.
func region1(p, T float64) props {
	pi, tau := p/p1star, T1star/T
	a, b := 7.1-pi, tau-1.222
	s := region1Poly.all(a, b)
	gp := -s.gi / a         // γ_π
	gpp := s.gii / (a * a)  // γ_ππ
	gt := s.gj / b          // γ_τ
	gtt := s.gjj / (b * b)  // γ_ττ
	gpt := -s.gij / (a * b) // γ_πτ
	RT := R * T
	d := gp - tau*gpt
	return props{
		p:  p,
		T:  T,
		v:  RT / p * pi * gp,
		u:  RT * (tau*gt - pi*gp),
		h:  RT * tau * gt,
		s:  R * (tau*gt - s.g),
		cp: -R * tau * tau * gtt,
		cv: R * (-tau*tau*gtt + d*d/gpp),
		w:  sqrtPos(RT * gp * gp / (d*d/(tau*tau*gtt) - gpp)),
	}
}

// h1 is the region-1 specific enthalpy in J/kg at p in Pa and T in K.
func h1(p, T float64) float64 {
	tau := T1star / T
	b := tau - 1.222
	return R * T * tau * fr1J(7.1-p/p1star, b) / b
}

// s1 is the region-1 specific entropy in J/(kg·K) at p in Pa and T in K.
func s1(p, T float64) float64 {
	tau := T1star / T
	b := tau - 1.222
	g, gj := fr1GJ(7.1-p/p1star, b)
	return R * (tau*gj/b - g)
}

// hcp1 returns h in J/kg and cp in J/(kg·K) of region 1 (for Newton on T).
func hcp1(p, T float64) (h, cp float64) {
	tau := T1star / T
	b := tau - 1.222
	gj, gjj := fr1JJJ(7.1-p/p1star, b)
	return R * T * tau * gj / b, -R * tau * tau * gjj / (b * b)
}

// scp1 returns s in J/(kg·K) and cp in J/(kg·K) of region 1.
func scp1(p, T float64) (s, cp float64) {
	tau := T1star / T
	b := tau - 1.222
	g, gj, gjj := fr1GJJJ(7.1-p/p1star, b)
	return R * (tau*gj/b - g), -R * tau * tau * gjj / (b * b)
}

// sqrtPos is math.Sqrt for x >= 0 and NaN otherwise (so that a state with
// an unphysical derivative surfaces as non-finite and is rejected).
func sqrtPos(x float64) float64 {
	if x < 0 {
		return math.NaN()
	}
	return math.Sqrt(x)
}
