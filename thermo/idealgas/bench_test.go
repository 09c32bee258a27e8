package idealgas

import (
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

// Speed targets (issue 3): an ideal-gas mixture call under 200 ns, no
// allocations after set-up.

var sink thermo.State
var sinkF float64

func benchFluids(b *testing.B) map[string]*Mixture {
	ng, err := NewMixture(naturalGas, MoleFraction)
	if err != nil {
		b.Fatal(err)
	}
	return map[string]*Mixture{"air": DryAir(), "natgas": ng}
}

func BenchmarkH(b *testing.B) {
	for name, m := range benchFluids(b) {
		b.Run(name, func(b *testing.B) {
			b.ReportAllocs()
			T := 300.0
			for i := 0; i < b.N; i++ {
				h, err := m.H(T + float64(i&255))
				if err != nil {
					b.Fatal(err)
				}
				sinkF = h
			}
		})
	}
}

func BenchmarkFlashPT(b *testing.B) {
	for name, m := range benchFluids(b) {
		b.Run(name, func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				st, err := m.Flash(thermo.PT, 1.5e6, 300+float64(i&255))
				if err != nil {
					b.Fatal(err)
				}
				sink = st
			}
		})
	}
}

func BenchmarkFlashPS(b *testing.B) {
	for name, m := range benchFluids(b) {
		b.Run(name, func(b *testing.B) {
			var s [256]float64
			for k := range s {
				st, err := m.Flash(thermo.PT, 1e5, 300+float64(k))
				if err != nil {
					b.Fatal(err)
				}
				s[k] = st.S
			}
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				st, err := m.Flash(thermo.PS, 1.5e6, s[i&255])
				if err != nil {
					b.Fatal(err)
				}
				sink = st
			}
		})
	}
}

func BenchmarkFlashPH(b *testing.B) {
	for name, m := range benchFluids(b) {
		b.Run(name, func(b *testing.B) {
			var h [256]float64
			for k := range h {
				h[k], _ = m.H(300 + float64(k))
			}
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				st, err := m.Flash(thermo.PH, 1.5e6, h[i&255])
				if err != nil {
					b.Fatal(err)
				}
				sink = st
			}
		})
	}
}

func BenchmarkIsentropicT(b *testing.B) {
	for name, m := range benchFluids(b) {
		b.Run(name, func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				T, err := m.IsentropicT(1e5, 288+float64(i&63), 1.7e6)
				if err != nil {
					b.Fatal(err)
				}
				sinkF = T
			}
		})
	}
}
