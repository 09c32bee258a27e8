package helmholtz

import (
	"fmt"
	"math"
	"sort"

	"github.com/exergywatch/exergywatch/thermo/internal/fastmath"
)

// Fixed capacities of the per-temperature work arrays. They live on the
// stack, so an evaluation allocates nothing. New rejects a fluid that needs
// more.
const (
	maxPower = 64 // power (polynomial and exponential) residual terms
	maxGauss = 16 // Gaussian residual terms
	maxAssoc = 4  // Gao et al. (2023) association terms
	maxNA    = 4  // non-analytic terms (IAPWS-95, Span-Wagner)
	maxDexp  = 31 // largest integer delta exponent d in power terms (2^k - 1: also a bit mask)
	maxLexp  = 8  // largest integer l in exp(-delta^l)
	maxUniqT = 64 // distinct tau exponents of the power terms
)

// eos holds one multiparameter equation in flat coefficient arrays, the
// terms of testdata/reference/eos/NOTES.md section 5:
//
//	alpha_r = sum power:    n delta^d tau^t exp(-delta^l)            (l = 0: no exponential)
//	        + sum gaussian: n delta^d tau^t exp(-eta (delta-eps)^2 - beta (tau-gamma)^2)
//	        + sum assoc:    n delta^d tau^t exp(eta (delta-eps)^2 + 1/(beta (tau-gamma)^2 + b))
//	        + sum nonanalytic: n Delta^b delta psi
//	alpha_0 = ln delta + a1 + a2 tau + c ln tau + sum n tau^t
//	        + sum n ln(1 - exp(-theta tau)) + sum n ln(c + d exp(theta tau))
type eos struct {
	// power terms
	pN   []float64
	pD   []int
	pT   []float64
	pL   []int
	pTi  []int // index of pT[k] in uniqT
	uniq []float64
	maxD int
	pDf  []float64   // float64(pD)
	grp  []termGroup // power terms grouped by l (terms are sorted by l)

	// The power terms sharing l and d differ only in n tau^t: tauPart sums
	// them into one coefficient (and its tau derivatives) per (l, d) pair,
	// so the delta-dependent work of residual is per pair.
	pPair []int       // pair index of each power term
	prS   []int       // terms prS[j]..prS[j+1]-1 form pair j (sorted by l, then d)
	pTT   []float64   // t (t-1) of each power term
	prD   []int       // d of each pair
	prDf  []float64   // float64(prD)
	prGrp []termGroup // pairs grouped by l, in the order of grp

	// gaussian terms
	gN, gD, gT, gEta, gEps, gBeta, gGam []float64
	gDi                                 []int
	gSame                               []bool    // eta and eps equal to the previous term's: its delta factor is reused
	g0                                  []float64 // exp(-eta eps^2): delta -> 0 limit of the delta factor

	// association terms (Gao et al. 2023)
	aN, aD, aT, aEta, aEps, aBeta, aGam, aB []float64
	aDi                                     []int
	a0                                      []float64 // exp(eta eps^2)

	// non-analytic terms
	nN, nA, nB, nBeta, nACap, nBCap, nC, nD []float64
	nA2                                     []int     // 2(a-1) when a non-negative integer (q^(a-1) = |delta-1|^(2(a-1))), else -1
	nIB, nIB1, n2B, n4B, nAB2               []float64 // 1/(2 beta), 1/(2 beta) - 1, 2/beta, 4/beta, (A/beta)^2

	// ideal part
	i1, i2   float64   // lead a1 + a2 tau (CoolProp offset included when kept)
	iLog     float64   // c ln tau
	ipN, ipT []float64 // sum n tau^t
	peN, peT []float64 // sum n ln(1 - exp(-theta tau))
	pgN, pgT []float64 // sum n ln(c + d exp(theta tau))
	pgC, pgD []float64
}

// termGroup is a run of power terms sharing the exponent l of exp(-delta^l).
type termGroup struct {
	l, start, end int
}

// resid is the residual Helmholtz energy and its derivatives, scaled:
// A = alpha_r, D = delta ar_d, DD = delta^2 ar_dd, T = tau ar_t,
// TT = tau^2 ar_tt, DT = delta tau ar_dt.
type resid struct {
	A, D, DD, T, TT, DT float64
	DDD                 float64 // delta^3 ar_ddd without the non-analytic terms (only steers the density iteration)
}

