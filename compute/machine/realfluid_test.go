package machine

import (
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/exergywatch/exergywatch/compute"

	"github.com/exergywatch/exergywatch/thermo/helmholtz"
	"github.com/exergywatch/exergywatch/thermo/idealgas"
)

// Schultz (ASME PTC 10-1997 §5) against the numerically integrated
// constant-efficiency path on real-fluid equations of state. Schultz (1962)
// and later comparisons (e.g. Sandberg & Colby, Proc. 42nd Turbomachinery
// Symposium, 2013; from memory) put the method within a few tenths of a
// point of the integrated path away from the critical region; the limit
// here is 0.2 points.
func TestSchultzVersusIntegratedPath(t *testing.T) {
	cases := []struct {
		fluid          string
		kind           Kind
		p1, T1, p2, T2 float64
	}{
		{"co2", Compressor, 1e6, 300, 3e6, 400},
		{"co2", Compressor, 3e6, 310, 8e6, 400},
		{"methane", Compressor, 2e6, 300, 6e6, 395},
		{"nitrogen", Compressor, 1e5, 300, 1e6, 620},
		{"ammonia", Compressor, 3e5, 270, 1.5e6, 410},
		{"r134a", Compressor, 3e5, 280, 1.2e6, 340},
		{"co2", Turbine, 20e6, 800, 8e6, 700},
	}
	for _, c := range cases {
		fl, err := helmholtz.New(c.fluid)
		if err != nil {
			t.Fatal(err)
		}
		r := mustEval(t, &Spec{Kind: c.kind, Fluid: fl, Inlet: ByPT, Outlet: ByPT, ReferencePath: true},
			&Inputs{P1: c.p1, T1: c.T1, P2: c.p2, T2: c.T2})
		if r.PolytropicMethod != PolySchultz {
			t.Errorf("%s: method %v, want schultz", c.fluid, r.PolytropicMethod)
		}
		sch, integ := val(r, PolytropicEfficiency), val(r, PolytropicEfficiencyIntegrated)
		if d := math.Abs(sch - integ); d > 0.002 || math.IsNaN(d) {
			t.Errorf("%s %v %g->%g Pa: Schultz eta_p %.5f, integrated %.5f (differ %.5f)", c.fluid, c.kind, c.p1, c.p2, sch, integ, d)
		}
		if !(r.SchultzFactor > 0.98 && r.SchultzFactor < 1.03) {
			t.Errorf("%s: Schultz factor %v far from 1", c.fluid, r.SchultzFactor)
		}
	}
}

// For the ideal-gas dry-air model the exact variable-cp relation and the
// integrated path coincide (to the integration and flash tolerances).
func TestDryAirExactPolytropic(t *testing.T) {
	r := mustEval(t, &Spec{Kind: Compressor, Fluid: idealgas.DryAir(), Inlet: ByPT, Outlet: ByPT, ReferencePath: true},
		&Inputs{P1: 1e5, T1: 300, P2: 8e5, T2: 600})
	if r.PolytropicMethod != PolyIdealGas {
		t.Fatalf("method %v, want ideal_gas_exact", r.PolytropicMethod)
	}
	if a, b := val(r, PolytropicEfficiency), val(r, PolytropicEfficiencyIntegrated); !relNear(a, b, 1e-8) {
		t.Errorf("exact %.10f vs integrated %.10f", a, b)
	}
}

// Near-saturation: a refrigeration compressor's suction a few kelvin above
// saturation is flagged (default margin 5 K, common practice); within the
// measurement band of saturation (p,T) cannot fix the state and Evaluate
// refuses it instead of guessing a phase.
func TestNearSaturationSuction(t *testing.T) {
	fl, err := helmholtz.New("ammonia")
	if err != nil {
		t.Fatal(err)
	}
	const p1, p2 = 3e5, 1.2e6
	ts, err := fl.SatT(p1)
	if err != nil {
		t.Fatal(err)
	}
	spec := &Spec{Kind: Compressor, Fluid: fl, Inlet: ByPT, Outlet: ByPT, Uncertainty: Uncertainty{T1: Std{Abs: 0.3}, T2: Std{Abs: 0.3}}}
	cases := []struct {
		superheat float64 // K
		nearFlag  bool
		notFixed  bool
	}{
		{20, false, false},
		{6, false, false},
		{3, true, false},
		{0.7, true, false},
		{0.5, false, true}, // band = 2*0.3 K (U95 of T; dTsat/dp*u_p = 0 here)
		{0.05, false, true},
		{-0.3, false, true}, // reads just below saturation: liquid by (p,T), really wet or saturated vapour
	}
	for _, c := range cases {
		in := &Inputs{P1: p1, T1: ts + c.superheat, P2: p2, T2: 400}
		r, err := Evaluate(spec, in)
		if c.notFixed {
			if !errors.Is(err, ErrStateNotFixed) || ReasonCode(err) != ReasonStateNotFixed {
				t.Errorf("superheat %v K: err = %v, want ErrStateNotFixed", c.superheat, err)
			}
			continue
		}
		if err != nil {
			t.Errorf("superheat %v K: %v", c.superheat, err)
			continue
		}
		got := slices.Contains(r.Reasons, ReasonNearSaturationInlet)
		if got != c.nearFlag {
			t.Errorf("superheat %v K: near-saturation flag %v, want %v (%v)", c.superheat, got, c.nearFlag, r.Reasons)
		}
		if c.nearFlag && r.Quality == compute.QualityGood {
			t.Errorf("superheat %v K: quality good despite near saturation", c.superheat)
		}
	}
	// A configurable margin: 2 K no longer flags 3 K of superheat.
	spec.SaturationMargin = 2
	r := mustEval(t, spec, &Inputs{P1: p1, T1: ts + 3, P2: p2, T2: 400})
	if slices.Contains(r.Reasons, ReasonNearSaturationInlet) {
		t.Errorf("margin 2 K flagged 3 K of superheat")
	}
}
