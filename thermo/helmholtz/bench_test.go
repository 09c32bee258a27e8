package helmholtz

import (
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

var sink thermo.State

func benchFlash(b *testing.B, name string, pair thermo.Pair, x, y float64) {
	f := mustNew(b, name)
	if _, err := f.Flash(pair, x, y); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		s, err := f.Flash(pair, x, y)
		if err != nil {
			b.Fatal(err)
		}
		sink = s
	}
}

// h(p,T): the (p,T) flash gives h with the rest of the state.
func BenchmarkPTAmmoniaVapour(b *testing.B) { benchFlash(b, "ammonia", thermo.PT, 1.2e6, 370) }
func BenchmarkPTAmmoniaLiquid(b *testing.B) { benchFlash(b, "ammonia", thermo.PT, 1.5e6, 300) }
func BenchmarkPTAir(b *testing.B)           { benchFlash(b, "air-helmholtz", thermo.PT, 1e6, 450) }
func BenchmarkPTWaterLiquid(b *testing.B)   { benchFlash(b, "water-iapws95", thermo.PT, 1e6, 350) }
func BenchmarkPTWaterSteam(b *testing.B)    { benchFlash(b, "water-iapws95", thermo.PT, 1e6, 600) }
func BenchmarkPTCO2(b *testing.B)           { benchFlash(b, "co2", thermo.PT, 10e6, 320) }

// (p,s) flash: isentropic compressor / turbine end states.
func BenchmarkPSAmmoniaVapour(b *testing.B) { benchFlash(b, "ammonia", thermo.PS, 1.2e6, 5200) }
func BenchmarkPSAir(b *testing.B)           { benchFlash(b, "air-helmholtz", thermo.PS, 1e6, 3800) }
func BenchmarkPSWaterSteam(b *testing.B)    { benchFlash(b, "water-iapws95", thermo.PS, 1e6, 7000) }
func BenchmarkPHAmmoniaVapour(b *testing.B) { benchFlash(b, "ammonia", thermo.PH, 1.2e6, 1.6e6) }