// ideal is the ideal-gas part, scaled like resid (alpha_0 depends on delta
// only through ln delta: delta a0_d = 1, delta^2 a0_dd = -1, a0_dt = 0).
type ideal struct {
	A, T, TT float64
}

// tauPart caches everything of alpha_r that depends on tau only; a density
// iteration at fixed T reuses it. Value type, stack allocated.
type tauPart struct {
	tau  float64
	pp0  [maxPower]float64 // per (l, d) pair: sum of n tau^t
	pp1  [maxPower]float64 // sum of n t tau^t
	pp2  [maxPower]float64 // sum of n t (t-1) tau^t
	gw   [maxGauss]float64 // n tau^t exp(-beta (tau-gamma)^2)
	gt   [maxGauss]float64 // tau d/dtau ln(term)
	gtt  [maxGauss]float64 // tau^2 F_tt / F
	aw   [maxAssoc]float64 // n tau^t exp(1/u)
	at   [maxAssoc]float64
	att  [maxAssoc]float64
	hasN bool
	b2   float64 // lim delta->0 of ar_d: B rho_r, B the second virial coefficient
	c3   float64 // C rho_r^2, C the third virial coefficient, without the non-analytic terms
}

func toInts(name string, v []float64, max int) ([]int, error) {
	out := make([]int, len(v))
	for i, x := range v {
		if x != math.Trunc(x) || x < 0 || x > float64(max) {
			return nil, fmt.Errorf("%s exponent %g is not an integer in 0..%d", name, x, max)
		}
		out[i] = int(x)
	}
	return out, nil
}

func sameLen(typ string, n int, arrays ...[]float64) error {
	for _, a := range arrays {
		if len(a) != n {
			return fmt.Errorf("%s term arrays differ in length", typ)
		}
	}
	return nil
}

