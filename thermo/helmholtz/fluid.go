// Package helmholtz implements multiparameter Helmholtz-energy equations of
// state for pure fluids (and dry air as a pseudo-pure fluid) behind the
// thermo.Fluid API: one generic evaluator of the dimensionless Helmholtz
// energy a/(RT) = alpha_0(tau, delta) + alpha_r(tau, delta), a phase-aware
// density solver, saturation by the Maxwell criterion and the PT, PH, PS,
// PX, TX flashes.
//
// Fluids (config names accepted by New) and their equations:
//
//	"ammonia"        Gao, Wu, Bell, Harvey, Lemmon, J. Phys. Chem. Ref. Data 52, 013102 (2023)
//	"ammonia-1993"   Tillner-Roth, Harms-Watzenberg, Baehr, DKV-Tagungsbericht 20 (1993) 167-181
//	                 (the equation python3-iapws implements)
//	"r134a"          Tillner-Roth, Baehr, J. Phys. Chem. Ref. Data 23 (1994) 657-729
//	"co2"            Span, Wagner, J. Phys. Chem. Ref. Data 25 (1996) 1509-1596
//	"nitrogen"       Span, Lemmon, Jacobsen, Wagner, Yokozeki, J. Phys. Chem. Ref. Data 29 (2000) 1361-1433
//	"methane"        Setzmann, Wagner, J. Phys. Chem. Ref. Data 20 (1991) 1061-1151
//	"air-helmholtz"  Lemmon, Jacobsen, Penoncello, Friend, J. Phys. Chem. Ref. Data 29 (2000) 331-385,
//	                 pseudo-pure dry air (alias "air-lemmon2000")
//	"water-iapws95"  IAPWS-95, Wagner, Pruss, J. Phys. Chem. Ref. Data 31 (2002) 387-535
//
// Aliases: "air" and "air-lemmon2000" (air-helmholtz), "iapws95"
// (water-iapws95), "carbon-dioxide" (co2), "r-134a" (r134a), "nh3" (ammonia).
//
// The coefficients are embedded copies of testdata/reference/eos/*.json
// (transcribed from CoolProp commit ea27c63; see data/README.md), parsed
// once on first use into flat arrays.
//
// Flash supports PT, PH, PS, PX, TX and HS. Below the critical temperature
// the (p,T) flash decides the phase against the saturation pressure (the
// ancillary equation when p is clearly away from it, the equation's own
// Maxwell solution otherwise), solves the density on that branch by
// safeguarded Newton iteration and checks the root (converged, dp/drho > 0,
// on the expected side of the saturated density, vapour Z plausible); a
// failed check is an error wrapping thermo.ErrPhase or
// thermo.ErrNoConvergence, never a number. Saturation (SatP, SatT, PX, TX,
// the two-phase part of PH, PS, HS) is the Maxwell construction of the
// equation itself; it converges to within 1e-5 Tc of the critical point
// and reports ErrNoConvergence closer than that. Pseudo-pure air has no
// Maxwell construction: its liquid lies above the bubble line, its vapour
// below the dew line (CoolProp's ancillaries, about 1 % accurate), and
// states between them are ErrPhase errors; SatP, SatT, PX and TX return
// ErrUnsupported for it.
//
// Reference states (h and s only; p, cp, cv, w and all differences of h
// and s are independent of them):
//
//	ammonia        published constants: h ≈ 0, s ≈ 0 for saturated liquid at the triple point
//	ammonia-1993   published constants (CoolProp's OTH offset dropped): IIR, h = 200 kJ/kg,
//	               s = 1 kJ/(kg K) for saturated liquid at 273.15 K, as in python3-iapws
//	r134a          IIR (published constants)
//	co2            IIR (CoolProp's IIR offset kept; the published constants give ideal gas
//	               h = 0, s = 0 at 298.15 K, 101.325 kPa)
//	nitrogen       published constants: ideal gas h = 8670 J/mol, s = 191.5 J/(mol K) at 298.15 K, 101.325 kPa
//	methane        NBP, h = 0, s = 0 for saturated liquid at 101.325 kPa (CoolProp's offset kept)
//	air-helmholtz  published constants of Lemmon et al. (2000) (CoolProp's OTH offset dropped):
//	               ideal gas h = 8649.34 J/mol, s = 198.686 J/(mol K) at 298.15 K, 101.325 kPa
//	water-iapws95  IAPWS-95: u = 0, s = 0 for saturated liquid at the triple point
//
// Everything is SI and mass based: Pa, K, kg/m3, J/kg, J/(kg K), m/s. A
// *Fluid is shared by New, immutable apart from lock-free caches (the
// phase boundaries at the last four pressures of (p,h)/(p,s) flashes, the
// last four saturation states found from a pressure, the last three found
// from a temperature; a hit returns exactly what a new solve would) and
// safe for concurrent use.
package helmholtz

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"sync"
	"sync/atomic"

	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/internal/fastmath"
)

