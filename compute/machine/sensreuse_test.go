package machine

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/exergywatch/exergywatch/compute/uncert"
	"github.com/exergywatch/exergywatch/thermo"
)

// reuseBounds are, per reuse fraction α, the largest relative deviation of
// a U95 from reused sensitivities from the fresh U95 that the trajectory
// test accepts (0: measured and logged only), and the fewest reuses per
// trajectory of 300 samples it needs to mean anything. The deviation is
// first order in the nonlinearity over α·u: about α times the relative
// uncertainty of an input in a denominator (flow, power: 1-1.5 %), more
// for a pump, whose efficiency goes with 1/ΔT² over a temperature rise of
// about 1 K. Measured maxima (16 anchors): 1.3 % (α = 0.5, the pump),
// 3.2 % (α = 1, the pump; 2.1 % for the other machines), 7.1 % (α = 2, the
// pump; 2.9 % for the others). The bound 5 % is half a unit of the second
// significant digit of a U95 of 0.0100 (uncertainties are stated to at
// most two significant digits, GUM JCGM 100:2008 §7.2.6) and far below the
// reliability of the standard uncertainties it is built from (a Type B u_i
// judged reliable to 10-25 %: GUM §G.4.2 and Table E.1); the choice is
// common practice, no source.
var reuseBounds = []struct {
	alpha, maxDev float64
	minReused     int
}{
	{0.5, 0.05, 0},
	{1, 0.05, 50},
	{2, 0, 200},
}

// u95Floor: a U95 below this fraction of its figure's magnitude (or 1e-12
// absolute for a zero figure) is rounding, not an uncertainty, and its
// relative deviation is not compared (common practice, no source).
const u95Floor = 1e-9

func mustClass(t testing.TB, s string) uncert.TempClass {
	t.Helper()
	c, err := uncert.ParseTempClass(s)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// trajCase is a machine on one of the demo plant's operating points
// (cmd/exergywatch/internal/plantsim designs.go, an invented plant) with
// its configured instrument uncertainties (cmd/exergywatch/demo.yaml) and
// its simulated measurement noise (standard deviations, SI). Values are
// plausible plant states (common practice, no source); the test compares
// two ways of computing the same U95, so none is an expected result.
type trajCase struct {
	name  string
	fluid string
	spec  Spec
	// Design point: inlet, outlet pressure, mass flow, path efficiency
	// (isentropic), cooled fraction of the work (shaft-power basis).
	p1, T1, p2, flow, eta, cool float64
	noise                       Inputs
}

func trajCases(t testing.TB) []trajCase {
	tcK1, rtdA := mustClass(t, "tc-K-1"), mustClass(t, "rtd-A")
	airU := Uncertainty{P1: Std{Rel: 0.002}, P2: Std{Rel: 0.002}, T1Class: rtdA, T2Class: rtdA, MassFlow: Std{Rel: 0.01}, Power: Std{Rel: 0.01}}
	airNoise := Inputs{P1: 50, T1: 0.2, P2: 500, T2: 0.3, MassFlow: 0.1, ElectricalPower: 20e3}
	return []trajCase{
		{name: "steam turbine p,T/p,T", fluid: "water",
			spec: Spec{Kind: Turbine, Inlet: ByPT, Outlet: ByPT,
				Uncertainty: Uncertainty{P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1Class: tcK1, T2Class: tcK1, MassFlow: Std{Rel: 0.01}}},
			p1: 16e6, T1: 811.15, p2: 4e6, flow: 250, eta: 0.86,
			noise: Inputs{P1: 10e3, T1: 0.3, P2: 4e3, T2: 0.3, MassFlow: 2.0 / 3.6}},
		{name: "wet-exhaust turbine by energy balance", fluid: "water",
			spec: Spec{Kind: Turbine, Inlet: ByPT, Outlet: ByEnergyBalance, Power: ElectricalPower, DriveEfficiency: 0.985, MechanicalLoss: 0.6e6,
				Uncertainty: Uncertainty{P1: Std{Rel: 0.002}, P2: Std{Rel: 0.005}, T1Class: tcK1, MassFlow: Std{Rel: 0.01}, Power: Std{Rel: 0.003}}},
			p1: 0.5e6, T1: 573.15, p2: 7e3, flow: 200, eta: 0.88,
			noise: Inputs{P1: 500, T1: 0.3, P2: 20, MassFlow: 0.5, ElectricalPower: 0.1e6}},
		{name: "feed pump p,T/p,T", fluid: "water",
			spec: Spec{Kind: Pump, Inlet: ByPT, Outlet: ByPT, Power: ElectricalPower, DriveEfficiency: 0.965,
				Uncertainty: Uncertainty{P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1: Std{Abs: 0.05}, T2: Std{Abs: 0.05}, MassFlow: Std{Rel: 0.01}, Power: Std{Rel: 0.005}}},
			p1: 1.0e6, T1: 438.15, p2: 18e6, flow: 250, eta: 0.80,
			noise: Inputs{P1: 2e3, T1: 0.05, P2: 10e3, T2: 0.05, MassFlow: 2.0 / 3.6, ElectricalPower: 20e3}},
		{name: "air compressor (ideal gas)", fluid: "air",
			spec: Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByPT, Power: ElectricalPower, DriveEfficiency: 0.97, Uncertainty: airU},
			p1:   99e3, T1: 288.15, p2: 0.9e6, flow: 50, eta: 0.84, noise: airNoise},
		{name: "air compressor (Helmholtz)", fluid: "air-helmholtz",
			spec: Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByPT, Power: ElectricalPower, DriveEfficiency: 0.97, Uncertainty: airU},
			p1:   99e3, T1: 288.15, p2: 0.9e6, flow: 50, eta: 0.84, noise: airNoise},
		{name: "natural-gas compressor (GERG-2008)", fluid: "natural-gas",
			spec: Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByPT, Power: ShaftPower,
				Uncertainty: Uncertainty{P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1Class: rtdA, T2Class: rtdA, MassFlow: Std{Rel: 0.01}, Power: Std{Rel: 0.01}}},
			p1: 4e6, T1: 293.15, p2: 7e6, flow: 40, eta: 0.78,
			noise: Inputs{P1: 3e3, T1: 0.2, P2: 5e3, T2: 0.3, MassFlow: 0.1, ShaftPower: 10e3}},
		{name: "oil-cooled ammonia compressor, shaft-power basis", fluid: "ammonia",
			spec: Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByPT, Power: ShaftPower, WorkFromPower: true, HeatRejectionT: 308.15,
				Uncertainty: Uncertainty{P1: Std{Rel: 0.002}, P2: Std{Rel: 0.002}, T1Class: rtdA, T2Class: rtdA, MassFlow: Std{Rel: 0.015}, Power: Std{Rel: 0.01}}},
			p1: 0.19e6, T1: 261.15, p2: 1.2e6, flow: 2, eta: 0.75, cool: 0.25,
			noise: Inputs{P1: 300, T1: 0.2, P2: 1e3, T2: 0.3, MassFlow: 20.0 / 3600, ShaftPower: 1e3}},
	}
}

