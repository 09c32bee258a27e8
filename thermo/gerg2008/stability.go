package gerg2008

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// Wilson starting values for the stability test: critical pressure in MPa and
// acentric factor of each component in published order. Values from memory
// (common handbook values); they only choose the starting trial phases, so an
// error in them changes the iteration count, not the test's answer.
var wilsonPc = [nComp]float64{4.599, 3.396, 7.377, 4.872, 4.248, 3.796, 3.640, 3.370, 3.381, 3.025,
	2.740, 2.490, 2.290, 2.110, 1.293, 5.043, 3.494, 22.064, 8.963, 0.2275, 4.863}
var wilsonOmega = [nComp]float64{0.0115, 0.0372, 0.2239, 0.0995, 0.1523, 0.2002, 0.1835, 0.2515, 0.2275, 0.3013,
	0.3495, 0.3996, 0.4435, 0.4923, -0.216, 0.0222, 0.0497, 0.3443, 0.0942, -0.390, -0.0022}

// phaseEval evaluates GERG-2008 for an arbitrary composition over the
// components present in a Mixture, with the composition derivatives needed
// for fugacity coefficients (Kunz & Wagner 2012, section 7.3 and Table 7.5;
// the reducing-function derivatives are written out in reducingDeriv). It is
// slower than the merged evaluator used by Flash and allocates its work
// arrays once per stability test.
type phaseEval struct {
	g     *gergData
	idx   []int // components present, published indices
	pairs []pairRef
	x     [nComp]float64
	Tr, Y float64 // reducing temperature K and 1/rho_r dm3/mol
	dTr   [nComp]float64
	dY    [nComp]float64
	T     float64
	tau   float64
	ntp   [][]float64 // per present component: n tau^t of each pure term
	ntd   [][]float64 // per pair: n tau^t of each departure term
	// last accepted vapour-like and liquid-like roots (mol/dm3), 0 if none:
	// warm starts for the next trial composition of the iteration.
	last [2]float64
}

type pairRef struct {
	i, j int // published indices, i < j
	F    float64
	fn   []depTerm
}

func newPhaseEval(m *Mixture, g *gergData) *phaseEval {
	e := &phaseEval{g: g}
	for i := range nComp {
		if m.x[i] > 0 {
			e.idx = append(e.idx, i)
			e.ntp = append(e.ntp, make([]float64, len(g.comps[i].terms)))
		}
	}
	for a, i := range e.idx {
		for _, j := range e.idx[a+1:] {
			if g.depF[i][j] != 0 && g.depFn[i][j] >= 0 {
				fn := g.funcs[g.depFn[i][j]]
				e.pairs = append(e.pairs, pairRef{i: i, j: j, F: g.depF[i][j], fn: fn})
				e.ntd = append(e.ntd, make([]float64, len(fn)))
			}
		}
	}
	return e
}

// setX sets the composition (indexed by published index; zero outside idx)
// and evaluates the reducing functions and their derivatives dTr/dx_i and
// d(1/rho_r)/dx_i with the mole fractions taken as independent.
func (e *phaseEval) setX(x *[nComp]float64) {
	e.x = *x
	g := e.g
	e.Tr, e.Y = 0, 0
	for _, i := range e.idx {
		e.dTr[i], e.dY[i] = 0, 0
	}
	for a, i := range e.idx {
		ci := &g.comps[i]
		xi := x[i]
		e.Tr += xi * xi * ci.Tc
		e.Y += xi * xi / ci.Dc
		e.dTr[i] += 2 * xi * ci.Tc
		e.dY[i] += 2 * xi / ci.Dc
		for _, j := range e.idx[a+1:] {
			cj := &g.comps[j]
			xj := x[j]
			if xi+xj == 0 {
				continue
			}
			cr := math.Cbrt(1/ci.Dc) + math.Cbrt(1/cj.Dc)
			cv := 2 * g.betaV[i][j] * g.gammaV[i][j] * cr * cr * cr / 8
			ct := 2 * g.betaT[i][j] * g.gammaT[i][j] * math.Sqrt(ci.Tc*cj.Tc)
			for k, c := range [2]float64{cv, ct} {
				b := g.betaV[i][j]
				if k == 1 {
					b = g.betaT[i][j]
				}
				b2 := b * b
				den := b2*xi + xj
				f := (xi + xj) / den
				// d f/dx_i = x_j (1 - b^2)/den^2, d f/dx_j = x_i (b^2 - 1)/den^2
				v := c * xi * xj * f
				di := c * (xj*f + xi*xj*xj*(1-b2)/(den*den))
				dj := c * (xi*f + xi*xj*xi*(b2-1)/(den*den))
				if k == 0 {
					e.Y += v
					e.dY[i] += di
					e.dY[j] += dj
				} else {
					e.Tr += v
					e.dTr[i] += di
					e.dTr[j] += dj
				}
			}
		}
	}
}

