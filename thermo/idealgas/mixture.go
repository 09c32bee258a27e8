package idealgas

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/exergywatch/exergywatch/thermo"
)

// Basis says whether a composition is given in mole or mass fractions.
type Basis int

// Composition bases.
const (
	MoleFraction Basis = iota + 1 // amount-of-substance fractions, mol/mol
	MassFraction                  // mass fractions, kg/kg
)

func (b Basis) String() string {
	switch b {
	case MoleFraction:
		return "mole"
	case MassFraction:
		return "mass"
	}
	return fmt.Sprintf("Basis(%d)", int(b))
}

// ErrComposition is wrapped by every error about a composition: unknown
// species, negative or non-finite fractions, fractions not summing to one,
// an empty mixture, an impossible combustion.
var ErrComposition = errors.New("idealgas: invalid composition")

// SumTolerance is how far the fractions of a composition may sum away from
// one; within it they are rescaled to sum to one exactly.
const SumTolerance = 1e-6

// DefaultMaxPressure is the pressure ceiling of a new Mixture, Pa.
//
// The model is an ideal gas: it has no real-gas (residual) part at any
// pressure. How far that is from the real fluid depends on the gas and the
// temperature. For dry air, the compressibility factor Z of Lemmon et al.
// (2000) (testdata/reference/air_lemmon2000_crosscheck.csv) at 250-1500 K
// lies within 0.9953-1.0018 up to 0.5 MPa, 0.9908-1.0037 at 1 MPa and
// 0.961-1.019 at 5 MPa (0.889 at 5 MPa, 200 K); natural gas departs much
// faster. 10 MPa is therefore a hard bound against nonsense, not a
// statement of accuracy: above about 1 MPa use a real-fluid model where
// accuracy matters, or lower the ceiling with WithMaxPressure.
const DefaultMaxPressure = 10e6

// MinPressure is the lowest pressure accepted, Pa. It keeps the (h,s)
// flash's implied pressure finite; no machine this package serves runs
// below it.
const MinPressure = 1.0

// Mixture is an ideal-gas mixture of fixed composition. It implements
// thermo.Fluid and is immutable after construction, so it is safe for
// concurrent use.
//
// Per unit mass, with mass fractions w_i, mole fractions x_i, molar masses
// M_i, mixture molar mass M and specific gas constant Rs = R/M:
//
//	cp(T)   = sum_i w_i (R/M_i) cp_i/R
//	h(T)    = sum_i w_i (R/M_i) T h_i/(R T)           (formation enthalpies included)
//	s(T, p) = sum_i w_i (R/M_i) s0_i/R - Rs ln(p/P0) - Rs sum_i x_i ln x_i
//	cv = cp - Rs, u = h - Rs T, v = Rs T/p, w = sqrt(cp/cv Rs T)
//
// The mass-weighted sums are done once at construction: on each interval
// between the species' interval boundaries (TMid) the mixture is again one
// NASA 7-coefficient polynomial, so h(T) costs one polynomial evaluation.
type Mixture struct {
	name  string
	names []string  // canonical species names, same order as x and w
	x, w  []float64 // mole fractions, mass fractions
	atoms []Atoms
	molar float64 // molar mass, kg/mol
	rs    float64 // specific gas constant, J/(kg·K)
	tmin  float64 // K
	tmax  float64 // K
	pmax  float64 // Pa
	segs  []segment
	// joinJump is the largest relative jump in h or s at an interval
	// boundary that construction removed (see segment).
	joinJump float64
	hInv     invTable // T as a function of h
	sInv     invTable // T as a function of sigma
}

// segment is the mixture polynomial on one temperature interval, per unit
// mass. The integration constants h0 and s0 of every interval but the first
// are shifted so that h and s are exactly continuous at the interval
// boundaries (the published polynomials match there only to about 1e-7
// relative); without it a Newton iteration on h or s could be asked for a
// value inside the jump.
type segment struct {
	thi float64    // upper end, K
	cp  [5]float64 // cp = cp0 + cp1 T + ... + cp4 T^4, J/(kg·K)
	hc  [5]float64 // h = T (hc0 + T (hc1 + ...)) + h0
	h0  float64    // J/kg
	sc  [4]float64 // sigma = cp0 ln T + T (sc0 + T (sc1 + ...)) + s0
	s0  float64    // J/(kg·K); includes mixing and Rs ln P0
}