// buildEOS converts the JSON term lists into flat arrays. dropOffset leaves
// out CoolProp's enthalpy_entropy_offset term (published reference state).
func buildEOS(e *jsonEOS, dropOffset bool) (*eos, error) {
	q := &eos{}
	for _, t := range e.Alphar {
		n := len(t.N)
		switch t.Type {
		case "power":
			if err := sameLen(t.Type, n, t.D, t.T, t.L); err != nil {
				return nil, err
			}
			d, err := toInts("power d", t.D, maxDexp)
			if err != nil {
				return nil, err
			}
			l, err := toInts("power l", t.L, maxLexp)
			if err != nil {
				return nil, err
			}
			q.pN = append(q.pN, t.N...)
			q.pD = append(q.pD, d...)
			q.pT = append(q.pT, t.T...)
			q.pL = append(q.pL, l...)
		case "gaussian":
			if err := sameLen(t.Type, n, t.D, t.T, t.Eta, t.Epsilon, t.Beta, t.Gamma); err != nil {
				return nil, err
			}
			d, err := toInts("gaussian d", t.D, maxDexp)
			if err != nil {
				return nil, err
			}
			q.gN = append(q.gN, t.N...)
			q.gD = append(q.gD, t.D...)
			q.gDi = append(q.gDi, d...)
			q.gT = append(q.gT, t.T...)
			q.gEta = append(q.gEta, t.Eta...)
			q.gEps = append(q.gEps, t.Epsilon...)
			q.gBeta = append(q.gBeta, t.Beta...)
			q.gGam = append(q.gGam, t.Gamma...)
		case "gao_association":
			if err := sameLen(t.Type, n, t.D, t.T, t.Eta, t.Epsilon, t.Beta, t.Gamma, t.Bsmall); err != nil {
				return nil, err
			}
			d, err := toInts("association d", t.D, maxDexp)
			if err != nil {
				return nil, err
			}
			q.aN = append(q.aN, t.N...)
			q.aD = append(q.aD, t.D...)
			q.aDi = append(q.aDi, d...)
			q.aT = append(q.aT, t.T...)
			q.aEta = append(q.aEta, t.Eta...)
			q.aEps = append(q.aEps, t.Epsilon...)
			q.aBeta = append(q.aBeta, t.Beta...)
			q.aGam = append(q.aGam, t.Gamma...)
			q.aB = append(q.aB, t.Bsmall...)
		case "nonanalytic":
			if err := sameLen(t.Type, n, t.Asmall, t.Bsmall, t.Beta, t.ACap, t.BCap, t.CCap, t.DCap); err != nil {
				return nil, err
			}
			q.nN = append(q.nN, t.N...)
			q.nA = append(q.nA, t.Asmall...)
			q.nB = append(q.nB, t.Bsmall...)
			q.nBeta = append(q.nBeta, t.Beta...)
			q.nACap = append(q.nACap, t.ACap...)
			q.nBCap = append(q.nBCap, t.BCap...)
			q.nC = append(q.nC, t.CCap...)
			q.nD = append(q.nD, t.DCap...)
			for i, beta := range t.Beta {
				ib := 1 / (2 * beta)
				q.nIB = append(q.nIB, ib)
				q.nIB1 = append(q.nIB1, ib-1)
				q.n2B = append(q.n2B, 2/beta)
				q.n4B = append(q.n4B, 4/beta)
				q.nAB2 = append(q.nAB2, t.ACap[i]*t.ACap[i]/(beta*beta))
			}
			for _, a := range t.Asmall {
				m := 2 * (a - 1)
				if m == math.Trunc(m) && m >= 0 && m <= 16 {
					q.nA2 = append(q.nA2, int(m))
				} else {
					q.nA2 = append(q.nA2, -1)
				}
			}
		default:
			return nil, fmt.Errorf("unknown residual term type %q", t.Type)
		}
	}
	// Sort the power terms by l (stable) so that residual runs over groups
	// without a branch per term; the sum is the same up to rounding.
	idx := make([]int, len(q.pN))
	for i := range idx {
		idx[i] = i
	}
	// Within a group, sort by d as well: terms sharing (l, d) form one run.
	sort.SliceStable(idx, func(a, b int) bool {
		ia, ib := idx[a], idx[b]
		if q.pL[ia] != q.pL[ib] {
			return q.pL[ia] < q.pL[ib]
		}
		return q.pD[ia] < q.pD[ib]
	})
	pN, pD, pT, pL := q.pN, q.pD, q.pT, q.pL
	q.pN, q.pD, q.pT, q.pL = make([]float64, len(idx)), make([]int, len(idx)), make([]float64, len(idx)), make([]int, len(idx))
	for i, j := range idx {
		q.pN[i], q.pD[i], q.pT[i], q.pL[i] = pN[j], pD[j], pT[j], pL[j]
		q.pDf = append(q.pDf, float64(pD[j]))
	}
	for i := 0; i < len(q.pL); {
		j := i
		for j < len(q.pL) && q.pL[j] == q.pL[i] {
			j++
		}
		q.grp = append(q.grp, termGroup{l: q.pL[i], start: i, end: j})
		ps := len(q.prD)
		for k := i; k < j; k++ {
			pi := -1
			for m := ps; m < len(q.prD); m++ {
				if q.prD[m] == q.pD[k] {
					pi = m
					break
				}
			}
			if pi < 0 {
				q.prD = append(q.prD, q.pD[k])
				q.prDf = append(q.prDf, float64(q.pD[k]))
				pi = len(q.prD) - 1
			}
			q.pPair = append(q.pPair, pi)
			q.pTT = append(q.pTT, q.pT[k]*(q.pT[k]-1))
		}
		q.prGrp = append(q.prGrp, termGroup{l: q.pL[i], start: ps, end: len(q.prD)})
		i = j
	}
	for k := range q.pPair {
		if k == 0 || q.pPair[k] != q.pPair[k-1] {
			if q.pPair[k] != len(q.prS) {
				return nil, fmt.Errorf("power terms of one (l, d) pair are not contiguous")
			}
			q.prS = append(q.prS, k)
		}
	}
	q.prS = append(q.prS, len(q.pPair))
	if len(q.pN) > maxPower || len(q.gN) > maxGauss || len(q.aN) > maxAssoc || len(q.nN) > maxNA {
		return nil, fmt.Errorf("too many terms for the fixed work arrays")
	}
	for k, t := range q.pT {
		idx := -1
		for j, u := range q.uniq {
			if u == t {
				idx = j
				break
			}
		}
		if idx < 0 {
			q.uniq = append(q.uniq, t)
			idx = len(q.uniq) - 1
		}
		q.pTi = append(q.pTi, idx)
		if q.pD[k] > q.maxD {
			q.maxD = q.pD[k]
		}
	}
	for k, d := range q.gDi {
		q.maxD = max(q.maxD, d)
		q.gSame = append(q.gSame, k > 0 && q.gEta[k] == q.gEta[k-1] && q.gEps[k] == q.gEps[k-1])
		q.g0 = append(q.g0, fastmath.Exp(-q.gEta[k]*q.gEps[k]*q.gEps[k]))
	}
	for k, d := range q.aDi {
		q.maxD = max(q.maxD, d)
		q.a0 = append(q.a0, fastmath.Exp(q.aEta[k]*q.aEps[k]*q.aEps[k]))
	}
	if len(q.uniq) > maxUniqT {
		return nil, fmt.Errorf("too many distinct tau exponents")
	}
	for _, t := range e.Alpha0 {
		switch t.Type {
		case "lead":
			q.i1 += t.A1
			q.i2 += t.A2
		case "enthalpy_entropy_offset":
			if !dropOffset {
				q.i1 += t.A1
				q.i2 += t.A2
			}
		case "log_tau":
			q.iLog += t.A
		case "power":
			if err := sameLen(t.Type, len(t.N), t.T); err != nil {
				return nil, err
			}
			q.ipN = append(q.ipN, t.N...)
			q.ipT = append(q.ipT, t.T...)
		case "planck_einstein":
			if err := sameLen(t.Type, len(t.N), t.Theta); err != nil {
				return nil, err
			}
			q.peN = append(q.peN, t.N...)
			q.peT = append(q.peT, t.Theta...)
		case "planck_einstein_generalized":
			if err := sameLen(t.Type, len(t.N), t.Theta, t.C, t.D); err != nil {
				return nil, err
			}
			q.pgN = append(q.pgN, t.N...)
			q.pgT = append(q.pgT, t.Theta...)
			q.pgC = append(q.pgC, t.C...)
			q.pgD = append(q.pgD, t.D...)
		default:
			return nil, fmt.Errorf("unknown ideal-gas term type %q", t.Type)
		}
	}
	return q, nil
}