// design returns noiseless inputs of the case at load factor `load`
// (1 = design): flow and pressures scale with it, the outlet state and
// power follow from the path efficiency with the case's own fluid model.
func (c *trajCase) design(t testing.TB, fl thermo.Fluid, load, dT1 float64) Inputs {
	t.Helper()
	p1, T1, p2, m := c.p1*(0.7+0.3*load), c.T1+dT1, c.p2*(0.75+0.25*load), c.flow*load
	s1, err := fl.Flash(thermo.PT, p1, T1)
	if err != nil {
		t.Fatal(err)
	}
	s2s, err := fl.Flash(thermo.PS, p2, s1.S)
	if err != nil {
		t.Fatal(err)
	}
	var w, h2 float64 // shaft work, outlet enthalpy
	if c.spec.Kind == Turbine {
		w = c.eta * (s1.H - s2s.H)
		h2 = s1.H - w
	} else {
		w = (s2s.H - s1.H) / c.eta
		h2 = s1.H + w*(1-c.cool)
	}
	s2, err := fl.Flash(thermo.PH, p2, h2)
	if err != nil {
		t.Fatal(err)
	}
	in := Inputs{P1: p1, T1: T1, P2: p2, T2: s2.T, MassFlow: m}
	fluidPower := m * w
	switch c.spec.Power {
	case ShaftPower:
		in.ShaftPower = fluidPower + c.spec.MechanicalLoss
		if c.spec.Kind == Turbine {
			in.ShaftPower = fluidPower - c.spec.MechanicalLoss
		}
	case ElectricalPower:
		if c.spec.Kind == Turbine {
			in.ElectricalPower = (fluidPower - c.spec.MechanicalLoss) * c.spec.DriveEfficiency
		} else {
			in.ElectricalPower = (fluidPower + c.spec.MechanicalLoss) / c.spec.DriveEfficiency
		}
	}
	return in
}

