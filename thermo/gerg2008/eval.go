package gerg2008

import (
	"math"

	"github.com/exergywatch/exergywatch/thermo/internal/fastmath"
)

// tauCache holds the temperature-dependent factors of the merged residual
// terms, summed per (d, c, e) group: g0 = sum n tau^t, g1 = sum n t tau^t
// and g2 = sum n t (t-1) tau^t; it lives on the caller's stack.
type tauCache struct {
	T, tau     float64
	B          float64 // second virial coefficient, dm3/mol (a starting value for the density)
	g0, g1, g2 [maxGroups]float64
}

func (m *Mixture) setTau(tc *tauCache, T float64) {
	tc.T = T
	tc.tau = m.tr / T
	lt := math.Log(tc.tau)
	ts := m.ts
	var pw [maxTerms]float64
	if ts.powSplit {
		// tau^t = tau^floor(t) tau^frac(t): integer powers by binary
		// splitting (a few roundings, as accurate as exp(t ln tau), whose
		// argument carries the rounding of ln tau times t), one exponential
		// per distinct fractional part.
		var fr [maxFrac]float64
		for j, f := range ts.fracs {
			fr[j] = fastmath.Exp(f * lt)
		}
		var ip, in [maxIntPow + 1]float64 // tau^k and tau^-k
		ip[0], in[0] = 1, 1
		if ts.maxIntT >= 1 {
			ip[1], in[1] = tc.tau, 1/tc.tau
		}
		for k := 2; k <= ts.maxIntT; k++ {
			h := k >> 1
			ip[k] = ip[h] * ip[k-h]
			in[k] = in[h] * in[k-h]
		}
		for i, n := range ts.tInt {
			v := ip[0]
			if n >= 0 {
				v = ip[n&maxIntPow]
			} else {
				v = in[(-n)&maxIntPow]
			}
			if j := ts.tFrac[i]; j >= 0 {
				v *= fr[j]
			}
			pw[i] = v
		}
	} else {
		for i, t := range ts.tvals {
			if t == 0 {
				pw[i] = 1
			} else {
				pw[i] = math.Exp(t * lt)
			}
		}
	}
	ng := len(ts.grp)
	g0, g1, g2 := tc.g0[:ng], tc.g1[:ng], tc.g2[:ng]
	clear(g0)
	clear(g1)
	clear(g2)
	tg, tt1 := ts.tg[:len(ts.list)], ts.tt1[:len(ts.list)]
	for k := range ts.list {
		tm := &ts.list[k]
		w := tm.n * pw[tm.ti]
		g := tg[k]
		g0[g] += w
		g1[g] += w * tm.t
		g2[g] += w * tt1[k]
	}
	// B = lim_{delta->0} ar_d / rho_r: the groups with d = 1 at delta = 0.
	var b float64
	for _, v := range ts.virial {
		b += tc.g0[v.g] * v.e0
	}
	tc.B = b / m.dr
}

// resid holds the residual Helmholtz energy and its reduced derivatives:
// a = alpha_r, d = delta ar_d, dd = delta^2 ar_dd, ddd = delta^3 ar_ddd,
// t = tau ar_t, tt = tau^2 ar_tt, dt = delta tau ar_dt.
type resid struct {
	a, d, dd, ddd, t, tt, dt float64
}

