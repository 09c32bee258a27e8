package gerg2008

import (
	"syscall"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/thermo"
)

// Benchmark gases: typical pipeline-quality natural gases, compositions
// chosen for these benchmarks (common practice, no source).
var (
	gas11 = map[string]float64{"CH4": 0.9, "C2H6": 0.04, "C3H8": 0.015, "nC4": 0.003, "iC4": 0.003,
		"nC5": 0.001, "iC5": 0.001, "C6": 0.001, "N2": 0.02, "CO2": 0.015, "He": 0.001}
	gas10 = map[string]float64{"CH4": 0.901, "C2H6": 0.04, "C3H8": 0.015, "nC4": 0.003, "iC4": 0.003,
		"nC5": 0.001, "iC5": 0.001, "C6": 0.001, "N2": 0.02, "CO2": 0.015}
)

var sinkState thermo.State

// cpuTime returns the user+system CPU time of the process.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// loopFlash times f.Flash(pair, a, b) and reports, besides ns/op, the CPU
// time of the process per call (cpu-ns/op): on a shared, loaded machine it
// is a steadier figure than the wall-clock time.
func loopFlash(b *testing.B, m *Mixture, pair thermo.Pair, a, v float64) {
	b.ReportAllocs()
	var c0 time.Duration
	n := 0
	for b.Loop() {
		if n == 0 {
			c0 = cpuTime()
		}
		n++
		st, err := m.Flash(pair, a, v)
		if err != nil {
			b.Fatal(err)
		}
		sinkState = st
	}
	b.ReportMetric(float64(cpuTime()-c0)/float64(n), "cpu-ns/op")
}

func benchPT(b *testing.B, comp map[string]float64) {
	m, err := New(comp)
	if err != nil {
		b.Fatal(err)
	}
	loopFlash(b, m, thermo.PT, 6e6, 300)
}

func benchPS(b *testing.B, comp map[string]float64) {
	m, err := New(comp)
	if err != nil {
		b.Fatal(err)
	}
	s1, err := m.Flash(thermo.PT, 3e6, 290) // compressor suction
	if err != nil {
		b.Fatal(err)
	}
	loopFlash(b, m, thermo.PS, 7e6, s1.S) // isentropic discharge
}

func benchPH(b *testing.B, comp map[string]float64) {
	m, err := New(comp)
	if err != nil {
		b.Fatal(err)
	}
	s2, err := m.Flash(thermo.PT, 7e6, 380) // compressor discharge
	if err != nil {
		b.Fatal(err)
	}
	loopFlash(b, m, thermo.PH, 7e6, s2.H) // discharge state from an energy balance
}

// BenchmarkPT10 is h(p,T) (a full p,T state) of a 10-component gas at 6 MPa, 300 K.
func BenchmarkPT10(b *testing.B) { benchPT(b, gas10) }

// BenchmarkPT11 is the same for an 11-component gas.
func BenchmarkPT11(b *testing.B) { benchPT(b, gas11) }

// BenchmarkPS10 is the isentropic discharge state T(7 MPa, s(3 MPa, 290 K)), 10 components.
func BenchmarkPS10(b *testing.B) { benchPS(b, gas10) }

// BenchmarkPS11 is the same for the 11-component gas.
func BenchmarkPS11(b *testing.B) { benchPS(b, gas11) }

// BenchmarkPH10 is the (p,h) flash to the state 7 MPa, 380 K, 10 components.
func BenchmarkPH10(b *testing.B) { benchPH(b, gas10) }

// BenchmarkNew is the per-mixture set-up of the 11-component gas.
func BenchmarkNew(b *testing.B) {
	b.ReportAllocs()
	for b.Loop() {
		if _, err := New(gas11); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkStable is the tangent-plane stability test of the 11-component
// gas at 6 MPa, 300 K (stable, the common case).
func BenchmarkStable(b *testing.B) {
	m, err := New(gas11)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if ok, err := m.Stable(6e6, 300); err != nil || !ok {
			b.Fatal(ok, err)
		}
	}
}

// BenchmarkStableNearDew is the same test at 255 K, 3 MPa, inside the
// phase envelope close to the dew line.
func BenchmarkStableNearDew(b *testing.B) {
	m, err := New(gas11)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := m.Stable(3e6, 255); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDetailPT11 is the (p,T) state of the 11-component gas with AGA8-DC92 DETAIL.
func BenchmarkDetailPT11(b *testing.B) {
	m, err := NewDetail(gas11)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		st, err := m.Flash(thermo.PT, 6e6, 300)
		if err != nil {
			b.Fatal(err)
		}
		sinkState = st
	}
}
