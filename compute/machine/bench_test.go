package machine

import (
	"testing"

	"github.com/exergywatch/exergywatch/thermo/fluids"
	"github.com/exergywatch/exergywatch/thermo/idealgas"
	"github.com/exergywatch/exergywatch/thermo/if97"
)

func benchEval(b *testing.B, spec *Spec, in *Inputs) {
	b.Helper()
	if _, err := Evaluate(spec, in); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, err := Evaluate(spec, in); err != nil {
			b.Fatal(err)
		}
	}
}

var airCompressorIn = Inputs{P1: 100e3, T1: 285.15, P2: 800e3, T2: 569.55, MassFlow: 0.2}

// BenchmarkAirCompressor: states, isentropic end state and all figures.
func BenchmarkAirCompressor(b *testing.B) {
	benchEval(b, &Spec{Kind: Compressor, Fluid: idealgas.DryAir(), Inlet: ByPT, Outlet: ByPT}, &airCompressorIn)
}

// BenchmarkAirCompressorUncertainty adds the propagation (5 uncertain inputs,
// 10 extra evaluations).
func BenchmarkAirCompressorUncertainty(b *testing.B) {
	benchEval(b, &Spec{Kind: Compressor, Fluid: idealgas.DryAir(), Inlet: ByPT, Outlet: ByPT,
		Uncertainty: Uncertainty{T1: Std{Abs: 0.5}, T2: Std{Abs: 0.5}, P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, MassFlow: Std{Rel: 0.01}}},
		&airCompressorIn)
}

// The steam turbine of `exergywatch calc`'s example: 16 MPa, 538 °C ->
// 4 MPa, 338 °C, 250 kg/s.
var steamTurbineIn = Inputs{P1: 16e6, T1: 811.15, P2: 4e6, T2: 611.15, MassFlow: 250}

func BenchmarkSteamTurbine(b *testing.B) {
	benchEval(b, &Spec{Kind: Turbine, Fluid: if97.Water{}, Inlet: ByPT, Outlet: ByPT}, &steamTurbineIn)
}

func BenchmarkSteamTurbineUncertainty(b *testing.B) {
	benchEval(b, &Spec{Kind: Turbine, Fluid: if97.Water{}, Inlet: ByPT, Outlet: ByPT,
		Uncertainty: Uncertainty{T1: Std{Abs: 0.5}, T2: Std{Abs: 0.5}, P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, MassFlow: Std{Rel: 0.01}}},
		&steamTurbineIn)
}

// BenchmarkSteamTurbineWetEnergyBalance: wet exhaust fixed by shaft power.
func BenchmarkSteamTurbineWetEnergyBalanceUncertainty(b *testing.B) {
	benchEval(b, &Spec{Kind: Turbine, Fluid: if97.Water{}, Inlet: ByPT, Outlet: ByEnergyBalance, Power: ShaftPower,
		Uncertainty: Uncertainty{T1: Std{Abs: 0.5}, P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, MassFlow: Std{Rel: 0.01}, Power: Std{Rel: 0.005}}},
		&Inputs{P1: 0.8e6, T1: 600, P2: 5e3, MassFlow: 40, ShaftPower: 30.9e6})
}

// BenchmarkSensitivityReuse: one evaluation with uncertainty per op, fresh
// (Evaluate: sensitivities by central differences every time) and with a
// per-machine Sensitivities cache (EvaluateWith), cycling through 240
// noisy, slowly drifting samples of each demo machine (trajCases: the demo
// plant's noise, its configured instrument classes). reused/op is the
// share of evaluations that reused sensitivities, flashes/op the property
// flashes per evaluation (a cost measure the load of a shared machine does
// not disturb).
//
//	go test -run XXX -bench SensitivityReuse -count 5 ./compute/machine/
func BenchmarkSensitivityReuse(b *testing.B) {
	for _, c := range trajCases(b) {
		spec := c.spec
		fl, err := fluids.New(c.fluid, stagedComposition(c.fluid))
		if err != nil {
			b.Fatal(err)
		}
		spec.Fluid = fl
		traj := c.trajectory(b, fl, 240, 1)
		for _, mode := range []string{"fresh", "reuse"} {
			b.Run(c.name+"/"+mode, func(b *testing.B) {
				var cache *Sensitivities
				if mode == "reuse" {
					cache = &Sensitivities{}
				}
				b.ReportAllocs()
				i, flashes, n := 0, 0, 0
				for b.Loop() {
					_, nf, err := evaluateWith(&spec, &traj[i], cache)
					if err != nil {
						b.Fatal(err)
					}
					flashes += nf
					n++
					if i++; i == len(traj) {
						i = 0
					}
				}
				b.ReportMetric(float64(flashes)/float64(n), "flashes/op")
				if cache != nil {
					f, r := cache.Counts()
					b.ReportMetric(float64(r)/float64(f+r), "reused/op")
				}
			})
		}
	}
}

// BenchmarkSensitivityReuseOverhead: the cost of the cache itself, on the
// cheapest fluid (ideal-gas air) at constant inputs. "nouncertainty" is
// Evaluate without uncertainty (3 flashes); "reuse" is EvaluateWith with 16
// anchors kept and every evaluation served (3 flashes, anchor search,
// GUM eq. 16 with the current u); "fresh" runs the central differences.
func BenchmarkSensitivityReuseOverhead(b *testing.B) {
	u := Uncertainty{T1: Std{Abs: 0.5}, T2: Std{Abs: 0.5}, P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, MassFlow: Std{Rel: 0.01}}
	spec := Spec{Kind: Compressor, Fluid: idealgas.DryAir(), Inlet: ByPT, Outlet: ByPT, Uncertainty: u}
	b.Run("nouncertainty", func(b *testing.B) {
		s := spec
		s.Uncertainty = Uncertainty{}
		benchEval(b, &s, &airCompressorIn)
	})
	b.Run("fresh", func(b *testing.B) { benchEval(b, &spec, &airCompressorIn) })
	b.Run("reuse", func(b *testing.B) {
		var cache Sensitivities
		// 16 anchors 1.5 u(T1) apart, the one at the evaluated inputs made
		// last (the search still looks at all of them).
		fill := func() {
			cache.Reset()
			for k := range 16 {
				in := airCompressorIn
				in.T1 += float64(15-k) * 1.5 * 0.5
				if _, err := EvaluateWith(&spec, &in, &cache); err != nil {
					b.Fatal(err)
				}
			}
		}
		fill()
		b.ReportAllocs()
		for b.Loop() {
			res, err := EvaluateWith(&spec, &airCompressorIn, &cache)
			if err != nil {
				b.Fatal(err)
			}
			if res.SensitivityAge == 0 {
				b.Fatal("sensitivities not reused")
			}
			if res.SensitivityAge >= DefaultMaxAge {
				b.StopTimer()
				fill()
				b.StartTimer()
			}
		}
	})
}