// setT evaluates the tau-dependent factors at T for the current composition.
func (e *phaseEval) setT(T float64) {
	e.T = T
	e.tau = e.Tr / T
	lt := math.Log(e.tau)
	for a, i := range e.idx {
		for k, tm := range e.g.comps[i].terms {
			e.ntp[a][k] = tm.n * math.Exp(tm.t*lt)
		}
	}
	for a, p := range e.pairs {
		for k, tm := range p.fn {
			e.ntd[a][k] = tm.n * math.Exp(tm.t*lt)
		}
	}
}

// powers holds delta^k and exp(-delta^k) for one reduced density.
type powers struct {
	dp [maxDelta + maxC]float64
	ec [maxC]float64
}

func (pw *powers) set(delta float64) {
	pw.dp[0] = 1
	for k := 1; k < len(pw.dp); k++ {
		pw.dp[k] = pw.dp[k-1] * delta
	}
	for k := 1; k < maxC; k++ {
		pw.ec[k] = math.Exp(-pw.dp[k])
	}
}

// pureAt returns alpha_r,oi and delta ar_d, delta^2 ar_dd, tau ar_t for
// present component number a.
func (e *phaseEval) pureAt(a int, pw *powers) (f, fd, fdd, ft float64) {
	for k, tm := range e.g.comps[e.idx[a]].terms {
		F := e.ntp[a][k] * pw.dp[tm.d]
		g := float64(tm.d)
		q := g * (g - 1)
		if tm.c > 0 {
			dc := pw.dp[tm.c]
			F *= pw.ec[tm.c]
			c := float64(tm.c)
			g -= c * dc
			q = g*(g-1) - c*c*dc
		}
		f += F
		fd += F * g
		fdd += F * q
		ft += F * tm.t
	}
	return
}

func (e *phaseEval) pairAt(a int, delta float64, pw *powers) (f, fd, fdd, ft float64) {
	for k, tm := range e.pairs[a].fn {
		F := e.ntd[a][k] * pw.dp[tm.d]
		d := float64(tm.d)
		g := d
		q := d * (d - 1)
		if tm.exp {
			dm := delta - tm.eps
			F *= math.Exp(-tm.eta*dm*dm - tm.beta*(delta-tm.gamma))
			g = d - 2*tm.eta*delta*dm - tm.beta*delta
			q = g*g - d - 2*tm.eta*delta*delta
		}
		f += F
		fd += F * g
		fdd += F * q
		ft += F * tm.t
	}
	return
}

// mixAt returns alpha_r, delta ar_d, delta^2 ar_dd and tau ar_t at D mol/dm3,
// and, if lnphi is non-nil, the fugacity coefficients ln phi_i.
func (e *phaseEval) mixAt(D float64, lnphi *[nComp]float64) (ar, ard, ardd, art float64) {
	delta := D * e.Y
	var pwv powers
	pwv.set(delta)
	pw := &pwv
	var axi [nComp]float64 // d alpha_r/dx_i at constant delta, tau
	for a, i := range e.idx {
		f, fd, fdd, ft := e.pureAt(a, pw)
		xi := e.x[i]
		ar += xi * f
		ard += xi * fd
		ardd += xi * fdd
		art += xi * ft
		axi[i] += f
	}
	for a, p := range e.pairs {
		f, fd, fdd, ft := e.pairAt(a, delta, pw)
		w := p.F * e.x[p.i] * e.x[p.j]
		ar += w * f
		ard += w * fd
		ardd += w * fdd
		art += w * ft
		axi[p.i] += p.F * e.x[p.j] * f
		axi[p.j] += p.F * e.x[p.i] * f
	}
	if lnphi != nil {
		var sx, sT, sY float64
		for _, i := range e.idx {
			sx += e.x[i] * axi[i]
			sT += e.x[i] * e.dTr[i]
			sY += e.x[i] * e.dY[i]
		}
		Z := 1 + ard
		for _, i := range e.idx {
			ndi := ard*(1+(e.dY[i]-sY)/e.Y) + art*(e.dTr[i]-sT)/e.Tr + axi[i] - sx
			lnphi[i] = ar + ndi - math.Log(Z)
		}
	}
	return
}