// spec says which file and equation a config name uses.
type spec struct {
	file       string
	eos        int
	dropOffset bool
	refState   string
}

var specs = map[string]spec{
	"ammonia":       {"ammonia.json", 0, false, "published constants: h ≈ 0, s ≈ 0 for saturated liquid at the triple point"},
	"ammonia-1993":  {"ammonia.json", 1, true, "IIR: h = 200 kJ/kg, s = 1 kJ/(kg K) for saturated liquid at 273.15 K (published constants)"},
	"r134a":         {"r134a.json", 0, false, "IIR: h = 200 kJ/kg, s = 1 kJ/(kg K) for saturated liquid at 273.15 K (published constants)"},
	"co2":           {"carbon_dioxide.json", 0, false, "IIR: h = 200 kJ/kg, s = 1 kJ/(kg K) for saturated liquid at 273.15 K (CoolProp offset)"},
	"nitrogen":      {"nitrogen.json", 0, false, "published constants: ideal gas h = 8670 J/mol, s = 191.5 J/(mol K) at 298.15 K, 101.325 kPa"},
	"methane":       {"methane.json", 0, false, "NBP: h = 0, s = 0 for saturated liquid at 101.325 kPa (CoolProp offset)"},
	"air-helmholtz": {"air.json", 0, true, "published constants of Lemmon et al. (2000): ideal gas h = 8649.34 J/mol, s = 198.686 J/(mol K) at 298.15 K, 101.325 kPa"},
	"water-iapws95": {"water.json", 0, false, "IAPWS-95: u = 0, s = 0 for saturated liquid at the triple point"},
}

var aliases = map[string]string{
	"air-lemmon2000": "air-helmholtz",
	"air":            "air-helmholtz",
	"iapws95":        "water-iapws95",
	"carbon-dioxide": "co2",
	"r-134a":         "r134a",
	"nh3":            "ammonia",
}