// invTable tabulates T at equally spaced values of h or sigma, to start a
// Newton iteration close to the root.
type invTable struct {
	lo, hi, inv float64 // range of the independent value and 1/step
	t           []float64
}

const invN = 1024

// NewMixture builds a mixture from fractions keyed by species formula
// (case-insensitive; see SpeciesNames). The fractions must be finite and
// >= 0 and sum to one within SumTolerance; they are then rescaled to sum to
// one exactly. Zero fractions are dropped. The name of the fluid is
// "ideal-gas"; see Named.
func NewMixture(fractions map[string]float64, basis Basis) (*Mixture, error) {
	if basis != MoleFraction && basis != MassFraction {
		return nil, fmt.Errorf("idealgas: basis %v is neither MoleFraction nor MassFraction: %w", basis, ErrComposition)
	}
	if len(fractions) == 0 {
		return nil, fmt.Errorf("idealgas: empty composition: %w", ErrComposition)
	}
	keys := make([]string, 0, len(fractions))
	for k := range fractions {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	seen := make(map[int]string)
	var idx []int
	var f []float64
	sum := 0.0
	for _, k := range keys {
		v := fractions[k]
		i, ok := canonical(k)
		if !ok {
			return nil, fmt.Errorf("idealgas: unknown species %q (known: %s): %w", k, strings.Join(SpeciesNames(), ", "), ErrComposition)
		}
		if prev, dup := seen[i]; dup {
			return nil, fmt.Errorf("idealgas: species %q given twice (as %q and %q): %w", speciesTable[i].Name, prev, k, ErrComposition)
		}
		seen[i] = k
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("idealgas: %s fraction of %s is %v: %w", basis, k, v, ErrComposition)
		}
		if v < 0 {
			return nil, fmt.Errorf("idealgas: %s fraction of %s is negative (%g): %w", basis, k, v, ErrComposition)
		}
		sum += v
		if v == 0 {
			continue
		}
		idx = append(idx, i)
		f = append(f, v)
	}
	if math.Abs(sum-1) > SumTolerance {
		return nil, fmt.Errorf("idealgas: %s fractions sum to %.9g, not 1 (tolerance %g): %w", basis, sum, SumTolerance, ErrComposition)
	}
	return newMixture("ideal-gas", idx, f, basis)
}

// newMixture builds a mixture from species indices and positive fractions
// that sum to one within rounding.
func newMixture(name string, idx []int, f []float64, basis Basis) (*Mixture, error) {
	n := len(idx)
	if n == 0 {
		return nil, fmt.Errorf("idealgas: composition has no species with a non-zero fraction: %w", ErrComposition)
	}
	sum := 0.0
	for _, v := range f {
		sum += v
	}
	m := &Mixture{name: name, pmax: DefaultMaxPressure, names: make([]string, n), x: make([]float64, n), w: make([]float64, n), atoms: make([]Atoms, n)}
	for k, i := range idx {
		m.names[k] = speciesTable[i].Name
		m.atoms[k] = speciesTable[i].Atoms
	}
	// Convert to both bases; molar mass M = sum x_i M_i = 1 / sum (w_i / M_i).
	if basis == MoleFraction {
		for k, i := range idx {
			m.x[k] = f[k] / sum
			m.molar += m.x[k] * speciesTable[i].MolarMass
		}
		for k, i := range idx {
			m.w[k] = m.x[k] * speciesTable[i].MolarMass / m.molar
		}
	} else {
		inv := 0.0
		for k, i := range idx {
			m.w[k] = f[k] / sum
			inv += m.w[k] / speciesTable[i].MolarMass
		}
		m.molar = 1 / inv
		for k, i := range idx {
			m.x[k] = m.w[k] / speciesTable[i].MolarMass * m.molar
		}
	}
	m.rs = R / m.molar

	m.tmin, m.tmax = 0, math.Inf(1)
	for _, i := range idx {
		s := &speciesTable[i]
		m.tmin = math.Max(m.tmin, s.TMin)
		m.tmax = math.Min(m.tmax, s.THigh)
	}
	if !(m.tmin < m.tmax) {
		return nil, fmt.Errorf("idealgas: the species' temperature ranges do not overlap: %w", ErrComposition)
	}
	// Interval boundaries: every TMid strictly inside (tmin, tmax).
	var bounds []float64
	for _, i := range idx {
		b := speciesTable[i].TMid
		if b > m.tmin && b < m.tmax {
			bounds = append(bounds, b)
		}
	}
	sort.Float64s(bounds)
	bounds = compactFloats(bounds)
	edges := append(append([]float64{m.tmin}, bounds...), m.tmax)

	smix := 0.0
	for _, xv := range m.x {
		smix -= xv * math.Log(xv)
	}
	smix *= m.rs
	for e := 0; e+1 < len(edges); e++ {
		mid := 0.5 * (edges[e] + edges[e+1])
		var a [7]float64
		for k, i := range idx {
			s := &speciesTable[i]
			c := s.coeffs(mid)
			scale := m.w[k] * R / s.MolarMass
			for j := range a {
				a[j] += scale * c[j]
			}
		}
		sg := segment{thi: edges[e+1]}
		copy(sg.cp[:], a[:5])
		sg.hc = [5]float64{a[0], a[1] / 2, a[2] / 3, a[3] / 4, a[4] / 5}
		sg.h0 = a[5]
		sg.sc = [4]float64{a[1], a[2] / 2, a[3] / 3, a[4] / 4}
		sg.s0 = a[6] + smix + m.rs*math.Log(P0)
		if e > 0 {
			prev := &m.segs[e-1]
			b := edges[e]
			dh := prev.h(b) - sg.h(b)
			ds := prev.sigma(b) - sg.sigma(b)
			m.joinJump = math.Max(m.joinJump, math.Abs(dh)/math.Max(math.Abs(prev.h(b)), prev.cpAt(b)*b))
			m.joinJump = math.Max(m.joinJump, math.Abs(ds)/math.Abs(prev.sigma(b)))
			sg.h0 += dh
			sg.s0 += ds
		}
		m.segs = append(m.segs, sg)
	}
	// cp must be positive over the whole range (it is for physical data;
	// this guards the Newton iterations against a bad table entry).
	for T := m.tmin; T <= m.tmax; T += 1 {
		if cp := m.seg(T).cpAt(T); !(cp > m.rs) {
			return nil, fmt.Errorf("idealgas: mixture cp = %g J/(kg K) at %g K is not above its gas constant: %w", cp, T, ErrComposition)
		}
	}
	m.hInv = m.buildInv(false)
	m.sInv = m.buildInv(true)
	return m, nil
}