// powi returns x^n for a small non-negative integer n without math.Pow.
func powi(x float64, n int) float64 {
	r := 1.0
	for n > 0 {
		if n&1 == 1 {
			r *= x
		}
		x *= x
		n >>= 1
	}
	return r
}

// tauPow returns tau^t: when 8t is an integer (every exponent of IAPWS-95
// and Span-Wagner, most of the others) as powi(tau, floor t) times
// tau^(1/2), tau^(1/4), tau^(1/8) factors (r = [sqrt tau, tau^(1/4),
// tau^(1/8)]), else exp(t ln tau).
func tauPow(tau float64, r *[3]float64, lnTau, t float64) float64 {
	t8 := 8 * t
	if t8 != math.Trunc(t8) || math.Abs(t8) > 512 {
		return fastmath.Exp(t * lnTau)
	}
	n := int(t8)
	neg := n < 0
	if neg {
		n = -n
	}
	v := powi(tau, n>>3)
	if n&4 != 0 {
		v *= r[0]
	}
	if n&2 != 0 {
		v *= r[1]
	}
	if n&1 != 0 {
		v *= r[2]
	}
	if neg {
		return 1 / v
	}
	return v
}

// tauPart fills the tau-only factors of the residual terms.
func (q *eos) tauPart(tau float64, tp *tauPart) {
	tp.tau = tau
	lnTau := math.Log(tau)
	var roots [3]float64
	roots[0] = math.Sqrt(tau)
	roots[1] = math.Sqrt(roots[0])
	roots[2] = math.Sqrt(roots[1])
	var ut [maxUniqT]float64
	for j, t := range q.uniq {
		ut[j] = tauPow(tau, &roots, lnTau, t)
	}
	b2, c3 := 0.0, 0.0
	np := len(q.prD)
	pp0, pp1, pp2 := tp.pp0[:np], tp.pp1[:np], tp.pp2[:np]
	pN, pT, pTT, pTi := q.pN, q.pT[:len(q.pN)], q.pTT[:len(q.pN)], q.pTi[:len(q.pN)]
	for _, gr := range q.prGrp {
		for j := gr.start; j < gr.end; j++ {
			var s0, s1, s2 float64
			for k := q.prS[j]; k < q.prS[j+1]; k++ {
				w := pN[k] * ut[pTi[k]]
				s0 += w
				s1 += w * pT[k]
				s2 += w * pTT[k]
			}
			pp0[j], pp1[j], pp2[j] = s0, s1, s2
			switch {
			case q.prD[j] == 1:
				b2 += s0
				if gr.l == 1 {
					c3 -= s0 // delta exp(-delta) = delta - delta^2 + ...
				}
			case q.prD[j] == 2:
				c3 += s0
			}
		}
	}
	for k, n := range q.gN {
		t, b, g := q.gT[k], q.gBeta[k], q.gGam[k]
		dt := tau - g
		tp.gw[k] = n * fastmath.Exp(t*lnTau-b*dt*dt)
		gt := t - 2*b*tau*dt
		tp.gt[k] = gt
		tp.gtt[k] = gt*gt - t - 2*b*tau*tau
		switch q.gDi[k] {
		case 1:
			b2 += tp.gw[k] * q.g0[k]
			c3 += tp.gw[k] * q.g0[k] * 2 * q.gEta[k] * q.gEps[k]
		case 2:
			c3 += tp.gw[k] * q.g0[k]
		}
	}
	for k, n := range q.aN {
		t, b, g, bb := q.aT[k], q.aBeta[k], q.aGam[k], q.aB[k]
		dt := tau - g
		u := b*dt*dt + bb
		tp.aw[k] = n * fastmath.Exp(t*lnTau+1/u)
		ht := t - 2*b*tau*dt/(u*u)
		htp := -2 * b * ((2*tau-g)*u - 4*b*tau*dt*dt) / (u * u * u)
		tp.at[k] = ht
		tp.att[k] = ht*ht - ht + tau*htp
		switch q.aDi[k] {
		case 1:
			b2 += tp.aw[k] * q.a0[k]
			c3 -= tp.aw[k] * q.a0[k] * 2 * q.aEta[k] * q.aEps[k]
		case 2:
			c3 += tp.aw[k] * q.a0[k]
		}
	}
	tp.hasN = len(q.nN) > 0
	tp.b2 = b2 // without the non-analytic terms: see b2NonAnalytic
	tp.c3 = 2 * c3
}