// trajectory is n noisy samples along a slow drift: the load falls from
// 1 to 0.9 and the inlet temperature rises by 2 K over the n samples (a
// slow load change), with the case's measurement noise on every input.
func (c *trajCase) trajectory(t testing.TB, fl thermo.Fluid, n int, seed uint64) []Inputs {
	rng := rand.New(rand.NewPCG(seed, 7))
	out := make([]Inputs, n)
	for k := range out {
		f := float64(k) / float64(n-1)
		in := c.design(t, fl, 1-0.1*f, 2*f)
		z := &c.noise
		in.P1 += z.P1 * rng.NormFloat64()
		in.T1 += z.T1 * rng.NormFloat64()
		in.P2 += z.P2 * rng.NormFloat64()
		in.T2 += z.T2 * rng.NormFloat64()
		in.MassFlow += z.MassFlow * rng.NormFloat64()
		in.ShaftPower += z.ShaftPower * rng.NormFloat64()
		in.ElectricalPower += z.ElectricalPower * rng.NormFloat64()
		out[k] = in
	}
	return out
}

func sameBits(a, b float64) bool {
	return math.Float64bits(a) == math.Float64bits(b) || (math.IsNaN(a) && math.IsNaN(b))
}

// reuseStats is what one trajectory measured.
type reuseStats struct {
	n, reused int
	maxDev    float64 // largest |U95 reuse - U95 fresh| / U95 fresh
	maxFig    FigureID
}

// runTrajectory evaluates every sample fresh (Evaluate) and with a
// sensitivity cache (EvaluateWith) and checks what must be identical.
func runTrajectory(t *testing.T, spec *Spec, traj []Inputs, cache *Sensitivities) reuseStats {
	t.Helper()
	var st reuseStats
	for k := range traj {
		in := &traj[k]
		fresh, errF := Evaluate(spec, in)
		re, errR := EvaluateWith(spec, in, cache)
		if (errF == nil) != (errR == nil) || (errF != nil && errF.Error() != errR.Error()) {
			t.Fatalf("sample %d: fresh error %v, with cache %v", k, errF, errR)
		}
		if errF != nil {
			continue
		}
		st.n++
		if re.SensitivityAge > 0 {
			st.reused++
		}
		if fresh.SensitivityAge != 0 {
			t.Fatalf("Evaluate reported reused sensitivities (age %d)", fresh.SensitivityAge)
		}
		if fresh.Quality != re.Quality || !slices.Equal(fresh.Reasons, re.Reasons) {
			t.Errorf("sample %d: quality fresh %v %v, reused %v %v", k, fresh.Quality, fresh.Reasons, re.Quality, re.Reasons)
		}
		if fresh.Inlet != re.Inlet || fresh.Outlet != re.Outlet || fresh.IsentropicOutlet != re.IsentropicOutlet || fresh.PolytropicMethod != re.PolytropicMethod {
			t.Errorf("sample %d: states differ", k)
		}
		for id := range NumFigures {
			ff, fr := fresh.Figures[id], re.Figures[id]
			if ff.Defined != fr.Defined || ff.HasU95 != fr.HasU95 || !sameBits(ff.Value, fr.Value) {
				t.Fatalf("sample %d %v: fresh %+v, reused %+v (values must be bitwise identical)", k, id, ff, fr)
			}
			if !ff.HasU95 {
				continue
			}
			if !finite(fr.U95) || fr.U95 < 0 {
				t.Fatalf("sample %d %v: reused U95 %v, fresh %v", k, id, fr.U95, ff.U95)
			}
			if re.SensitivityAge == 0 && !sameBits(ff.U95, fr.U95) {
				t.Errorf("sample %d %v: fresh sensitivities but U95 %v != %v", k, id, fr.U95, ff.U95)
			}
			if ff.U95 <= u95Floor*math.Max(math.Abs(ff.Value), 1e-3) {
				continue
			}
			if d := math.Abs(fr.U95-ff.U95) / ff.U95; d > st.maxDev {
				st.maxDev, st.maxFig = d, id
			}
		}
	}
	return st
}

// Along noisy, slowly drifting trajectories of a steam turbine (IF97, (p,T)
// both ends), a wet-exhaust turbine (energy balance from generator power),
// a feed pump, air compressors (ideal gas and Helmholtz air), a GERG-2008 natural-gas
// compressor and an oil-cooled ammonia compressor, EvaluateWith gives
// figure values, states, quality and reasons bitwise identical to
// Evaluate, and U95s within reuseBounds of the fresh ones for reuse
// fractions 0.5 and 1 (the default; 2 is measured). The reference is Evaluate
// itself (sensitivities by central differences at every sample). The
// reuse rate must be substantial, or the test would prove nothing.
func TestSensitivityReuseAlongTrajectories(t *testing.T) {
	const n = 300
	for _, c := range trajCases(t) {
		t.Run(c.name, func(t *testing.T) {
			spec := c.spec
			spec.Fluid = stagedFluid(t, c.fluid)
			traj := c.trajectory(t, spec.Fluid, n, 1)
			for _, rb := range reuseBounds {
				cache := &Sensitivities{ReuseFraction: rb.alpha}
				st := runTrajectory(t, &spec, traj, cache)
				fresh, reused := cache.Counts()
				if fresh+reused != st.n || reused != st.reused {
					t.Errorf("alpha %v: counts fresh %d reused %d, results %d reused %d", rb.alpha, fresh, reused, st.n, st.reused)
				}
				t.Logf("alpha %.1f: %3d/%d evaluations reused sensitivities; max |dU95|/U95 = %.2e (%v)", rb.alpha, st.reused, st.n, st.maxDev, st.maxFig)
				if rb.maxDev > 0 && st.maxDev > rb.maxDev {
					t.Errorf("alpha %v: U95 deviates by %.3g relative (%v), bound %v", rb.alpha, st.maxDev, st.maxFig, rb.maxDev)
				}
				if st.n < n || st.reused < rb.minReused {
					t.Errorf("alpha %v: only %d of %d evaluations reused sensitivities (%d evaluated), want %d", rb.alpha, st.reused, n, st.n, rb.minReused)
				}
			}
		})
	}
}