func compactFloats(v []float64) []float64 {
	out := v[:0]
	for i, x := range v {
		if i == 0 || x != v[i-1] {
			out = append(out, x)
		}
	}
	return out
}

func (sg *segment) cpAt(T float64) float64 {
	c := &sg.cp
	return c[0] + T*(c[1]+T*(c[2]+T*(c[3]+T*c[4])))
}

func (sg *segment) h(T float64) float64 {
	c := &sg.hc
	return T*(c[0]+T*(c[1]+T*(c[2]+T*(c[3]+T*c[4])))) + sg.h0
}

// sigma is s at unit pressure (1 Pa): s(T, p) = sigma(T) - Rs ln p.
func (sg *segment) sigma(T float64) float64 {
	return sg.sigmaL(T, math.Log(T))
}

// sigmaL is sigma with ln T supplied.
func (sg *segment) sigmaL(T, lnT float64) float64 {
	c := &sg.sc
	return sg.cp[0]*lnT + T*(c[0]+T*(c[1]+T*(c[2]+T*c[3]))) + sg.s0
}

// seg returns the interval containing T (the last one for T at or above
// the last boundary). T must already be range checked.
func (m *Mixture) seg(T float64) *segment {
	i := 0
	for i < len(m.segs)-1 && T >= m.segs[i].thi {
		i++
	}
	return &m.segs[i]
}

// buildInv tabulates T(h) or T(sigma) at invN+1 equally spaced values.
func (m *Mixture) buildInv(entropy bool) invTable {
	f := func(T float64) float64 {
		if entropy {
			return m.seg(T).sigma(T)
		}
		return m.seg(T).h(T)
	}
	lo, hi := f(m.tmin), f(m.tmax)
	tb := invTable{lo: lo, hi: hi, inv: invN / (hi - lo), t: make([]float64, invN+1)}
	tb.t[0], tb.t[invN] = m.tmin, m.tmax
	for k := 1; k < invN; k++ {
		target := lo + (hi-lo)*float64(k)/invN
		a, b := m.tmin, m.tmax
		for it := 0; it < 200 && b-a > 1e-12*b; it++ {
			c := 0.5 * (a + b)
			if f(c) < target {
				a = c
			} else {
				b = c
			}
		}
		tb.t[k] = 0.5 * (a + b)
	}
	return tb
}