// root solves p(T, D) = p (kPa) by Newton's method in ln D from D0 with
// bisection safeguards, for the branch reached from D0; ok is false when no
// mechanically stable root is found.
func (e *phaseEval) root(p, D0 float64) (D float64, ok bool) {
	RT := e.g.R * e.T
	lo, hi := 0.0, deltaMax/e.Y
	D = math.Min(D0, 0.999*hi)
	for it := 0; it < 100; it++ {
		_, ard, ardd, _ := e.mixAt(D, nil)
		P := D * RT * (1 + ard)
		dP := RT * (1 + 2*ard + ardd)
		if !(dP > 0) || math.IsNaN(P) {
			// unstable part: move towards the start's side
			if D0 > D {
				lo = D
			} else {
				hi = D
			}
		} else {
			f := P - p
			if f < 0 {
				lo = D
			} else {
				hi = D
			}
			step := -f / (D * dP)
			if math.Abs(step) < 1e-11 {
				return D * math.Exp(step), true
			}
			step = math.Max(-0.5, math.Min(0.5, step))
			if Dn := D * math.Exp(step); Dn > lo && Dn < hi {
				D = Dn
				continue
			}
		}
		if hi-lo < 1e-13*hi {
			return D, false
		}
		if lo > 0 {
			D = math.Sqrt(lo * hi)
		} else {
			D = hi / 2
		}
	}
	return D, false
}

// fugacity sets the composition and T, finds the vapour-like root (the
// smallest: reached from the ideal gas, with dp/dD > 0 at scanPoints
// densities below it) and the liquid-like root (the largest: reached from
// above with p(D0) > p) at p (kPa), and returns ln phi of the one with the
// lower Gibbs energy. Restricting the candidates to the smallest and the
// largest root keeps out the spurious roots a multiparameter equation has
// inside its unstable region.
func (e *phaseEval) fugacity(x *[nComp]float64, T, p float64, lnphi *[nComp]float64) bool {
	e.setX(x)
	e.setT(T)
	RT := e.g.R * T
	best := math.Inf(1)
	var tmp [nComp]float64
	found := false
	pressure := func(D float64) (float64, float64) {
		_, ard, ardd, _ := e.mixAt(D, nil)
		return D * RT * (1 + ard), RT * (1 + 2*ard + ardd)
	}
	liquidFromAbove := func() float64 {
		D0 := 2.5 / e.Y
		for {
			P, dP := pressure(D0)
			if (P > p && dP > 0) || D0*e.Y >= deltaMax-0.5 {
				return D0
			}
			D0 += 0.25 / e.Y
		}
	}
	for k := 0; k < 2; k++ {
		var D0 float64
		switch {
		case e.last[k] > 0:
			D0 = e.last[k]
		case k == 0:
			D0 = p / RT
		default:
			D0 = liquidFromAbove()
		}
		D, ok := e.root(p, D0)
		// A warm-started liquid-like root that moved by more than 5 % is
		// searched again from above (the largest root).
		if k == 1 && e.last[1] > 0 && !(ok && math.Abs(D/e.last[1]-1) < 0.05) {
			D, ok = e.root(p, liquidFromAbove())
		}
		if !ok {
			e.last[k] = 0
			continue
		}
		if k == 0 && !(e.last[0] > 0 && math.Abs(D/e.last[0]-1) < 0.02) {
			// The vapour-like root must have no unstable part of the
			// isotherm below it; re-scanned when it moved by more than 2 %.
			for j := 1; j < scanPoints && ok; j++ {
				if _, dP := pressure(D * float64(j) / scanPoints); !(dP > 0) {
					ok = false
				}
			}
		}
		if k == 1 {
			// The liquid-like root must sit on a rising isotherm above it.
			for j := 1; j <= 4 && ok; j++ {
				if _, dP := pressure(D * (1 + 0.05*float64(j))); !(dP > 0) {
					ok = false
				}
			}
		}
		if !ok {
			e.last[k] = 0
			continue
		}
		e.last[k] = D
		e.mixAt(D, &tmp)
		gres := 0.0
		for _, i := range e.idx {
			gres += e.x[i] * tmp[i]
		}
		if gres < best {
			best, *lnphi, found = gres, tmp, true
		}
	}
	return found
}