// At the anchor's own inputs the reused sensitivities are the fresh ones,
// so the U95s, sensitivities and dominant-input notes are bitwise those of
// Evaluate, for every machine kind and state method on water, air, natural
// gas and ammonia, with both correlations (checks that the cache's GUM
// eq. 16 is uncert.Propagate's, term by term). Reference: Evaluate.
func TestSensitivityReuseAtAnchorIsExact(t *testing.T) {
	for _, c := range stagedCases() {
		t.Run(c.fluid+"/"+c.name, func(t *testing.T) {
			spec := c.spec
			spec.Fluid = stagedFluid(t, c.fluid)
			spec.Uncertainty = allUncertain
			want := mustEval(t, &spec, &c.in)
			// A (p,T) state near saturation is always evaluated afresh.
			near := slices.Contains(want.Reasons, ReasonNearSaturationInlet) || slices.Contains(want.Reasons, ReasonNearSaturationOutlet)
			var cache Sensitivities
			for age := range 3 {
				got, err := EvaluateWith(&spec, &c.in, &cache)
				if err != nil {
					t.Fatal(err)
				}
				if wantAge := age; got.SensitivityAge != wantAge && !(near && got.SensitivityAge == 0) {
					t.Fatalf("evaluation %d: sensitivity age %d, want %d (near saturation: %v)", age, got.SensitivityAge, wantAge, near)
				}
				for id := range NumFigures {
					fw, fg := want.Figures[id], got.Figures[id]
					if fw.HasU95 != fg.HasU95 || !sameBits(fw.U95, fg.U95) || !sameBits(fw.Value, fg.Value) {
						t.Errorf("age %d %v: got %+v, want %+v", age, id, fg, fw)
					}
					for _, name := range inputNames {
						a, oka := got.Sensitivity(id, name)
						b, okb := want.Sensitivity(id, name)
						if oka != okb || !sameBits(a, b) {
							t.Errorf("age %d d %v/d %s: got %v %v, want %v %v", age, id, name, a, oka, b, okb)
						}
					}
					if dw, dg := want.prop.dominant(id), got.prop.dominant(id); dw != dg {
						t.Errorf("age %d %v: dominant input %d, want %d", age, id, dg, dw)
					}
				}
				if !slices.Equal(got.Notes, want.Notes) || !slices.Equal(got.Reasons, want.Reasons) {
					t.Errorf("age %d: notes %q reasons %v, want %q %v", age, got.Notes, got.Reasons, want.Notes, want.Reasons)
				}
			}
		})
	}
}