func (tb *invTable) guess(v float64) float64 {
	u := (v - tb.lo) * tb.inv
	k := int(u)
	if k < 0 {
		k = 0
	}
	if k >= invN {
		k = invN - 1
	}
	fr := u - float64(k)
	return tb.t[k] + fr*(tb.t[k+1]-tb.t[k])
}

// solveT finds T in [tmin, tmax] with h(T) = target (entropy false) or
// sigma(T) = target (entropy true) by Newton's method safeguarded by
// bisection. The target must lie within the tabulated range. For entropy
// it also returns ln T (from the last logarithm and a series in the last
// step, |u| <= 1e-6, truncation below 1e-24); otherwise lnT is 0.
func (m *Mixture) solveT(target float64, entropy bool) (T, lnT float64, ok bool) {
	tb := &m.hInv
	if entropy {
		tb = &m.sInv
	}
	lo, hi := m.tmin, m.tmax
	T = tb.guess(target)
	for it := 0; it < 60; it++ {
		sg := m.seg(T)
		var r, d float64
		if entropy {
			lnT = math.Log(T)
			r = sg.sigmaL(T, lnT) - target
			d = sg.cpAt(T) / T
		} else {
			r = sg.h(T) - target
			d = sg.cpAt(T)
		}
		if r == 0 {
			return T, lnT, true
		}
		if r > 0 {
			hi = T
		} else {
			lo = T
		}
		tn := T - r/d
		if !(tn > lo && tn < hi) {
			tn = 0.5 * (lo + hi)
		}
		// Newton converges quadratically: the error after this step is
		// about |f''/(2 f')| dT^2, with |f''/f'| below 1/T (s) or
		// cp'/cp (h), so once the step is below 1e-6 T the error left is
		// below about 1e-12 T (5e-13 T for s) and no further evaluation
		// is needed. Tests hold T to 1e-10 and s to 1e-9 relative.
		if u := (tn - T) / T; math.Abs(u) <= 1e-6 {
			if entropy {
				lnT += u * (1 - u*(0.5-u*(1.0/3)))
			}
			return tn, lnT, true
		}
		T = tn
	}
	return T, lnT, false
}

// Name returns the config name of the fluid ("ideal-gas" unless set by a
// constructor or Named).
func (m *Mixture) Name() string { return m.name }

// Named returns a copy of the mixture with another name (sharing the
// immutable tables).
func (m *Mixture) Named(name string) *Mixture {
	c := *m
	c.name = name
	return &c
}

// WithMaxPressure returns a copy of the mixture that accepts pressures up to
// pmax in Pa (MinPressure < pmax < +Inf). See DefaultMaxPressure for what
// the ideal-gas assumption costs at high pressure.
func (m *Mixture) WithMaxPressure(pmax float64) (*Mixture, error) {
	if math.IsNaN(pmax) || math.IsInf(pmax, 0) || pmax <= MinPressure {
		return nil, fmt.Errorf("idealgas: pressure ceiling %g Pa must be finite and above %g Pa: %w", pmax, MinPressure, thermo.ErrOutOfRange)
	}
	c := *m
	c.pmax = pmax
	return &c, nil
}

// Species returns the canonical names of the species present, in the order
// of MoleFractions and MassFractions.
func (m *Mixture) Species() []string { return append([]string(nil), m.names...) }

// MoleFractions returns the mole fractions keyed by species name.
func (m *Mixture) MoleFractions() map[string]float64 { return m.fracMap(m.x) }

// MassFractions returns the mass fractions keyed by species name.
func (m *Mixture) MassFractions() map[string]float64 { return m.fracMap(m.w) }

func (m *Mixture) fracMap(f []float64) map[string]float64 {
	out := make(map[string]float64, len(f))
	for k, n := range m.names {
		out[n] = f[k]
	}
	return out
}

// MolarMass returns the mixture molar mass in kg/mol.
func (m *Mixture) MolarMass() float64 { return m.molar }

// GasConstant returns the specific gas constant R/M in J/(kg·K).
func (m *Mixture) GasConstant() float64 { return m.rs }

// TRange returns the temperature range of the mixture in K: the overlap of
// its species' ranges (Species.TMin to Species.THigh).
func (m *Mixture) TRange() (tmin, tmax float64) { return m.tmin, m.tmax }

// PRange returns the accepted pressure range in Pa.
func (m *Mixture) PRange() (pmin, pmax float64) { return MinPressure, m.pmax }
