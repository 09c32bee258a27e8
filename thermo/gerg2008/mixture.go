package gerg2008

import (
	"fmt"
	"math"
	"sort"
)

// term is one merged residual term coef * delta^d * tau^t * E(delta), where E
// is 1 (c = 0, e < 0), exp(-delta^c) (c > 0) or a departure exponential
// exp(-eta (delta-epsilon)^2 - beta (delta-gamma)) (e >= 0, index into
// terms.depExp). coef already carries the composition: x_i n for a pure-fluid
// term, x_i x_j F_ij n for a departure term, summed over every term with the
// same (d, t, c, e).
type term struct {
	n, t float64
	d, c int
	e    int
	ti   int // index of t in terms.tvals
}

type depExp struct{ eta, eps, beta, gamma float64 }

// terms is the residual part of one mixture, grouped as polynomial terms,
// pure-fluid exponential terms and departure exponential terms, in this order.
type terms struct {
	list   []term
	nPoly  int // list[:nPoly] are polynomial
	nExp   int // list[nPoly:nPoly+nExp] have c > 0; the rest are departure exponentials
	depExp []depExp
	maxD   int
	usedC  [maxC]bool
	cList  []int     // the c values in use
	tvals  []float64 // the distinct tau exponents t
	// tau^t for t in tvals is tau^floor(t) (an integer power, tInt) times
	// tau^(t - floor(t)) (one exponential per distinct fractional part,
	// fracs[tFrac], -1 for none): the GERG-2008 exponents are multiples of
	// 1/40 with 23 distinct fractional parts among 72 values. powSplit is
	// false when an exponent falls outside the fixed bounds (then every
	// tau^t is exp(t ln tau)).
	tInt     []int
	tFrac    []int
	fracs    []float64
	maxIntT  int // largest |floor(t)|
	powSplit bool
	// virial lists the groups with d = 1 and their exponential factor at
	// delta = 0, which give the second virial coefficient.
	virial []struct {
		g  int
		e0 float64
	}
	// The terms sharing (d, c, e) differ only in n tau^t: setTau sums
	// n tau^t, n t tau^t and n t (t-1) tau^t per group, and residual and
	// pressure3 do their delta-dependent work per group (GERG-2008: 34
	// groups for 109 terms of a 10-component gas). Groups are ordered
	// polynomial, exp(-delta^c), departure exponential, like the terms.
	grp          []termGroup
	nGPoly, nGEx int
	tg           []int     // group of each term
	tt1          []float64 // t (t-1) of each term
}

// termGroup is a (d, c, e) class of merged terms; fd and fc are d and c.
type termGroup struct {
	d, c, e int
	fd, fc  float64
}

// indexT fills tvals and the terms' ti, the groups and virial. It fails
// when the groups exceed the fixed bound maxGroups.
func (ts *terms) indexT() error {
	type key struct{ d, c, e int }
	gi := map[key]int{}
	ts.grp, ts.tg, ts.tt1, ts.nGPoly, ts.nGEx = nil, nil, nil, 0, 0
	for pass := 0; pass < 3; pass++ {
		for _, tm := range ts.list {
			if group(tm.c, tm.e) != pass {
				continue
			}
			k := key{tm.d, tm.c, tm.e}
			if _, ok := gi[k]; ok {
				continue
			}
			gi[k] = len(ts.grp)
			ts.grp = append(ts.grp, termGroup{d: tm.d, c: tm.c, e: tm.e, fd: float64(tm.d), fc: float64(tm.c)})
			switch pass {
			case 0:
				ts.nGPoly++
			case 1:
				ts.nGEx++
			}
		}
	}
	if len(ts.grp) > maxGroups {
		return fmt.Errorf("gerg2008: %d term groups exceed the fixed bound %d", len(ts.grp), maxGroups)
	}
	for _, tm := range ts.list {
		ts.tg = append(ts.tg, gi[key{tm.d, tm.c, tm.e}])
		ts.tt1 = append(ts.tt1, tm.t*(tm.t-1))
	}
	for g, gr := range ts.grp {
		if gr.d != 1 {
			continue
		}
		e0 := 1.0
		if gr.e >= 0 {
			de := ts.depExp[gr.e]
			e0 = math.Exp(-de.eta*de.eps*de.eps + de.beta*de.gamma)
		}
		ts.virial = append(ts.virial, struct {
			g  int
			e0 float64
		}{g, e0})
	}
	seen := map[float64]int{}
	for k := range ts.list {
		t := ts.list[k].t
		i, ok := seen[t]
		if !ok {
			i = len(ts.tvals)
			seen[t] = i
			ts.tvals = append(ts.tvals, t)
		}
		ts.list[k].ti = i
	}
	ts.powSplit = true
	fi := map[float64]int{}
	for _, t := range ts.tvals {
		n := math.Floor(t)
		f := t - n
		if math.Abs(n) > maxIntPow {
			ts.powSplit = false
		}
		ts.tInt = append(ts.tInt, int(n))
		ts.maxIntT = max(ts.maxIntT, int(math.Abs(n)))
		j := -1
		if f != 0 {
			var ok bool
			if j, ok = fi[f]; !ok {
				j = len(ts.fracs)
				fi[f] = j
				ts.fracs = append(ts.fracs, f)
			}
		}
		ts.tFrac = append(ts.tFrac, j)
	}
	if len(ts.fracs) > maxFrac {
		ts.powSplit = false
	}
	return nil
}