// The variance contributions behind the dominant-input note are those of
// the current inputs' uncertainties: with reused sensitivities and a
// relative temperature uncertainty, (c_i u_i(x))² follows the current x.
// Reference: GUM eq. 16 with the result's own sensitivities.
func TestSensitivityReuseUsesCurrentUncertainties(t *testing.T) {
	fl := stagedFluid(t, "water")
	spec := Spec{Kind: Turbine, Fluid: fl, Inlet: ByPT, Outlet: ByPT,
		Uncertainty: Uncertainty{P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1: Std{Rel: 0.002}, T2: Std{Rel: 0.002}, MassFlow: Std{Rel: 0.01}, CorrT: 0.4}}
	in := Inputs{P1: 16e6, T1: 811.15, P2: 4e6, T2: 611.15, MassFlow: 250}
	var cache Sensitivities
	if _, err := EvaluateWith(&spec, &in, &cache); err != nil {
		t.Fatal(err)
	}
	in2 := in
	in2.T1 += 0.5 * 0.002 * in.T1 // half a standard uncertainty
	in2.MassFlow *= 1.003
	got, err := EvaluateWith(&spec, &in2, &cache)
	if err != nil {
		t.Fatal(err)
	}
	if got.SensitivityAge != 1 {
		t.Fatalf("sensitivity age %d, want 1 (reused)", got.SensitivityAge)
	}
	u := map[string]float64{"p1": 0.001 * in2.P1, "p2": 0.001 * in2.P2, "T1": 0.002 * in2.T1, "T2": 0.002 * in2.T2, "flow": 0.01 * in2.MassFlow}
	for _, id := range []FigureID{IsentropicEfficiency, LostWorkRate, Power} {
		var v float64
		c := map[string]float64{}
		for name, ui := range u {
			ci, ok := got.Sensitivity(id, name)
			if !ok && name != "flow" {
				t.Fatalf("%v: no sensitivity to %s", id, name)
			}
			c[name] = ci
			v += ci * ci * ui * ui
		}
		v += 2 * c["T1"] * c["T2"] * 0.4 * u["T1"] * u["T2"]
		want := uncert.K95 * math.Sqrt(v)
		if f := got.Figures[id]; !relNear(f.U95, want, 1e-12) {
			t.Errorf("%v: U95 %v, want %v (GUM eq. 16 with current u)", id, f.U95, want)
		}
		for i := range nIn {
			ci := got.prop.sens[id][i]
			ui := 0.0
			if name := inputNames[i]; u[name] > 0 {
				ui = u[name]
			}
			if w := (ci * ui) * (ci * ui); !relNear(got.prop.vars[id][i], w, 1e-12) && !(w == 0 && got.prop.vars[id][i] == 0) {
				t.Errorf("%v: variance contribution of %s %v, want %v", id, inputNames[i], got.prop.vars[id][i], w)
			}
		}
	}
}

// idealGasAbove is the constant-cp ideal gas of fluids_test.go whose
// specific volume departs from R T/p by 1e-6 above pNonIdeal, so the
// polytropic method switches from the exact ideal-gas relation to
// Schultz there with nothing else discrete changing (every state stays
// PhaseGas).
type idealGasAbove struct {
	idealGas
	pNonIdeal float64
}

func (g idealGasAbove) Flash(pair thermo.Pair, a, b float64) (thermo.State, error) {
	s, err := g.idealGas.Flash(pair, a, b)
	if err == nil && s.P > g.pNonIdeal {
		s.V *= 1 + 1e-6
		s.Rho = 1 / s.V
	}
	return s, err
}

