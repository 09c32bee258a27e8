package if97

import (
	"math"
	"testing"
)

// pick returns the named property of a props in the units of
// if97_verification.csv (kJ/kg, kJ/(kg K), m3/kg, m/s).
func pick(t testing.TB, pr props, name string) float64 {
	t.Helper()
	switch name {
	case "v":
		return pr.v
	case "h":
		return pr.h / 1e3
	case "u":
		return pr.u / 1e3
	case "s":
		return pr.s / 1e3
	case "cp":
		return pr.cp / 1e3
	case "cv":
		return pr.cv / 1e3
	case "w":
		return pr.w
	}
	t.Fatalf("unknown property %q", name)
	return 0
}

// TestForwardVerification checks the basic equations of regions 1, 2 and 5
// against IAPWS R7-97(2012) Tables 5, 15 and 42 (via
// testdata/reference/if97_verification.csv) to the printed digits.
func TestForwardVerification(t *testing.T) {
	eqs := map[string]func(p, T float64) props{"1": region1, "2": region2, "5": region5}
	n := 0
	for _, r := range readRef(t, "if97_verification.csv") {
		f, ok := eqs[r["region"]]
		if !ok || r["in1_name"] != "T" || r["in2_name"] != "p" {
			continue
		}
		T := toSI(t, r.f(t, "in1_value"), r["in1_unit"])
		p := toSI(t, r.f(t, "in2_value"), r["in2_unit"])
		got := pick(t, f(p, T), r["property"])
		want, tol := r.f(t, "value"), r.f(t, "abs_tol")
		if math.Abs(got-want) > tol {
			t.Errorf("%s region %s T=%g p=%g: %s = %.12g, want %.12g ± %g", r["table"], r["region"], T, p, r["property"], got, want, tol)
		}
		n++
	}
	if n != 54 {
		t.Fatalf("checked %d rows, want 54 (regions 1, 2, 5)", n)
	}
}

// TestFastEntryPoints: the h-only, s-only and (h,cp), (s,cp) functions
// agree with the full evaluation (same equation, different summation).
func TestFastEntryPoints(t *testing.T) {
	for _, c := range []struct{ p, T float64 }{{3e6, 300}, {80e6, 500}, {1e5, 350}, {16e6, 620}} {
		pr := region1(c.p, c.T)
		h, cp := hcp1(c.p, c.T)
		s, cp2 := scp1(c.p, c.T)
		for _, d := range [][2]float64{{h1(c.p, c.T), pr.h}, {s1(c.p, c.T), pr.s}, {h, pr.h}, {cp, pr.cp}, {s, pr.s}, {cp2, pr.cp}} {
			if math.Abs(d[0]-d[1]) > 1e-12*math.Abs(d[1])+1e-9 {
				t.Errorf("region 1 p=%g T=%g: fast %v full %v", c.p, c.T, d[0], d[1])
			}
		}
	}
	for _, c := range []struct{ p, T float64 }{{3500, 300}, {30e6, 700}, {1e5, 1073}, {16e6, 640}} {
		pr := region2(c.p, c.T)
		h, cp := hcp2(c.p, c.T)
		s, cp2 := scp2(c.p, c.T)
		for _, d := range [][2]float64{{h2(c.p, c.T), pr.h}, {s2(c.p, c.T), pr.s}, {h, pr.h}, {cp, pr.cp}, {s, pr.s}, {cp2, pr.cp}} {
			if math.Abs(d[0]-d[1]) > 1e-12*math.Abs(d[1])+1e-9 {
				t.Errorf("region 2 p=%g T=%g: fast %v full %v", c.p, c.T, d[0], d[1])
			}
		}
	}
}

// TestFastPolyMatchesGeneric: the generated straight-line sums (fastpoly.go)
// equal the generic evaluation of the same tables (region1.go) to
// round-off, over the range of the reduced variables.
func TestFastPolyMatchesGeneric(t *testing.T) {
	type pair struct {
		name string
		fast func(a, b float64) float64
		q    *gpoly
		a, b [2]float64 // ranges of the reduced variables
	}
	for _, c := range []pair{
		{"t1ph", ft1ph, t1phPoly, [2]float64{0, 100}, [2]float64{1, 2.7}},
		{"t1ps", ft1ps, t1psPoly, [2]float64{0, 100}, [2]float64{2, 5.8}},
		{"t2aph", ft2aph, t2aphPoly, [2]float64{0, 4}, [2]float64{-0.9, 0.1}},
		{"t2bph", ft2bph, t2bphPoly, [2]float64{2, 98}, [2]float64{-1.2, -0.5}},
		{"t2cph", ft2cph, t2cphPoly, [2]float64{31, 125}, [2]float64{-0.5, 0.3}},
		{"t2aps", ft2aps, t2apsPoly, [2]float64{0.1, 1.42}, [2]float64{1, 3}},
		{"t2bps", ft2bps, t2bpsPoly, [2]float64{4, 100}, [2]float64{0, 2.6}},
		{"t2cps", ft2cps, t2cpsPoly, [2]float64{16, 100}, [2]float64{0, 0.3}},
	} {
		for i := 0; i <= 20; i++ {
			for j := 0; j <= 20; j++ {
				a := c.a[0] + (c.a[1]-c.a[0])*float64(i)/20
				b := c.b[0] + (c.b[1]-c.b[0])*float64(j)/20
				if a == 0 || b == 0 {
					continue
				}
				got, want := c.fast(a, b), c.q.sum(a, b)
				if !(math.Abs(got-want) <= 1e-11*math.Abs(want)+1e-9) {
					t.Errorf("%s(%g, %g) = %.15g, generic %.15g", c.name, a, b, got, want)
				}
			}
		}
	}
}