// residual evaluates alpha_r and its scaled derivatives at delta using the
// tau factors in tp. When full is false only A, D and DD are computed (all a
// density iteration or the Maxwell construction needs).
func (q *eos) residual(tp *tauPart, delta float64, full bool) resid {
	var r resid
	var dp [maxDexp + 1]float64
	dp[0] = 1
	for i := 1; i <= q.maxD; i++ {
		dp[i] = dp[i-1] * delta
	}
	np := len(q.prD)
	pp0, pp1, pp2 := tp.pp0[:np], tp.pp1[:np], tp.pp2[:np]
	prD, prDf := q.prD[:np], q.prDf[:np]
	for _, gr := range q.prGrp {
		e, lx, llx, lllx := 1.0, 0.0, 0.0, 0.0
		if gr.l > 0 {
			x := powi(delta, gr.l) // delta^l
			e = fastmath.Exp(-x)
			fl := float64(gr.l)
			lx, llx = fl*x, fl*fl*x
			lllx = fl * llx
		}
		if full {
			for j := gr.start; j < gr.end; j++ {
				de := dp[prD[j]&maxDexp] * e
				F := pp0[j] * de
				g := prDf[j] - lx
				Ft := pp1[j] * de
				h := g*(g-1) - llx
				r.A += F
				r.D += F * g
				r.DD += F * h
				r.DDD += F * (g*h - (2*g-1)*llx - lllx - 2*h)
				r.T += Ft
				r.TT += pp2[j] * de
				r.DT += Ft * g
			}
		} else {
			for j := gr.start; j < gr.end; j++ {
				F := pp0[j] * dp[prD[j]&maxDexp] * e
				g := prDf[j] - lx
				h := g*(g-1) - llx
				r.A += F
				r.D += F * g
				r.DD += F * h
				r.DDD += F * (g*h - (2*g-1)*llx - lllx - 2*h)
			}
		}
	}
	var ge, g2 float64 // exp(-eta (delta-eps)^2) and 2 eta delta (delta-eps) of the previous term
	for k := range q.gN {
		eta, eps := q.gEta[k], q.gEps[k]
		if !q.gSame[k] {
			de := delta - eps
			ge = fastmath.Exp(-eta * de * de)
			g2 = 2 * eta * delta * de
		}
		F := tp.gw[k] * dp[q.gDi[k]] * ge
		gd := q.gD[k] - g2
		h := gd*gd - q.gD[k] - 2*eta*delta*delta
		r.A += F
		r.D += F * gd
		r.DD += F * h
		// delta^3 F_ddd / F = gd h + (2 gd - 1) D1(gd) + D1^2(gd) - 2 h, D1 = delta d/ddelta
		r.DDD += F * (gd*h - (2*gd-1)*2*eta*delta*(2*delta-eps) - 2*eta*delta*(4*delta-eps) - 2*h)
		if full {
			r.T += F * tp.gt[k]
			r.TT += F * tp.gtt[k]
			r.DT += F * gd * tp.gt[k]
		}
	}
	for k := range q.aN {
		eta, eps := q.aEta[k], q.aEps[k]
		de := delta - eps
		F := tp.aw[k] * dp[q.aDi[k]] * fastmath.Exp(eta*de*de)
		gd := q.aD[k] + 2*eta*delta*de
		h := gd*gd - q.aD[k] + 2*eta*delta*delta
		r.A += F
		r.D += F * gd
		r.DD += F * h
		r.DDD += F * (gd*h + (2*gd-1)*2*eta*delta*(2*delta-eps) + 2*eta*delta*(4*delta-eps) - 2*h)
		if full {
			r.T += F * tp.at[k]
			r.TT += F * tp.att[k]
			r.DT += F * gd * tp.at[k]
		}
	}
	if tp.hasN {
		q.nonAnalytic(tp.tau, delta, &r)
	}
	return r
}