// residual evaluates alpha_r and its derivatives at reduced density delta
// for the temperature held in tc.
func (m *Mixture) residual(tc *tauCache, delta float64) (r resid) {
	ts := m.ts
	var dp [maxDelta + maxC]float64
	dp[0] = 1
	for k := 1; k < len(dp); k++ {
		dp[k] = dp[k-1] * delta
	}
	grp := ts.grp
	g0, g1, g2 := &tc.g0, &tc.g1, &tc.g2
	// Polynomial terms: n delta^d tau^t.
	for k := 0; k < ts.nGPoly; k++ {
		gr := &grp[k]
		x := dp[gr.d]
		F, Ft := g0[k]*x, g1[k]*x
		g := gr.fd
		q := g * (g - 1)
		r.a += F
		r.d += F * g
		r.dd += F * q
		r.ddd += F * q * (g - 2)
		r.t += Ft
		r.tt += g2[k] * x
		r.dt += Ft * g
	}
	// Pure-fluid exponential terms: n delta^d tau^t exp(-delta^c).
	var ec [maxC]float64
	for _, c := range ts.cList {
		ec[c] = fastmath.Exp(-dp[c])
	}
	end := ts.nGPoly + ts.nGEx
	for k := ts.nGPoly; k < end; k++ {
		gr := &grp[k]
		dc := dp[gr.c]
		x := dp[gr.d] * ec[gr.c]
		F, Ft := g0[k]*x, g1[k]*x
		c := gr.fc
		g := gr.fd - c*dc
		h := c * c * dc
		q := g*(g-1) - h
		r.a += F
		r.d += F * g
		r.dd += F * q
		r.ddd += F * (q*(g-2) - h*(2*g-1+c))
		r.t += Ft
		r.tt += g2[k] * x
		r.dt += Ft * g
	}
	// Departure exponential terms: n delta^d tau^t exp(-eta (delta-eps)^2 - beta (delta-gamma)).
	var ee, s1, s2, e2 [maxDepExp]float64
	for k, de := range ts.depExp {
		dm := delta - de.eps
		ee[k] = fastmath.Exp(-de.eta*dm*dm - de.beta*(delta-de.gamma))
		s1[k] = -2*de.eta*delta*dm - de.beta*delta                            // delta d(exponent)/d delta
		s2[k] = -4*de.eta*delta*delta + 2*de.eta*de.eps*delta - de.beta*delta // delta d(s1)/d delta
		e2[k] = 2 * de.eta * delta * delta
	}
	for k := end; k < len(grp); k++ {
		gr := &grp[k]
		e := gr.e
		x := dp[gr.d] * ee[e]
		F, Ft := g0[k]*x, g1[k]*x
		d := gr.fd
		g := d + s1[e]
		q := g*g - d - e2[e]
		r.a += F
		r.d += F * g
		r.dd += F * q
		r.ddd += F * (q*(g-2) + 2*g*s2[e] - 2*e2[e])
		r.t += Ft
		r.tt += g2[k] * x
		r.dt += Ft * g
	}
	return r
}

// pressure returns p in kPa and dp/dD in kPa/(mol/dm3) at T (held in tc)
// and molar density D in mol/dm3. It evaluates only the delta derivatives.
func (m *Mixture) pressure(tc *tauCache, D float64) (p, dpdD float64) {
	p, dpdD, _ = m.pressure3(tc, D, false)
	return p, dpdD
}

// pressure3 is pressure, also returning d2p/dD2 in kPa/(mol/dm3)^2 when
// second is true (for Halley steps; 0 otherwise).
func (m *Mixture) pressure3(tc *tauCache, D float64, second bool) (p, dpdD, d2pdD2 float64) {
	ts := m.ts
	delta := D / m.dr
	var dp [maxDelta + maxC]float64
	dp[0] = 1
	for k := 1; k < len(dp); k++ {
		dp[k] = dp[k-1] * delta
	}
	grp := ts.grp
	g0 := &tc.g0
	var rd, rdd, rddd float64
	for k := 0; k < ts.nGPoly; k++ {
		gr := &grp[k]
		F := g0[k] * dp[gr.d]
		g := gr.fd
		q := g * (g - 1)
		rd += F * g
		rdd += F * q
		rddd += F * q * (g - 2)
	}
	var ec [maxC]float64
	for _, c := range ts.cList {
		ec[c] = fastmath.Exp(-dp[c])
	}
	end := ts.nGPoly + ts.nGEx
	for k := ts.nGPoly; k < end; k++ {
		gr := &grp[k]
		dc := dp[gr.c]
		F := g0[k] * dp[gr.d] * ec[gr.c]
		c := gr.fc
		g := gr.fd - c*dc
		h := c * c * dc
		q := g*(g-1) - h
		rd += F * g
		rdd += F * q
		rddd += F * (q*(g-2) - h*(2*g-1+c))
	}
	var ee, s1, s2, e2 [maxDepExp]float64
	for k, de := range ts.depExp {
		dm := delta - de.eps
		ee[k] = fastmath.Exp(-de.eta*dm*dm - de.beta*(delta-de.gamma))
		s1[k] = -2*de.eta*delta*dm - de.beta*delta
		s2[k] = -4*de.eta*delta*delta + 2*de.eta*de.eps*delta - de.beta*delta
		e2[k] = 2 * de.eta * delta * delta
	}
	for k := end; k < len(grp); k++ {
		gr := &grp[k]
		e := gr.e
		F := g0[k] * dp[gr.d] * ee[e]
		d := gr.fd
		g := d + s1[e]
		q := g*g - d - e2[e]
		rd += F * g
		rdd += F * q
		rddd += F * (q*(g-2) + 2*g*s2[e] - 2*e2[e])
	}
	RT := m.rgas * tc.T
	p, dpdD = D*RT*(1+rd), RT*(1+2*rd+rdd)
	if second {
		d2pdD2 = RT * (2*rd + 4*rdd + rddd) / D
	}
	return p, dpdD, d2pdD2
}

const ln2 = math.Ln2