// Names returns the config names New accepts (aliases excluded), sorted.
func Names() []string {
	out := make([]string, 0, len(specs))
	for k := range specs {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// ancillary is one of CoolProp's saturation correlations, theta = 1 - T/Tr:
// kind 0: v = r (1 + sum n theta^t); kind 1: v = r exp(Tr/T sum n theta^t);
// kind 2: v = r exp(sum n theta^t).
type ancillary struct {
	kind   int
	tr, r  float64
	n, t   []float64
	maxErr float64 // stated maximum relative error
	ok     bool
}

func newAncillary(a jsonAnc, scale float64) (ancillary, error) {
	var k int
	switch {
	case strings.Contains(a.Form, "(1 + sum"):
		k = 0
	case strings.Contains(a.Form, "exp((T_r/T)"):
		k = 1
	case strings.Contains(a.Form, "exp(sum"):
		k = 2
	default:
		return ancillary{}, fmt.Errorf("unknown ancillary form %q", a.Form)
	}
	if len(a.N) != len(a.T) || a.Tr <= 0 {
		return ancillary{}, fmt.Errorf("malformed ancillary")
	}
	return ancillary{kind: k, tr: a.Tr, r: a.Reduce * scale, n: a.N, t: a.T, maxErr: a.MaxErrP / 100, ok: true}, nil
}

func (a *ancillary) eval(T float64) float64 {
	th := 1 - T/a.tr
	var s float64
	if th > 0 {
		lth := math.Log(th)
		for i, n := range a.n {
			s += n * fastmath.Exp(a.t[i]*lth)
		}
	}
	switch a.kind {
	case 0:
		return a.r * (1 + s)
	case 1:
		return a.r * fastmath.Exp(a.tr/T*s)
	default:
		return a.r * fastmath.Exp(s)
	}
}

// Fluid is one multiparameter equation of state. It implements
// thermo.Fluid, thermo.Saturation and thermo.Critical.
type Fluid struct {
	name       string
	id         string
	reference  string
	refState   string
	pseudoPure bool

	m    float64 // molar mass, kg/mol
	r    float64 // specific gas constant R/M, J/(kg K)
	tr   float64 // reducing temperature, K
	rhor float64 // reducing density, kg/m3

	tc, pc, rhoc float64 // critical point, K, Pa, kg/m3
	tt, pt       float64 // triple point (T_min of the equation), K, Pa
	rhoLt        float64 // saturated-liquid density at the triple point, kg/m3
	tmin, tmax   float64 // K
	pmax         float64 // Pa

	q *eos

	ancP, ancPL, ancPV, ancRL, ancRV ancillary

	// molar check states from the JSON (CoolProp), for tests
	checks map[string]jsonCheck

	satTriple satPoint // Maxwell solution at T_min
	satRef    satPoint // Maxwell solution at 0.99 Tc, start of the near-critical march
	ancMargin float64  // relative band around the ancillary p_sat inside which the Maxwell solution decides the phase
	ancLnLo   float64  // ln of the p_sat ancillary at T_min, Pa (ancTsatFast's bracket; set by calibrate)
	ancLnHi   float64  // ln of the p_sat ancillary just below min(Tc, its T_r), Pa
	ancTolL   float64  // relative widening of the rhoL ancillary for the liquid-branch bound
	ancTolV   float64  // relative widening of the rhoV ancillary for the vapour-branch bound

	// lastSatP caches the latest saturation state found from a pressure
	// (repeated flashes at one outlet pressure reuse it); prevSatP holds
	// the three stored before it (an uncertainty propagation visits p,
	// p + dp, p - dp and p again).
	lastSatP atomic.Pointer[satPoint]
	prevSatP recentSat
	// lastEdges caches the phase boundary of the latest (p,h)/(p,s) flash,
	// prevEdges the three before it.
	lastEdges atomic.Pointer[edgeSet]
	prevEdges recentEdges
	// byT caches the last three Maxwell solutions at a temperature taken
	// by the (p,T) flash's phase checks (classify, branchBounds) and by
	// TX, SatP and Saturated: a propagation repeats T while it perturbs p.
	byT recentSat
}

// recentSat and recentEdges are rings of three cached results, lock-free:
// a result depends only on its pressure, so a hit returns exactly what a
// new solve would.
type recentSat struct {
	s [3]atomic.Pointer[satPoint]
	n atomic.Uint32
}

func (r *recentSat) find(p float64) *satPoint {
	for i := range r.s {
		if c := r.s[i].Load(); c != nil && c.p == p {
			return c
		}
	}
	return nil
}

func (r *recentSat) findT(T float64) *satPoint {
	for i := range r.s {
		if c := r.s[i].Load(); c != nil && c.T == T {
			return c
		}
	}
	return nil
}

func (r *recentSat) push(c *satPoint) {
	if c != nil {
		r.s[r.n.Add(1)%3].Store(c)
	}
}

type recentEdges struct {
	s [3]atomic.Pointer[edgeSet]
	n atomic.Uint32
}

func (r *recentEdges) find(p float64) *edgeSet {
	for i := range r.s {
		if c := r.s[i].Load(); c != nil && c.p == p {
			return c
		}
	}
	return nil
}

func (r *recentEdges) push(c *edgeSet) {
	if c != nil {
		r.s[r.n.Add(1)%3].Store(c)
	}
}

var (
	buildMu    sync.Mutex
	buildCache = map[string]*Fluid{}
)

// New returns the fluid with the given config name (see the package doc and
// Names). The result is shared and immutable.
func New(name string) (*Fluid, error) {
	key := strings.ToLower(strings.TrimSpace(name))
	if a, ok := aliases[key]; ok {
		key = a
	}
	sp, ok := specs[key]
	if !ok {
		return nil, fmt.Errorf("helmholtz: unknown fluid %q (known: %s)", name, strings.Join(Names(), ", "))
	}
	buildMu.Lock()
	defer buildMu.Unlock()
	if f, ok := buildCache[key]; ok {
		return f, nil
	}
	f, err := build(key, sp)
	if err != nil {
		return nil, err
	}
	buildCache[key] = f
	return f, nil
}

func build(name string, sp spec) (*Fluid, error) {
	jf, err := loadFile(sp.file)
	if err != nil {
		return nil, err
	}
	if sp.eos >= len(jf.EOS) {
		return nil, fmt.Errorf("helmholtz: %s: equation %d missing", sp.file, sp.eos)
	}
	e := &jf.EOS[sp.eos]
	q, err := buildEOS(e, sp.dropOffset)
	if err != nil {
		return nil, fmt.Errorf("helmholtz: %s: %w", sp.file, err)
	}
	M := e.M
	if !(M > 0) || !(e.R > 0) || !(e.Reducing.T > 0) || !(e.Reducing.Rho > 0) {
		return nil, fmt.Errorf("helmholtz: %s: missing molar mass, gas constant or reducing state", sp.file)
	}
	ref := e.Reference
	doi := ""
	if ref.DOI != nil {
		doi = ", doi:" + *ref.DOI
	}
	f := &Fluid{
		name:       name,
		id:         e.ID,
		reference:  fmt.Sprintf("%s, %s, %s (%d)%s", ref.Authors, ref.Title, ref.Journal, ref.Year, doi),
		refState:   sp.refState,
		pseudoPure: e.PseudoPure,
		m:          M,
		r:          e.R / M,
		tr:         e.Reducing.T,
		rhor:       e.Reducing.Rho * M,
		tc:         e.Critical.T,
		pc:         e.Critical.P,
		rhoc:       e.Critical.Rho * M,
		tt:         e.Triple.T,
		pt:         e.Triple.P,
		rhoLt:      e.Triple.RhoL * M,
		tmin:       e.Limits.Tmin,
		tmax:       e.Limits.Tmax,
		pmax:       e.Limits.Pmax,
		q:          q,
		checks:     e.Check,
	}
	for key, a := range jf.Anc {
		scale := 1.0
		if strings.HasPrefix(key, "rho") {
			scale = M
		}
		an, err := newAncillary(a, scale)
		if err != nil {
			return nil, fmt.Errorf("helmholtz: %s: ancillary %s: %w", sp.file, key, err)
		}
		switch key {
		case "pS":
			f.ancP = an
		case "pL":
			f.ancPL = an
		case "pV":
			f.ancPV = an
		case "rhoL":
			f.ancRL = an
		case "rhoV":
			f.ancRV = an
		}
	}
	if f.pseudoPure {
		if !f.ancPL.ok || !f.ancPV.ok {
			return nil, fmt.Errorf("helmholtz: %s: pseudo-pure fluid without bubble/dew ancillaries", sp.file)
		}
	} else if !f.ancP.ok || !f.ancRL.ok || !f.ancRV.ok {
		return nil, fmt.Errorf("helmholtz: %s: missing saturation ancillaries", sp.file)
	}
	if err := f.calibrate(); err != nil {
		return nil, err
	}
	return f, nil
}

// Name returns the config name.
func (f *Fluid) Name() string { return f.name }

// Reference returns the literature reference of the equation.
func (f *Fluid) Reference() string { return f.reference }

// ReferenceState describes the zero of h and s used by this fluid.
func (f *Fluid) ReferenceState() string { return f.refState }

// MolarMass returns the molar mass of the equation in kg/mol.
func (f *Fluid) MolarMass() float64 { return f.m }

// GasConstant returns the specific gas constant R/M of the equation in J/(kg K).
func (f *Fluid) GasConstant() float64 { return f.r }

// Reducing returns the reducing temperature (K) and density (kg/m3):
// tau = Tr/T, delta = rho/rhor.
func (f *Fluid) Reducing() (Tr, rhor float64) { return f.tr, f.rhor }

// CriticalPoint returns the critical temperature (K), pressure (Pa) and
// density (kg/m3) of the equation: the listed values, except where the
// listed point is not the equation's own critical point (ammonia-1993,
// r134a), where New computes it from the equation. For pseudo-pure air it
// is CoolProp's value for the mixture critical point.
func (f *Fluid) CriticalPoint() (T, p, rho float64) { return f.tc, f.pc, f.rhoc }

// Limits returns the validity range used for range errors: T_min (the
// triple point), T_max in K and p_max in Pa.
func (f *Fluid) Limits() (Tmin, Tmax, pmax float64) { return f.tmin, f.tmax, f.pmax }

// Derivatives are the dimensionless Helmholtz energy phi = a/(RT) of one
// part (ideal or residual) and its partial derivatives with respect to
// delta = rho/rhor and tau = Tr/T (not scaled).
type Derivatives struct {
	Phi, PhiDelta, PhiDeltaDelta, PhiTau, PhiTauTau, PhiDeltaTau float64
}

// Parts returns the ideal-gas and residual parts of a/(RT) and their
// derivatives at (tau, delta); both must be positive and finite.
func (f *Fluid) Parts(tau, delta float64) (ideal, residual Derivatives, err error) {
	if err = thermo.CheckFinite(f.name, []string{"tau", "delta"}, tau, delta); err != nil {
		return
	}
	if !(tau > 0) || !(delta > 0) {
		err = fmt.Errorf("%s: tau and delta must be positive: %w", f.name, thermo.ErrOutOfRange)
		return
	}
	var tp tauPart
	f.q.tauPart(tau, &tp)
	r := f.q.residual(&tp, delta, true)
	i := f.q.ideal(tau)
	ideal = Derivatives{
		Phi: i.A + math.Log(delta), PhiDelta: 1 / delta, PhiDeltaDelta: -1 / (delta * delta),
		PhiTau: i.T / tau, PhiTauTau: i.TT / (tau * tau),
	}
	residual = Derivatives{
		Phi: r.A, PhiDelta: r.D / delta, PhiDeltaDelta: r.DD / (delta * delta),
		PhiTau: r.T / tau, PhiTauTau: r.TT / (tau * tau), PhiDeltaTau: r.DT / (delta * tau),
	}
	return
}

// calibrate solves the saturation at T_min and measures how far the
// saturation-pressure ancillary (fitted by CoolProp to the default equation)
// strays from this equation's own Maxwell solution; three times the largest
// deviation (at least 5 times the stated error, at least 0.2 %) becomes the
// band in which a (p,T) flash consults the Maxwell solution.
func (f *Fluid) calibrate() error {
	if !f.pseudoPure {
		f.ownCritical()
	}
	if f.pseudoPure {
		f.ancMargin = 0.02 + 3*max(f.ancPL.maxErr, f.ancPV.maxErr)
		f.ancTolL = 3*f.ancRL.maxErr + 0.005
		f.ancTolV = 3*f.ancRV.maxErr + 0.005
		return nil
	}
	f.ancLnLo, _ = f.ancP.lnEval(f.tmin)
	f.ancLnHi, _ = f.ancP.lnEval(math.Min(f.tc, f.ancP.tr) * (1 - 1e-9))
	st, err := f.maxwell(f.tmin, 0, 0)
	if err != nil {
		return fmt.Errorf("helmholtz: %s: saturation at the triple point: %w", f.name, err)
	}
	f.satTriple = st
	dev, devL, devV := 0.0, 0.0, 0.0
	const n = 40
	for i := 0; i <= n; i++ {
		T := f.tmin + (0.99*f.tc-f.tmin)*float64(i)/n
		sp, err := f.maxwell(T, 0, 0)
		if err != nil {
			return fmt.Errorf("helmholtz: %s: saturation at %g K: %w", f.name, T, err)
		}
		dev = max(dev, math.Abs(f.ancP.eval(T)/sp.p-1))
		if T <= 0.98*f.tc {
			devL = max(devL, math.Abs(f.ancRL.eval(T)/sp.rhoL-1))
			devV = max(devV, math.Abs(f.ancRV.eval(T)/sp.rhoV-1))
		}
	}
	ref, err := f.maxwell(0.99*f.tc, 0, 0)
	if err != nil {
		return fmt.Errorf("helmholtz: %s: saturation at 0.99 Tc: %w", f.name, err)
	}
	f.satRef = ref
	f.ancMargin = max(3*dev, 5*f.ancP.maxErr, 0.002)
	f.ancTolL = 3*devL + 0.005
	f.ancTolV = 3*devV + 0.005
	return nil
}

// ownCritical replaces the listed critical point by the equation's own when
// they disagree: for ammonia-1993 the listed point (its reducing state,
// 405.4 K, 11.333 MPa) has dp/drho < 0, and for r134a slightly so. The
// critical temperature is the highest T at which min over rho of
// (dp/drho)_T reaches zero (bisection on T, golden-section search on delta).
// Equations whose listed point already has |dp/drho| < 1e-6 R T are kept as
// listed (water and co2, whose non-analytic terms make the point singular,
// among them).
func (f *Fluid) ownCritical() {
	yAt := func(T, rho float64) float64 {
		var tp tauPart
		f.q.tauPart(f.tr/T, &tp)
		r := f.q.residual(&tp, rho/f.rhor, false)
		return 1 + 2*r.D + r.DD
	}
	if math.Abs(yAt(f.tc, f.rhoc)) < 1e-6 {
		return
	}
	minY := func(T float64) (y, rho float64) {
		a, b := 0.8*f.rhoc, 1.2*f.rhoc
		g := (math.Sqrt(5) - 1) / 2
		c, d := b-g*(b-a), a+g*(b-a)
		yc, yd := yAt(T, c), yAt(T, d)
		for i := 0; i < 80; i++ {
			if yc < yd {
				b, d, yd = d, c, yc
				c = b - g*(b-a)
				yc = yAt(T, c)
			} else {
				a, c, yc = c, d, yd
				d = a + g*(b-a)
				yd = yAt(T, d)
			}
		}
		return min(yc, yd), 0.5 * (a + b)
	}
	lo, hi := 0.98*f.tc, 1.02*f.tc
	if y, _ := minY(lo); y >= 0 {
		return
	}
	if y, _ := minY(hi); y <= 0 {
		return
	}
	for i := 0; i < 60; i++ {
		m := 0.5 * (lo + hi)
		if y, _ := minY(m); y < 0 {
			lo = m
		} else {
			hi = m
		}
	}
	T := 0.5 * (lo + hi)
	_, rho := minY(T)
	var tp tauPart
	f.q.tauPart(f.tr/T, &tp)
	p, _ := f.pOf(&tp, T, rho)
	f.tc, f.pc, f.rhoc = T, p, rho
}
