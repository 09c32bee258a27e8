package if97

import (
	"encoding/csv"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// Benchmarks on the input points of testdata/reference/perf_points (1024
// points each; p in MPa, T in K, h in kJ/kg, s in kJ/(kg K)). Targets from
// issue 2: h(p,T) r1 <= 136 ns, s(p,T) r1 <= 238 ns, h(p,T) r2 <= 177 ns,
// s(p,T) r2 <= 316 ns, raw T(p,h) r2 <= 820 ns, Tsat <= 26 ns, refined
// backward <= 1 µs, 0 allocs/op.

type perfPoint struct{ p, T, h, s float64 }

func loadPerf(b testing.TB, name string) []perfPoint {
	b.Helper()
	f, err := os.Open(filepath.Join(refDir, "perf_points", name))
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		b.Fatal(err)
	}
	var out []perfPoint
	for _, r := range recs[1:] {
		var v [4]float64
		for i := range v {
			if r[i] != "" {
				v[i], _ = strconv.ParseFloat(r[i], 64)
			}
		}
		out = append(out, perfPoint{v[0] * 1e6, v[1], v[2] * 1e3, v[3] * 1e3})
	}
	if len(out) == 0 {
		b.Fatalf("%s: no points", name)
	}
	return out
}

var sink float64

func benchPT(b *testing.B, file string, f func(p, T float64) (float64, error)) {
	pts := loadPerf(b, file)
	b.ReportAllocs()
	b.ResetTimer()
	var acc float64
	for i := 0; i < b.N; i++ {
		q := &pts[i%len(pts)]
		v, err := f(q.p, q.T)
		if err != nil {
			b.Fatal(err)
		}
		acc += v
	}
	sink = acc
}

func benchPY(b *testing.B, file string, useS bool, f func(p, y float64) (float64, error)) {
	pts := loadPerf(b, file)
	b.ReportAllocs()
	b.ResetTimer()
	var acc float64
	for i := 0; i < b.N; i++ {
		q := &pts[i%len(pts)]
		y := q.h
		if useS {
			y = q.s
		}
		v, err := f(q.p, y)
		if err != nil {
			b.Fatal(err)
		}
		acc += v
	}
	sink = acc
}

func raw(f func(p, y float64) float64) func(p, y float64) (float64, error) {
	return func(p, y float64) (float64, error) { return f(p, y), nil }
}

// Exported entry points with region selection and range checks.
func BenchmarkHPTRegion1(b *testing.B)        { benchPT(b, "region1.csv", HPT) }
func BenchmarkSPTRegion1(b *testing.B)        { benchPT(b, "region1.csv", SPT) }
func BenchmarkHPTRegion2(b *testing.B)        { benchPT(b, "region2_mixed.csv", HPT) }
func BenchmarkSPTRegion2(b *testing.B)        { benchPT(b, "region2_mixed.csv", SPT) }
func BenchmarkTPHRegion2Refined(b *testing.B) { benchPY(b, "region2_mixed.csv", false, TPH) }
func BenchmarkTPSRegion2Refined(b *testing.B) { benchPY(b, "region2_mixed.csv", true, TPS) }

// Raw equations without region selection.
func BenchmarkH1Raw(b *testing.B)           { benchPT(b, "region1.csv", raw(h1)) }
func BenchmarkS1Raw(b *testing.B)           { benchPT(b, "region1.csv", raw(s1)) }
func BenchmarkH2Raw(b *testing.B)           { benchPT(b, "region2_mixed.csv", raw(h2)) }
func BenchmarkS2Raw(b *testing.B)           { benchPT(b, "region2_mixed.csv", raw(s2)) }
func BenchmarkT2phRaw(b *testing.B)         { benchPY(b, "region2_mixed.csv", false, raw(t2ph)) }
func BenchmarkT2psRaw(b *testing.B)         { benchPY(b, "region2_mixed.csv", true, raw(t2ps)) }
func BenchmarkT2phRawSub2a(b *testing.B)    { benchPY(b, "region2a.csv", false, raw(t2ph)) }
func BenchmarkT2phRawSub2b(b *testing.B)    { benchPY(b, "region2b.csv", false, raw(t2ph)) }
func BenchmarkT2phRawSub2c(b *testing.B)    { benchPY(b, "region2c.csv", false, raw(t2ph)) }
func BenchmarkTPHRefinedSub2c(b *testing.B) { benchPY(b, "region2c.csv", false, TPH) }

func BenchmarkTsat(b *testing.B) {
	pts := loadPerf(b, "sat_p.csv")
	b.ReportAllocs()
	b.ResetTimer()
	var acc float64
	for i := 0; i < b.N; i++ {
		T, err := SatT(pts[i%len(pts)].p)
		if err != nil {
			b.Fatal(err)
		}
		acc += T
	}
	sink = acc
}

// BenchmarkFlashPTRegion3: a full region-3 state from (p, T) (density solved
// from p3(rho, T) = p, then all properties).
func BenchmarkFlashPTRegion3(b *testing.B) {
	b.ReportAllocs()
	var acc float64
	for i := 0; i < b.N; i++ {
		st, err := flashPT(25e6+float64(i%64)*1e5, 660+float64(i%16))
		if err != nil {
			b.Fatal(err)
		}
		acc += st.H
	}
	sink = acc
}