// nonAnalytic adds the non-analytic critical-region terms (IAPWS-95 terms
// 55-56, Span-Wagner terms 40-42); formulas of NOTES.md section 5, arranged
// so that no power of q = (delta-1)^2 with a negative exponent appears. The
// terms are singular at delta = tau = 1; there delta is moved by 1e-9.
func (q *eos) nonAnalytic(tau, delta float64, r *resid) {
	dm := delta - 1
	if math.Abs(dm) < 1e-9 && math.Abs(tau-1) < 1e-9 {
		dm = 1e-9
		delta = 1 + dm
	}
	qq := dm * dm
	tm := tau - 1
	lnq := math.Inf(-1)
	if qq > 0 {
		lnq = math.Log(qq)
	}
	// Values shared by consecutive terms with equal a, beta, A, B (both
	// IAPWS-95 terms; the first two Span-Wagner terms).
	pa, pbeta, pA, pB := math.NaN(), math.NaN(), math.NaN(), math.NaN()
	var qib1, qa1, qib, theta, Delta, lnDelta, dOver, Dd, Ddd float64
	pC, pD, psi := math.NaN(), math.NaN(), 0.0 // psi shared by terms with equal C and D
	for k, n := range q.nN {
		a, b, beta, A, B, C, D := q.nA[k], q.nB[k], q.nBeta[k], q.nACap[k], q.nBCap[k], q.nC[k], q.nD[k]
		ex := C*qq + D*tm*tm
		if ex > 200 {
			// psi < 1e-86: the term and its derivatives vanish in double
			// precision next to the O(1) remainder of alpha_r.
			continue
		}
		if C != pC || D != pD {
			pC, pD = C, D
			psi = fastmath.Exp(-ex)
		}
		if a != pa || beta != pbeta || A != pA || B != pB {
			pa, pbeta, pA, pB = a, beta, A, B
			qib1, qa1, qib = 0, 0, 0 // q^(1/(2beta)-1), q^(a-1), q^(1/(2beta))
			if qq > 0 {
				qib1 = fastmath.Exp(q.nIB1[k] * lnq)
				if m := q.nA2[k]; m >= 0 {
					qa1 = powi(math.Abs(dm), m)
				} else {
					qa1 = fastmath.Exp((a - 1) * lnq)
				}
				qib = qib1 * qq
			}
			theta = -tm + A*qib
			Delta = theta*theta + B*qa1*qq
			lnDelta = math.Log(Delta)
			// Delta derivatives with respect to delta.
			dOver = A*theta*q.n2B[k]*qib1 + 2*B*a*qa1 // Delta_d/(delta-1)
			Dd = dm * dOver
			Ddd = dOver + 4*B*a*(a-1)*qa1 + 2*q.nAB2[k]*qib1*qib1*qq + A*theta*q.n4B[k]*q.nIB1[k]*qib1
		}
		var Db, Db1, Db2 float64 // Delta^b, Delta^(b-1), Delta^(b-2)
		if Delta > 0 {
			iD := 1 / Delta
			Db = fastmath.Exp(b * lnDelta)
			Db1 = Db * iD
			Db2 = Db1 * iD
		}
		Dbd := b * Db1 * Dd
		Dbdd := b * (Db1*Ddd + (b-1)*Db2*Dd*Dd)
		Dbt := -2 * theta * b * Db1
		Dbtt := 2*b*Db1 + 4*theta*theta*b*(b-1)*Db2
		Dbdt := -A*b*q.n2B[k]*Db1*dm*qib1 - 2*theta*b*(b-1)*Db2*Dd
		psid := -2 * C * dm * psi
		psidd := (2*C*qq - 1) * 2 * C * psi
		psit := -2 * D * tm * psi
		pstt := (2*D*tm*tm - 1) * 2 * D * psi
		psidt := 4 * C * D * dm * tm * psi

		F := n * Db * delta * psi
		Fd := n * (Db*(psi+delta*psid) + Dbd*delta*psi)
		Fdd := n * (Db*(2*psid+delta*psidd) + 2*Dbd*(psi+delta*psid) + Dbdd*delta*psi)
		Ft := n * delta * (Dbt*psi + Db*psit)
		Ftt := n * delta * (Dbtt*psi + 2*Dbt*psit + Db*pstt)
		Fdt := n * (Db*(psit+delta*psidt) + delta*Dbd*psit + Dbt*(psi+delta*psid) + Dbdt*delta*psi)
		r.A += F
		r.D += delta * Fd
		r.DD += delta * delta * Fdd
		r.T += tau * Ft
		r.TT += tau * tau * Ftt
		r.DT += delta * tau * Fdt
	}
}