// ideal returns the ideal-gas part a0 = alpha0 and its reduced temperature
// derivatives a0t = tau a0_tau and a0tt = tau^2 a0_tautau at T in K and
// molar density D in mol/dm3 (NIST's working form, see component).
func (m *Mixture) ideal(T, D float64) (a0, a0t, a0tt float64) {
	lnD := math.Log(D)
	lnT := math.Log(T)
	iT := 1 / T
	var h0, h1, h2 float64
	for i := range m.hyp {
		c := &m.hyp[i]
		u := c.th * iT
		em := fastmath.Exp(-u)
		em2 := em * em
		if !c.cosh {
			// ln sinh u, u coth u, (u/sinh u)^2 written to stay finite for
			// large u: u/sinh u = 2 u em/(1 - em2).
			q := 1 / (1 - em2)
			h0 += c.coef * (u + flog1p(-em2) - ln2)
			h1 += c.coef * u * (1 + em2) * q
			r := 2 * u * em * q
			h2 += c.coef * r * r
		} else {
			// -ln cosh u, -u tanh u, (u/cosh u)^2.
			q := 1 / (1 + em2)
			h0 -= c.coef * (u + flog1p(em2) - ln2)
			h1 -= c.coef * u * (1 - em2) * q
			r := 2 * u * em * q
			h2 += c.coef * r * r
		}
	}
	n2T := m.igN2 * iT
	a0 = m.igSx*lnD + m.igC0 + n2T - m.igN3*lnT + h0
	a0t = m.igN3 + n2T + h1
	a0tt = -(m.igN3 + h2)
	return a0, a0t, a0tt
}

// Properties is the full GERG-2008 output at one state in molar SI units
// (per mole of mixture). U, H, S, G follow GERG-2008's ideal-gas reference
// state: h = 0 at 298.15 K and s = 0 at 298.15 K, 101.325 kPa for the ideal gas.
type Properties struct {
	T      float64 // temperature, K
	P      float64 // pressure, Pa
	D      float64 // molar density, mol/m3
	Z      float64 // compressibility factor p/(D R T)
	DPDD   float64 // (dp/dD)_T, Pa/(mol/m3) = J/mol
	D2PDD2 float64 // (d2p/dD2)_T, Pa/(mol/m3)^2
	DPDT   float64 // (dp/dT)_D, Pa/K
	U      float64 // molar internal energy, J/mol
	H      float64 // molar enthalpy, J/mol
	S      float64 // molar entropy, J/(mol K)
	G      float64 // molar Gibbs energy, J/mol
	Cv     float64 // molar isochoric heat capacity, J/(mol K)
	Cp     float64 // molar isobaric heat capacity, J/(mol K)
	W      float64 // speed of sound, m/s
	JT     float64 // Joule-Thomson coefficient, K/Pa
	Kappa  float64 // isentropic exponent w^2 M/(Z R T), dimensionless
	M      float64 // molar mass, kg/mol
}

// props evaluates every property at T (in tc) and D mol/dm3, following
// NIST's PropertiesGERG (GERG2008.cpp) in its units, then converts to SI.
func (m *Mixture) props(tc *tauCache, D float64) Properties {
	return m.propsR(tc, D, m.residual(tc, D/m.dr))
}

// propsR is props with the residual part r at (tc.T, D) given.
func (m *Mixture) propsR(tc *tauCache, D float64, r resid) Properties {
	T := tc.T
	a0, a0t, a0tt := m.ideal(T, D)
	R := m.rgas
	RT := R * T
	Z := 1 + r.d
	P := D * RT * Z                             // kPa
	dPdD := RT * (1 + 2*r.d + r.dd)             // kPa/(mol/dm3) = J/mol
	dPdT := D * R * (1 + r.d - r.dt)            // kPa/K
	d2PdD2 := RT * (2*r.d + 4*r.dd + r.ddd) / D // kPa/(mol/dm3)^2
	cv := -R * (a0tt + r.tt)
	cp := cv + T*(dPdT/D)*(dPdT/D)/dPdD
	w2 := 1000 * cp / cv * dPdD / m.mg
	return Properties{
		T:      T,
		P:      1000 * P,
		D:      1000 * D,
		Z:      Z,
		DPDD:   dPdD,
		D2PDD2: d2PdD2 / 1000,
		DPDT:   1000 * dPdT,
		U:      RT * (a0t + r.t),
		H:      RT * (1 + r.d + a0t + r.t),
		S:      R * (a0t + r.t - a0 - r.a),
		G:      RT * (1 + r.d + a0 + r.a),
		Cv:     cv,
		Cp:     cp,
		W:      math.Sqrt(w2),
		JT:     (T/D*dPdT/dPdD - 1) / cp / D / 1000,
		Kappa:  w2 * m.mg / (RT * 1000 * Z),
		M:      m.mg / 1000,
	}
}