// Each reason for fresh sensitivities forces the full central differences
// (counted in flashes: 3 nominal ones when reused, more when fresh), and
// each reuse is reported by its age. Moves are in multiples of the input's
// standard uncertainty; ReuseFraction 1e6 isolates a discrete change from
// the distance criterion.
func TestSensitivityReuseForcedFresh(t *testing.T) {
	water := stagedFluid(t, "water")
	tcK1 := mustClass(t, "tc-K-1")
	steamU := Uncertainty{P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1Class: tcK1, T2Class: tcK1, MassFlow: Std{Rel: 0.01}}
	steam := Spec{Kind: Turbine, Fluid: water, Inlet: ByPT, Outlet: ByPT, Uncertainty: steamU}
	steamIn := Inputs{P1: 16e6, T1: 811.15, P2: 4e6, T2: 611.15, MassFlow: 250}
	uT1, err := tcK1.StdUncertainty(811.15)
	if err != nil {
		t.Fatal(err)
	}
	wet := Spec{Kind: Turbine, Fluid: water, Inlet: ByPT, Outlet: ByEnergyBalance, Power: ShaftPower,
		Uncertainty: Uncertainty{P1: Std{Rel: 0.002}, P2: Std{Rel: 0.005}, T1: Std{Abs: 0.5}, MassFlow: Std{Rel: 0.01}, Power: Std{Rel: 0.003}}}
	wetIn := Inputs{P1: 0.5e6, T1: 573.15, P2: 7e3, MassFlow: 200, ShaftPower: 128e6}
	gas := Spec{Kind: Compressor, Fluid: idealGasAbove{idealGas: airConst, pNonIdeal: 850e3}, Inlet: ByPT, Outlet: ByPT,
		Uncertainty: Uncertainty{P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1: Std{Abs: 0.3}, T2: Std{Abs: 0.3}, MassFlow: Std{Rel: 0.01}}}
	gasIn := Inputs{P1: 100e3, T1: 288.15, P2: 800e3, T2: 560, MassFlow: 2}
	other := steam
	other.T0 = 288.15

	type step struct {
		in        func(Inputs) Inputs
		spec      *Spec // nil: the case's spec
		wantAge   int   // 0: fresh
		wantPoly  PolyMethod
		wantPhase [nPorts]thermo.Phase // zero: not checked
	}
	same := func(in Inputs) Inputs { return in }
	tests := []struct {
		name  string
		spec  *Spec
		in    Inputs
		cache Sensitivities
		steps []step
	}{
		{"move within and beyond alpha*u(T1)", &steam, steamIn, Sensitivities{}, []step{
			{in: same, wantAge: 0},
			{in: func(in Inputs) Inputs { in.T1 += 0.9 * uT1; return in }, wantAge: 1},
			{in: func(in Inputs) Inputs { in.T1 -= 0.9 * uT1; return in }, wantAge: 2},
			{in: func(in Inputs) Inputs { in.T1 += 1.1 * uT1; return in }, wantAge: 0},
			{in: func(in Inputs) Inputs { in.T1 += 0.5 * uT1; return in }, wantAge: 1}, // from the new anchor
		}},
		{"move of a pressure beyond alpha*u(p2)", &steam, steamIn, Sensitivities{ReuseFraction: 0.5}, []step{
			{in: same, wantAge: 0},
			{in: func(in Inputs) Inputs { in.P2 *= 1 + 0.4*0.001; return in }, wantAge: 1},
			{in: func(in Inputs) Inputs { in.P2 *= 1 + 0.6*0.001; return in }, wantAge: 0},
		}},
		{"inlet phase change (vapour to supercritical)", &steam, steamIn, Sensitivities{ReuseFraction: 1e6}, []step{
			{in: same, wantAge: 0, wantPhase: [nPorts]thermo.Phase{thermo.PhaseVapour, thermo.PhaseVapour, thermo.PhaseVapour}},
			{in: func(in Inputs) Inputs { in.P1 = 20e6; return in }, wantAge: 1},
			{in: func(in Inputs) Inputs { in.P1 = 25e6; return in }, wantAge: 0,
				wantPhase: [nPorts]thermo.Phase{thermo.PhaseSupercritical, thermo.PhaseVapour, thermo.PhaseVapour}},
		}},
		{"outlet phase change (wet exhaust to superheated)", &wet, wetIn, Sensitivities{ReuseFraction: 1e6}, []step{
			{in: same, wantAge: 0, wantPhase: [nPorts]thermo.Phase{thermo.PhaseVapour, thermo.PhaseTwoPhase, thermo.PhaseTwoPhase}},
			{in: func(in Inputs) Inputs { in.ShaftPower = 60e6; return in }, wantAge: 0,
				wantPhase: [nPorts]thermo.Phase{thermo.PhaseVapour, thermo.PhaseVapour, thermo.PhaseTwoPhase}},
		}},
		{"polytropic method change (exact ideal gas to Schultz)", &gas, gasIn, Sensitivities{ReuseFraction: 1e6}, []step{
			{in: same, wantAge: 0, wantPoly: PolyIdealGas},
			{in: func(in Inputs) Inputs { in.P2 = 820e3; return in }, wantAge: 1, wantPoly: PolyIdealGas},
			{in: func(in Inputs) Inputs { in.P2 = 900e3; in.T2 = 575; return in }, wantAge: 0, wantPoly: PolySchultz},
			{in: func(in Inputs) Inputs { in.P2 = 901e3; in.T2 = 575; return in }, wantAge: 1, wantPoly: PolySchultz},
		}},
		{"the nearest qualifying anchor serves", &steam, steamIn, Sensitivities{}, []step{
			{in: same, wantAge: 0}, // anchor A, evaluation 1
			{in: same, wantAge: 1},
			{in: func(in Inputs) Inputs { in.T1 += 1.5 * uT1; return in }, wantAge: 0}, // anchor B, evaluation 3
			{in: func(in Inputs) Inputs { in.T1 -= 0.9 * uT1; return in }, wantAge: 3}, // 0.6 u from A, 0.9 u from B: A
			{in: func(in Inputs) Inputs { in.T1 += 0.6 * uT1; return in }, wantAge: 2}, // 1.2 u from A, 0.3 u from B: B
			{in: func(in Inputs) Inputs { in.T1 += 1.5 * uT1; return in }, wantAge: 0}, // 1.8 u from B: anchor C
			{in: func(in Inputs) Inputs { in.T1 -= 2.7 * uT1; return in }, wantAge: 6}, // 0.0 u from A
		}},
		{"one anchor kept", &steam, steamIn, Sensitivities{Anchors: 1}, []step{
			{in: same, wantAge: 0},
			{in: same, wantAge: 1},
			{in: func(in Inputs) Inputs { in.T1 += 1.5 * uT1; return in }, wantAge: 0}, // B replaces A
			{in: func(in Inputs) Inputs { in.T1 -= 0.9 * uT1; return in }, wantAge: 1}, // only B left
			{in: func(in Inputs) Inputs { in.T1 -= 0.6 * uT1; return in }, wantAge: 0}, // 1.5 u from B
		}},
		{"age limit", &steam, steamIn, Sensitivities{MaxAge: 3}, []step{
			{in: same}, {in: same, wantAge: 1}, {in: same, wantAge: 2}, {in: same, wantAge: 3}, {in: same, wantAge: 0}, {in: same, wantAge: 1},
		}},
		{"another spec", &steam, steamIn, Sensitivities{}, []step{
			{in: same}, {in: same, wantAge: 1}, {in: same, spec: &other, wantAge: 0}, {in: same, spec: &other, wantAge: 1}, {in: same, wantAge: 0},
		}},
		{"defined figures change (mass flow lost)", &steam, steamIn, Sensitivities{ReuseFraction: 1e6}, []step{
			{in: same}, {in: func(in Inputs) Inputs { in.MassFlow = 0; return in }, wantAge: 0},
		}},
		{"reuse turned off", &steam, steamIn, Sensitivities{ReuseFraction: -1}, []step{
			{in: same}, {in: same, wantAge: 0},
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			cache := tc.cache
			in := tc.in
			wantFresh := 0
			for k, st := range tc.steps {
				in = st.in(in)
				spec := tc.spec
				if st.spec != nil {
					spec = st.spec
				}
				res, nf, err := evaluateWith(spec, &in, &cache)
				if err != nil {
					t.Fatalf("step %d: %v", k, err)
				}
				_, nFresh, err := evaluate(spec, &in, false)
				if err != nil {
					t.Fatal(err)
				}
				if res.SensitivityAge != st.wantAge {
					t.Errorf("step %d: sensitivity age %d, want %d", k, res.SensitivityAge, st.wantAge)
				}
				want := nFresh
				if st.wantAge > 0 {
					want = 3 // the nominal inlet, outlet and isentropic outlet
				} else {
					wantFresh++
				}
				if nf != want || nFresh <= 3 {
					t.Errorf("step %d: %d flashes, want %d (fresh evaluation: %d)", k, nf, want, nFresh)
				}
				if st.wantPoly != 0 && res.PolytropicMethod != st.wantPoly {
					t.Errorf("step %d: polytropic method %v, want %v", k, res.PolytropicMethod, st.wantPoly)
				}
				if st.wantPhase[0] != 0 {
					if got := [nPorts]thermo.Phase{res.Inlet.Phase, res.Outlet.Phase, res.IsentropicOutlet.Phase}; got != st.wantPhase {
						t.Errorf("step %d: phases %v, want %v", k, got, st.wantPhase)
					}
				}
			}
			if fresh, reused := cache.Counts(); fresh != wantFresh || fresh+reused != len(tc.steps) {
				t.Errorf("counts fresh %d reused %d, want %d fresh of %d", fresh, reused, wantFresh, len(tc.steps))
			}
		})
	}
}

