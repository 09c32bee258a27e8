package machine

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/compute/uncert"
)

// The pump efficiency eta = v Δp/(c ΔT + v Δp) of an incompressible liquid
// has the closed-form sensitivities d eta/dT2 = -eta² c/(v Δp) = -d eta/dT1
// (differentiate the closed form). With independent temperature errors
// u(eta) = |d eta/dT2| sqrt(u1² + u2²); with matched sensors (correlation
// r) u(eta) = |d eta/dT2| sqrt(u1² + u2² - 2 r u1 u2) (GUM eq. 16).
// Tolerance 1e-5: the central difference with h = u/10 has a truncation
// error (h c/w)² ≈ 3e-6 relative for this 1/x-shaped function.
func TestPumpTemperatureUncertaintyClosedForm(t *testing.T) {
	l := liquid{c: 4433, v: 0.0011369} // feed water near 460 K (cp, v from testdata/reference/iapws_if97_crosscheck.csv anchor_feedpump, rounded)
	const p1, T1, p2 = 1.2e6, 460.0, 20e6
	ws := l.v * (p2 - p1)
	T2 := T1 + ws*(1/0.8-1)/l.c // eta = 0.8
	for _, r := range []float64{0, 0.5, 0.9} {
		spec := &Spec{Kind: Pump, Fluid: l, Inlet: ByPT, Outlet: ByPT,
			Uncertainty: Uncertainty{T1: Std{Abs: 0.1}, T2: Std{Abs: 0.1}, CorrT: r}}
		res := mustEval(t, spec, &Inputs{P1: p1, T1: T1, P2: p2, T2: T2})
		eta := val(res, IsentropicEfficiency)
		if !relNear(eta, 0.8, 1e-9) {
			t.Fatalf("eta = %v, want 0.8", eta)
		}
		c2 := -eta * eta * l.c / ws
		if got, ok := res.Sensitivity(IsentropicEfficiency, "T2"); !ok || !relNear(got, c2, 1e-5) {
			t.Errorf("d eta/dT2 = %v, want %v", got, c2)
		}
		if got, _ := res.Sensitivity(IsentropicEfficiency, "T1"); !relNear(got, -c2, 1e-5) {
			t.Errorf("d eta/dT1 = %v, want %v", got, -c2)
		}
		want := 2 * math.Abs(c2) * math.Sqrt(0.01+0.01-2*r*0.01)
		if got := res.Figures[IsentropicEfficiency].U95; !relNear(got, want, 1e-5) {
			t.Errorf("r = %v: U95 = %v, want %v", r, got, want)
		}
	}
}

// An efficiency whose U95 exceeds the limit is reported unusable (bad,
// uncertainty_above_limit) with the dominant input named in a note.
func TestU95LimitMarksMethodUnusable(t *testing.T) {
	l := liquid{c: 4433, v: 0.0011369}
	const p1, T1, p2 = 1.2e6, 460.0, 20e6
	T2 := T1 + l.v*(p2-p1)*(1/0.8-1)/l.c
	cl, _ := uncert.ParseTempClass("rtd-B")
	spec := &Spec{Kind: Pump, Fluid: l, Inlet: ByPT, Outlet: ByPT, Uncertainty: Uncertainty{T1Class: cl, T2Class: cl, P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}}}
	res := mustEval(t, spec, &Inputs{P1: p1, T1: T1, P2: p2, T2: T2, MassFlow: 100})
	f := res.Figures[IsentropicEfficiency]
	if f.Quality != compute.QualityBad || !slices.Contains(f.Reasons, ReasonUncertaintyAboveLimit) {
		t.Errorf("eta %v ± %v: quality %v %v, want bad uncertainty_above_limit", f.Value, f.U95, f.Quality, f.Reasons)
	}
	if res.Figures[Power].Quality == compute.QualityBad {
		t.Errorf("power should stay usable: %+v", res.Figures[Power])
	}
	found := false
	for _, n := range res.Notes {
		if contains(n, "unusable") && contains(n, "temperature") {
			found = true
		}
	}
	if !found {
		t.Errorf("no note naming the dominant input: %v", res.Notes)
	}
	// The record never carries the unusable value as a number.
	rec := res.Record(timeZero(), "s", "p1")
	for _, cf := range rec.Figures {
		if cf.Name == "isentropic_efficiency" && !math.IsNaN(cf.Value) {
			t.Errorf("unusable efficiency reached the record as %v", cf.Value)
		}
	}
}

// The first-order propagation against a Monte Carlo propagation of the same
// input distributions (JCGM 101:2008, GUM Supplement 1): for the steam
// turbine of the calc example with normal input errors the two standard
// uncertainties of eta_s and Ṡgen agree within 5 % (the Monte Carlo
// standard error with 4000 draws is about 1.1 %; the model is close to
// linear over ±3u).
func TestPropagationAgainstMonteCarlo(t *testing.T) {
	spec := &Spec{Kind: Turbine, Fluid: water, Inlet: ByPT, Outlet: ByPT,
		Uncertainty: Uncertainty{T1: Std{Abs: 1}, T2: Std{Abs: 1}, P1: Std{Rel: 0.002}, P2: Std{Rel: 0.002}, MassFlow: Std{Rel: 0.01}, CorrT: 0.3}}
	in := Inputs{P1: 16e6, T1: 811.15, P2: 4e6, T2: 611.15, MassFlow: 250}
	r := mustEval(t, spec, &in)
	rng := rand.New(rand.NewPCG(1, 2))
	plain := &Spec{Kind: Turbine, Fluid: water, Inlet: ByPT, Outlet: ByPT}
	const n = 4000
	var se, ss, se2, ss2 float64
	for range n {
		z1, z2 := rng.NormFloat64(), rng.NormFloat64()
		e1 := z1
		e2 := 0.3*z1 + math.Sqrt(1-0.09)*z2 // correlation 0.3 between the temperature errors
		d := in
		d.T1 += e1
		d.T2 += e2
		d.P1 *= 1 + 0.002*rng.NormFloat64()
		d.P2 *= 1 + 0.002*rng.NormFloat64()
		d.MassFlow *= 1 + 0.01*rng.NormFloat64()
		x := mustEval(t, plain, &d)
		e, s := val(x, IsentropicEfficiency), val(x, EntropyGenerationRate)
		se, se2, ss, ss2 = se+e, se2+e*e, ss+s, ss2+s*s
	}
	sd := func(s, s2 float64) float64 { return math.Sqrt((s2 - s*s/n) / (n - 1)) }
	for _, c := range []struct {
		id FigureID
		mc float64
	}{{IsentropicEfficiency, sd(se, se2)}, {EntropyGenerationRate, sd(ss, ss2)}} {
		u := r.Figures[c.id].U95 / uncert.K95
		t.Logf("%v: first-order u %.5g, Monte Carlo %.5g", c.id, u, c.mc)
		if !relNear(u, c.mc, 0.05) {
			t.Errorf("%v: first-order u = %.5g, Monte Carlo %.5g", c.id, u, c.mc)
		}
	}
}