// buildTerms merges the residual terms of the composition x.
func buildTerms(g *gergData, x *[nComp]float64) (*terms, error) {
	type key struct {
		d, c, e int
		t       float64
	}
	coef := map[key]float64{}
	var order []key
	add := func(k key, v float64) {
		if _, ok := coef[k]; !ok {
			order = append(order, k)
		}
		coef[k] += v
	}
	ts := &terms{}
	expIndex := map[depExp]int{}
	for i := range nComp {
		if x[i] == 0 {
			continue
		}
		for _, pt := range g.comps[i].terms {
			add(key{d: pt.d, c: pt.c, e: -1, t: pt.t}, x[i]*pt.n)
		}
	}
	for i := range nComp {
		for j := i + 1; j < nComp; j++ {
			if x[i] == 0 || x[j] == 0 || g.depF[i][j] == 0 || g.depFn[i][j] < 0 {
				continue
			}
			w := x[i] * x[j] * g.depF[i][j]
			for _, dt := range g.funcs[g.depFn[i][j]] {
				e := -1
				if dt.exp {
					de := depExp{dt.eta, dt.eps, dt.beta, dt.gamma}
					k, ok := expIndex[de]
					if !ok {
						k = len(ts.depExp)
						expIndex[de] = k
						ts.depExp = append(ts.depExp, de)
					}
					e = k
				}
				add(key{d: dt.d, c: 0, e: e, t: dt.t}, w*dt.n)
			}
		}
	}
	// Group: polynomial, exp(-delta^c), departure exponentials; stable within.
	sort.SliceStable(order, func(a, b int) bool {
		ga, gb := group(order[a].c, order[a].e), group(order[b].c, order[b].e)
		if ga != gb {
			return ga < gb
		}
		if order[a].c != order[b].c {
			return order[a].c < order[b].c
		}
		return order[a].e < order[b].e
	})
	for _, k := range order {
		ts.list = append(ts.list, term{n: coef[k], t: k.t, d: k.d, c: k.c, e: k.e})
		switch group(k.c, k.e) {
		case 0:
			ts.nPoly++
		case 1:
			ts.nExp++
			if !ts.usedC[k.c] {
				ts.usedC[k.c] = true
				ts.cList = append(ts.cList, k.c)
			}
		}
		if k.d > ts.maxD {
			ts.maxD = k.d
		}
	}
	if err := ts.indexT(); err != nil {
		return nil, err
	}
	if len(ts.list) > maxTerms || len(ts.depExp) > maxDepExp {
		return nil, fmt.Errorf("gerg2008: %d merged terms, %d departure exponents exceed the fixed bounds %d, %d",
			len(ts.list), len(ts.depExp), maxTerms, maxDepExp)
	}
	return ts, nil
}

func group(c, e int) int {
	switch {
	case e >= 0:
		return 2
	case c > 0:
		return 1
	}
	return 0
}

// idealComp is one present component's ideal-gas part.
type idealComp struct {
	x, lnx     float64
	N1, N2, N3 float64
	nh, th     [4]float64 // hyperbolic terms; th in K, 0 = absent
}

// Mixture is a natural gas (or other mixture of the 21 GERG-2008
// components) of fixed composition. It implements thermo.Fluid and is safe
// for concurrent use: everything is computed in New and never changed.
type Mixture struct {
	x    [nComp]float64 // mole fractions in published order
	mg   float64        // molar mass, g/mol
	rgas float64        // molar gas constant of the equation, J/(mol K)
	tr   float64        // reducing temperature, K
	dr   float64        // reducing density, mol/dm3
	ts   *terms
	ig   []idealComp
	// The ideal-gas part flattened by prepareIdeal: sum x_i, sum x_i (ln x_i
	// + N1_i), sum x_i N2_i, sum x_i N3_i and the hyperbolic terms with
	// x_i n_ik as coefficient.
	igSx, igC0, igN2, igN3 float64
	hyp                    []hypTerm
	name                   string
	// checkStability makes Flash run Stable on every result (WithStabilityCheck).
	checkStability bool
	// tLoop (K): above it no isotherm has an unstable part (loopFreeTemperature).
	tLoop float64
	// Below tLiq (K) a root denser than dLiq (mol/dm3) is liquid-like
	// (GERG-2008: the reducing temperature and density).
	tLiq, dLiq float64
	// Accepted range: T in K, p in Pa, and the text for RangeError.Context.
	tMin, tMax, pMax float64
	rangeCtx         string
	detail           bool // AGA8-DC92 DETAIL instead of GERG-2008 (NewDetail)
}