// ideal evaluates alpha_0 without its ln delta term, and the scaled tau
// derivatives.
func (q *eos) ideal(tau float64) ideal {
	lnTau := math.Log(tau)
	var o ideal
	o.A = q.i1 + q.i2*tau + q.iLog*lnTau
	o.T = q.i2*tau + q.iLog
	o.TT = -q.iLog
	for k, n := range q.ipN {
		t := q.ipT[k]
		var v float64
		switch t {
		case 0:
			v = n
		case 1:
			v = n * tau
		default:
			v = n * fastmath.Exp(t*lnTau)
		}
		o.A += v
		o.T += t * v
		o.TT += t * (t - 1) * v
	}
	for k, n := range q.peN {
		x := q.peT[k] * tau
		e := fastmath.Exp(-x) // exp(-theta tau)
		o.A += n * math.Log1p(-e)
		em := 1 - e // exact enough unless x is small
		if x < 0.5 {
			em = -math.Expm1(-x)
		}
		o.T += n * x * e / em
		o.TT -= n * x * x * e / (em * em)
	}
	for k, n := range q.pgN {
		x := q.pgT[k] * tau
		c, d := q.pgC[k], q.pgD[k]
		e := fastmath.Exp(x)
		den := c + d*e
		o.A += n * math.Log(den)
		o.T += n * x * d * e / den
		o.TT += n * x * x * c * d * e / (den * den)
	}
	return o
}

// b2NonAnalytic is the delta -> 0 limit of ar_d of the non-analytic terms:
// there q = 1, theta = 1 - tau + A, Delta = theta^2 + B, ar_d -> n Delta^b psi.
func (q *eos) b2NonAnalytic(tau float64) float64 {
	b2 := 0.0
	for k, n := range q.nN {
		tm := tau - 1
		ex := q.nC[k] + q.nD[k]*tm*tm
		if ex > 200 {
			continue
		}
		th := -tm + q.nACap[k]
		b2 += n * math.Pow(th*th+q.nBCap[k], q.nB[k]) * fastmath.Exp(-ex)
	}
	return b2
}
