package gerg2008

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

// TestDetailVsGERG: for pipeline-quality gas in the normal range of both
// equations, each states an uncertainty of about 0.1 % in Z (AGA Report
// No. 8 / ISO 20765-1 and Kunz & Wagner 2012 / ISO 20765-2; from memory),
// so the two must agree in Z within 0.1 % at 275-350 K, p <= 12 MPa, and
// within 0.25 % at 250 K, where the gases near their phase envelope. cp
// within 0.5 % and w within 0.2 % are our judgement (found: 0.28 % and
// 0.1 %).
func TestDetailVsGERG(t *testing.T) {
	for _, comp := range []map[string]float64{gas11, gas10} {
		g := mustNew(t, comp)
		d, err := NewDetail(comp)
		if err != nil {
			t.Fatal(err)
		}
		for _, T := range []float64{250, 275, 300, 325, 350} {
			for _, p := range []float64{1e6, 4e6, 8e6, 12e6} {
				a, err1 := g.PropertiesPT(p, T)
				b, err2 := d.PropertiesPT(p, T)
				if err := errors.Join(err1, err2); err != nil {
					t.Fatal(err)
				}
				tolZ := 1e-3
				if T < 275 {
					tolZ = 2.5e-3
				}
				if dz := relDiff(b.Z, a.Z); dz > tolZ {
					t.Errorf("%g K, %g Pa: Z DETAIL %.6f, GERG %.6f (rel %.2g)", T, p, b.Z, a.Z, dz)
				}
				if T >= 275 {
					if dc := relDiff(b.Cp, a.Cp); dc > 5e-3 {
						t.Errorf("%g K, %g Pa: cp DETAIL %.4f, GERG %.4f (rel %.2g)", T, p, b.Cp, a.Cp, dc)
					}
					if dw := relDiff(b.W, a.W); dw > 2e-3 {
						t.Errorf("%g K, %g Pa: w DETAIL %.3f, GERG %.3f (rel %.2g)", T, p, b.W, a.W, dw)
					}
				}
			}
		}
	}
}

// TestDetailFlash: the DETAIL model answers through thermo.Fluid like the
// GERG one: round trips to 1e-9 relative (identity), its own name, its own
// range, and no stability test.
func TestDetailFlash(t *testing.T) {
	d, err := NewDetail(gas11)
	if err != nil {
		t.Fatal(err)
	}
	var f thermo.Fluid = d
	if f.Name() != NameDetail {
		t.Errorf("Name() = %q", f.Name())
	}
	for _, s := range []struct{ p, T float64 }{{3e6, 290}, {7e6, 330}, {12e6, 300}, {50e6, 400}} {
		st, err := f.Flash(thermo.PT, s.p, s.T)
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range []struct {
			pair thermo.Pair
			b    float64
		}{{thermo.PH, st.H}, {thermo.PS, st.S}} {
			got, err := f.Flash(c.pair, s.p, c.b)
			if err != nil || relDiff(got.T, s.T) > 1e-9 {
				t.Errorf("%v at %v: T = %v, %v", c.pair, s, got.T, err)
			}
		}
	}
	var re *thermo.RangeError
	if _, err := f.Flash(thermo.PT, 1e6, 100); !errors.As(err, &re) || re.Limit != TMinDetail || re.Fluid != NameDetail {
		t.Errorf("100 K: %v, want a RangeError below %g K", err, TMinDetail)
	}
	if _, err := f.Flash(thermo.PT, 100e6, 400); err != nil {
		t.Errorf("100 MPa, 400 K is inside DETAIL's wide range: %v", err)
	}
	if _, err := d.Stable(6e6, 300); !errors.Is(err, thermo.ErrUnsupported) {
		t.Errorf("Stable on DETAIL: %v, want ErrUnsupported", err)
	}
	if _, err := NewDetail(map[string]float64{"CH4": 0.5}); !errors.Is(err, ErrComposition) {
		t.Errorf("bad composition: %v", err)
	}
	// Pure methane: DETAIL and GERG agree on Z at 300 K, 5 MPa within 0.1 %.
	gm := mustNew(t, map[string]float64{"CH4": 1})
	dm, err := NewDetail(map[string]float64{"CH4": 1})
	if err != nil {
		t.Fatal(err)
	}
	z1, err1 := gm.Z(5e6, 300)
	z2, err2 := dm.Z(5e6, 300)
	if err := errors.Join(err1, err2); err != nil || math.Abs(z1/z2-1) > 1e-3 {
		t.Errorf("methane Z at 5 MPa, 300 K: GERG %.6f, DETAIL %.6f, %v", z1, z2, err)
	}
}