// New returns the GERG-2008 model of a mixture given as mole fractions keyed
// by component name. Names are matched case-insensitively against the
// canonical names of Components and their aliases (formulas such as CH4,
// C2H6, CO2, N2, H2S, nC4, iC4, n-C5H12, C6 ... C10; see Aliases). Fractions
// must be finite, non-negative and sum to 1 within 1e-6 (they are then scaled
// to sum exactly to 1); zero fractions are allowed. Errors wrap ErrComposition.
func New(composition map[string]float64) (*Mixture, error) {
	g, err := loadData()
	if err != nil {
		return nil, err
	}
	x, err := normalise(composition)
	if err != nil {
		return nil, err
	}
	m := &Mixture{x: x, rgas: g.R, name: Name, tMin: TMin, tMax: TMax, pMax: PMax,
		rangeCtx: "GERG-2008 extended range 60-700 K, p <= 70 MPa"}
	for i := range nComp {
		if x[i] > 0 {
			m.mg += x[i] * g.comps[i].M
		}
	}
	m.tr, m.dr = reducing(g, &x)
	if !(m.tr > 0 && m.dr > 0) || math.IsInf(m.tr, 0) || math.IsInf(m.dr, 0) {
		return nil, fmt.Errorf("%w: reducing functions give T_r = %g K, rho_r = %g mol/dm3", ErrComposition, m.tr, m.dr)
	}
	if m.ts, err = buildTerms(g, &x); err != nil {
		return nil, err
	}
	for i := range nComp {
		if x[i] == 0 {
			continue
		}
		c := &g.comps[i]
		m.ig = append(m.ig, idealComp{x: x[i], lnx: math.Log(x[i]), N1: c.N1, N2: c.N2, N3: c.N3, nh: c.nh, th: c.th})
	}
	m.prepareIdeal()
	m.tLiq, m.dLiq = m.tr, m.dr
	m.tLoop = m.loopFreeTemperature()
	return m, nil
}

// hypTerm is one hyperbolic ideal-gas term of one component: coef ln|sinh(th/T)|
// (cosh false) or -coef ln cosh(th/T), coef = x_i n_ik.
type hypTerm struct {
	coef, th float64
	cosh     bool
}

// prepareIdeal sums the composition-only parts of the ideal-gas terms of
// m.ig once, so that ideal loops over the hyperbolic terms only.
func (m *Mixture) prepareIdeal() {
	m.igSx, m.igC0, m.igN2, m.igN3, m.hyp = 0, 0, 0, 0, nil
	for i := range m.ig {
		c := &m.ig[i]
		m.igSx += c.x
		m.igC0 += c.x * (c.lnx + c.N1)
		m.igN2 += c.x * c.N2
		m.igN3 += c.x * c.N3
		for k := 0; k < 4; k++ {
			if c.th[k] <= 0 || c.nh[k] == 0 {
				continue
			}
			m.hyp = append(m.hyp, hypTerm{coef: c.x * c.nh[k], th: c.th[k], cosh: k%2 == 1})
		}
	}
}

// reducing evaluates the GERG-2008 reducing functions (Kunz & Wagner 2012,
// eqs. 7.9 and 7.10): T_r in K and rho_r in mol/dm3.
func reducing(g *gergData, x *[nComp]float64) (Tr, Dr float64) {
	var vr float64 // 1/rho_r, dm3/mol
	for i := range nComp {
		if x[i] == 0 {
			continue
		}
		ci := &g.comps[i]
		vr += x[i] * x[i] / ci.Dc
		Tr += x[i] * x[i] * ci.Tc
		for j := i + 1; j < nComp; j++ {
			if x[j] == 0 {
				continue
			}
			cj := &g.comps[j]
			xij := x[i] + x[j]
			bv, bt := g.betaV[i][j], g.betaT[i][j]
			fv := 2 * x[i] * x[j] * bv * g.gammaV[i][j] * xij / (bv*bv*x[i] + x[j])
			ft := 2 * x[i] * x[j] * bt * g.gammaT[i][j] * xij / (bt*bt*x[i] + x[j])
			cr := math.Cbrt(1/ci.Dc) + math.Cbrt(1/cj.Dc)
			vr += fv * cr * cr * cr / 8
			Tr += ft * math.Sqrt(ci.Tc*cj.Tc)
		}
	}
	return Tr, 1 / vr
}

// MolarMass returns the mixture's molar mass in kg/mol.
func (m *Mixture) MolarMass() float64 { return m.mg / 1000 }

// Reducing returns the mixture's reducing temperature in K and reducing
// density in mol/m3 (GERG-2008 eqs. 7.9-7.10); they are close to, not equal
// to, a pseudo-critical point.
func (m *Mixture) Reducing() (T, rho float64) { return m.tr, m.dr * 1000 }

// Composition returns the normalised mole fractions keyed by canonical name;
// components with zero fraction are left out.
func (m *Mixture) Composition() map[string]float64 {
	out := map[string]float64{}
	for i, v := range m.x {
		if v > 0 {
			out[componentNames[i][0]] = v
		}
	}
	return out
}