// The cache never turns an error into a result, forgets its anchor on an
// error, never keeps an anchor whose central differences were one-sided
// or near saturation, and never gives a NaN U95 where Evaluate gives a
// number. Reference: Evaluate on the same inputs.
func TestSensitivityReuseErrorsAndNaN(t *testing.T) {
	water := stagedFluid(t, "water")
	steam := Spec{Kind: Turbine, Fluid: water, Inlet: ByPT, Outlet: ByPT,
		Uncertainty: Uncertainty{P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1: Std{Abs: 0.5}, T2: Std{Abs: 0.5}, MassFlow: Std{Rel: 0.01}}}
	good := Inputs{P1: 16e6, T1: 811.15, P2: 4e6, T2: 611.15, MassFlow: 250}

	t.Run("errors pass through and reset the anchor", func(t *testing.T) {
		bad := []Inputs{
			{P1: 16e6, T1: 811.15, P2: 4e6, T2: 611.15, MassFlow: -1},      // invalid input
			{P1: 16e6, T1: 811.15, P2: 4e6, T2: math.NaN(), MassFlow: 250}, // not finite
			{P1: 16e6, T1: 811.15, P2: 4e6, T2: 523.7, MassFlow: 250},      // (p,T) within U95 of Tsat(4 MPa) = 523.5 K (IAPWS-IF97 region 4, from memory)
			{P1: 16e6, T1: 811.15, P2: 4e6, T2: 2500, MassFlow: 250},       // beyond the model's range
			{P1: 16e6, T1: 811.15, P2: 20e6, T2: 611.15, MassFlow: 250},    // turbine outlet above inlet
		}
		for i, b := range bad {
			var cache Sensitivities
			if _, err := EvaluateWith(&steam, &good, &cache); err != nil {
				t.Fatal(err)
			}
			_, errF := Evaluate(&steam, &b)
			res, nf, errR := evaluateWith(&steam, &b, &cache)
			if errF == nil || errR == nil || res != nil || errF.Error() != errR.Error() {
				t.Errorf("case %d: fresh error %v, with cache %v (result %v)", i, errF, errR, res)
			}
			if ReasonCode(errF) != ReasonCode(errR) || errors.Is(errF, ErrInput) != errors.Is(errR, ErrInput) {
				t.Errorf("case %d: error kinds differ: %v vs %v", i, errF, errR)
			}
			if nf > 3 {
				t.Errorf("case %d: %d flashes for a failed evaluation", i, nf)
			}
			res, nf, err := evaluateWith(&steam, &good, &cache)
			if err != nil {
				t.Fatal(err)
			}
			if res.SensitivityAge != 0 || nf <= 3 {
				t.Errorf("case %d: after an error the anchor was kept (age %d, %d flashes)", i, res.SensitivityAge, nf)
			}
		}
	})

	t.Run("one-sided central differences make no anchor", func(t *testing.T) {
		// Liquid water 0.04 K above the IF97 lower temperature limit
		// 273.15 K (IAPWS R7-97(2012) §1): T1 - h with h = u/10 = 0.05 K is
		// out of range, so d/dT1 is one-sided.
		pump := Spec{Kind: Pump, Fluid: water, Inlet: ByPT, Outlet: ByPT,
			Uncertainty: Uncertainty{P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1: Std{Abs: 0.5}, T2: Std{Abs: 0.5}, MassFlow: Std{Rel: 0.01}}}
		in := Inputs{P1: 0.2e6, T1: 273.19, P2: 2e6, T2: 273.6, MassFlow: 10}
		want := mustEval(t, &pump, &in)
		if !want.Figures[IsentropicEfficiency].HasU95 {
			t.Fatalf("the fresh evaluation has no U95: %+v", want.Figures[IsentropicEfficiency])
		}
		var cache Sensitivities
		for k := range 3 {
			res, nf, err := evaluateWith(&pump, &in, &cache)
			if err != nil {
				t.Fatal(err)
			}
			if res.SensitivityAge != 0 || nf <= 3 {
				t.Errorf("evaluation %d: reused sensitivities of a one-sided anchor (age %d, %d flashes)", k, res.SensitivityAge, nf)
			}
			for id := range NumFigures {
				if w, g := want.Figures[id], res.Figures[id]; w.HasU95 != g.HasU95 || !sameBits(w.U95, g.U95) {
					t.Errorf("%v: U95 %v %v, want %v %v", id, g.U95, g.HasU95, w.U95, w.HasU95)
				}
			}
		}
	})

	t.Run("near saturation is always fresh", func(t *testing.T) {
		// Outlet 3 K above Tsat(4 MPa) = 523.5 K (from memory): inside the
		// default 5 K margin, outside the 0.1 K refusal band.
		in := good
		in.T2 = 526.5
		var cache Sensitivities
		for k := range 3 {
			res, nf, err := evaluateWith(&steam, &in, &cache)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Contains(res.Reasons, ReasonNearSaturationOutlet) {
				t.Fatalf("reasons %v: not near saturation", res.Reasons)
			}
			if res.SensitivityAge != 0 || nf <= 3 {
				t.Errorf("evaluation %d: reused near saturation (age %d, %d flashes)", k, res.SensitivityAge, nf)
			}
		}
	})

	t.Run("a figure that becomes computable is not left without U95", func(t *testing.T) {
		// Without mass flow the rates are not defined; when it returns,
		// they need sensitivities the anchor does not have.
		noFlow := good
		noFlow.MassFlow = 0
		var cache Sensitivities
		cache.ReuseFraction = 1e6
		if _, err := EvaluateWith(&steam, &noFlow, &cache); err != nil {
			t.Fatal(err)
		}
		res, err := EvaluateWith(&steam, &good, &cache)
		if err != nil {
			t.Fatal(err)
		}
		want := mustEval(t, &steam, &good)
		for id := range NumFigures {
			w, g := want.Figures[id], res.Figures[id]
			if w.HasU95 != g.HasU95 || !sameBits(w.U95, g.U95) || (w.HasU95 && math.IsNaN(g.U95)) {
				t.Errorf("%v: U95 %v %v, want %v %v", id, g.U95, g.HasU95, w.U95, w.HasU95)
			}
		}
	})

	t.Run("nil cache is Evaluate", func(t *testing.T) {
		got, err := EvaluateWith(&steam, &good, nil)
		if err != nil {
			t.Fatal(err)
		}
		want := mustEval(t, &steam, &good)
		if fmt.Sprint(got.Figures) != fmt.Sprint(want.Figures) {
			t.Errorf("got %v, want %v", got.Figures, want.Figures)
		}
	})
}
