package machine

import (
	"math"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/thermo/idealgas"
	"github.com/exergywatch/exergywatch/thermo/if97"
)

// FuzzEvaluate feeds arbitrary inputs to every machine kind and state method
// on water and dry air: Evaluate must never panic, and a result must carry a
// finite value and U95 on every figure that is not Bad, so that its record
// validates.
func FuzzEvaluate(f *testing.F) {
	f.Add(uint8(0), 16e6, 811.15, 0.5, 4e6, 611.15, 250.0, 85e6, 0.0)
	f.Add(uint8(1), 1.2e6, 460.0, 0.0, 20e6, 463.958, 100.0, 2.6e6, 0.0)
	f.Add(uint8(2), 100e3, 285.15, 1.0, 800e3, 569.55, 0.2, 58e3, 1e3)
	f.Add(uint8(3), 0.8e6, 600.0, 0.9, 5e3, 312.15, 40.0, 30e6, 0.0)
	f.Add(uint8(4), 7e3, 312.0, 0.88, 16e6, 1e9, -1.0, math.NaN(), 5.0)
	f.Add(uint8(5), 1e5, 1.0, 2.0, 1e5, 0.0, 0.0, 0.0, math.Inf(1))
	f.Fuzz(func(t *testing.T, sel uint8, p1, a1, b1, p2, a2, m, W, Q float64) {
		spec := &Spec{Kind: Kind(sel%3) + 1, Inlet: StateMethod(sel/3%3) + 1, T0: 298.15,
			Uncertainty: Uncertainty{T1: Std{Abs: 0.3}, T2: Std{Abs: 0.3}, P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, MassFlow: Std{Rel: 0.01}, Power: Std{Rel: 0.01}}}
		if sel/9%2 == 0 {
			spec.Fluid = if97.Water{}
		} else {
			spec.Fluid = idealgas.DryAir()
		}
		switch sel / 18 % 4 {
		case 0:
			spec.Outlet = ByPT
		case 1:
			spec.Outlet = ByPX
		case 2:
			spec.Outlet, spec.Power = ByEnergyBalance, ShaftPower
		case 3:
			spec.Outlet, spec.Power, spec.WorkFromPower = ByPT, ShaftPower, true
		}
		in := &Inputs{P1: p1, T1: a1, H1: a1 * 1e4, X1: b1, P2: p2, T2: a2, X2: b1, MassFlow: m, ShaftPower: W, HeatFlow: Q}
		r, err := Evaluate(spec, in)
		if err != nil {
			if ReasonCode(err) == "" {
				t.Fatalf("error without reason code: %v", err)
			}
			return
		}
		for id, fg := range r.Figures {
			if !fg.Defined || fg.Quality == compute.QualityBad {
				continue
			}
			if math.IsNaN(fg.Value) || math.IsInf(fg.Value, 0) || (fg.HasU95 && !(fg.U95 >= 0 && !math.IsInf(fg.U95, 0))) {
				t.Fatalf("figure %v = %v ± %v with quality %v", FigureID(id), fg.Value, fg.U95, fg.Quality)
			}
		}
		rec := r.Record(time.Unix(1, 0), "s", "m")
		if err := rec.Validate(); err != nil {
			t.Fatal(err)
		}
	})
}