// Stable reports whether the gas state at p in Pa and T in K is stable
// against splitting into two phases, by Michelsen's tangent-plane-distance
// test (M.L. Michelsen, Fluid Phase Equilib. 9 (1982) 1-19) with GERG-2008
// fugacity coefficients. The feed's fugacities are those of its gas root
// (the state Flash returns). From three trial phases, vapour-like and
// liquid-like ones from Wilson K-factors and the nearly pure heaviest
// component, successive substitution W_i = exp(ln z_i + ln phi_i(z) -
// ln phi_i(w)) runs until W converges (1e-10 in ln W), collapses onto the feed,
// or 300 iterations pass; for each trial composition the density root (the
// smallest or the largest, see fugacity) with the lower Gibbs energy is used.
// The state is unstable as soon as the modified tangent-plane distance
// 1 + sum W_i (ln W_i + ln phi_i(w) - ln z_i - ln phi_i(z) - 1) drops below
// -1e-9; otherwise it is reported stable (also when a trial ran out of
// iterations). An error is returned when the feed has no gas state (as
// Flash). Stable takes 1-3 ms of CPU for an 11-component gas and allocates
// its work arrays; Flash calls it only for a Mixture made with
// WithStabilityCheck.
func (m *Mixture) Stable(p, T float64) (bool, error) {
	if m.detail {
		return false, fmt.Errorf("%s: the stability test is implemented for GERG-2008 only: %w", m.name, thermo.ErrUnsupported)
	}
	if err := m.checkPT(p, T); err != nil {
		return false, err
	}
	g, err := loadData()
	if err != nil {
		return false, err
	}
	var tc tauCache
	m.setTau(&tc, T)
	Dz, err := m.density(&tc, p/1000, 0)
	if err != nil {
		return false, err
	}
	e := newPhaseEval(m, g)
	pk := p / 1000
	var lnphiZ, d [nComp]float64
	// The feed's fugacities belong to its gas root, the state Flash reports.
	e.setX(&m.x)
	e.setT(T)
	e.mixAt(Dz, &lnphiZ)
	for _, i := range e.idx {
		d[i] = math.Log(m.x[i]) + lnphiZ[i]
	}
	// Trial phases.
	var trials [][nComp]float64
	var kv, kl [nComp]float64
	heaviest := e.idx[0]
	for _, i := range e.idx {
		K := wilsonPc[i] * 1e6 / p * math.Exp(5.373*(1+wilsonOmega[i])*(1-g.comps[i].Tc/T))
		kv[i] = m.x[i] * K
		kl[i] = m.x[i] / K
		if g.comps[i].Tc > g.comps[heaviest].Tc {
			heaviest = i
		}
	}
	var pure [nComp]float64
	for _, i := range e.idx {
		pure[i] = 1e-10
	}
	pure[heaviest] = 1
	trials = append(trials, kv, kl, pure)
	for _, W0 := range trials {
		W := W0
		e.last = [2]float64{}
		var w, lnphiW [nComp]float64
		for it := 0; it < 300; it++ {
			sum := 0.0
			for _, i := range e.idx {
				sum += W[i]
			}
			if !(sum > 0) || math.IsInf(sum, 0) {
				break
			}
			for _, i := range e.idx {
				w[i] = W[i] / sum
			}
			if !e.fugacity(&w, T, pk, &lnphiW) {
				break
			}
			tm := 1.0
			change, trivial, sumNew := 0.0, 0.0, 0.0
			for _, i := range e.idx {
				if W[i] > 0 {
					tm += W[i] * (math.Log(W[i]) + lnphiW[i] - d[i] - 1)
				}
				Wn := math.Exp(d[i] - lnphiW[i])
				change = math.Max(change, math.Abs(math.Log(Wn/math.Max(W[i], 1e-300))))
				trivial += (w[i] - m.x[i]) * (w[i] - m.x[i])
				W[i] = Wn
				sumNew += Wn
			}
			if tm < -1e-9 {
				return false, nil
			}
			// Converged, or collapsed onto the feed itself (the trivial solution).
			if change < 1e-10 || (trivial < 1e-16 && math.Abs(sumNew-1) < 1e-9) {
				break
			}
		}
	}
	return true, nil
}

// WithStabilityCheck returns a copy of m whose Flash also runs Stable on
// every state it returns and answers an error wrapping thermo.ErrPhase for
// a state that would split into two phases (inside the phase envelope, e.g.
// below the hydrocarbon or water dew point). It costs 1-3 ms per call.
func (m *Mixture) WithStabilityCheck() *Mixture {
	c := *m
	c.checkStability = true
	return &c
}
