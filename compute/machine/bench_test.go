package machine

import (
	"testing"

	"github.com/exergywatch/exergywatch/thermo/idealgas"
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
