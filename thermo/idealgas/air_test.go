package idealgas

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

func TestDryAirComposition(t *testing.T) {
	x := DryAir().MoleFractions()
	// Lemmon et al. (2000), J. Phys. Chem. Ref. Data 29, 331: N2 0.7812,
	// Ar 0.0092, O2 0.2096.
	for k, v := range map[string]float64{"N2": 0.7812, "O2": 0.2096, "Ar": 0.0092} {
		if math.Abs(x[k]-v) > 1e-15 {
			t.Errorf("%s: %v, want %v", k, x[k], v)
		}
	}
	if DryAir().Name() != "air" {
		t.Errorf("name %q", DryAir().Name())
	}
	if lo, hi := DryAir().TRange(); lo != 200 || hi != 3500 {
		t.Errorf("T range %v-%v K, want 200-3500 K (O2 data end 3500 K, N2/Ar extrapolated to 200 K)", lo, hi)
	}
}

// TestHumidAir: x_v = RH psat(T)/p with psat from IAPWS R7-97(2012)
// Table 35 (psat(300 K) = 3.53658941e-3 MPa; the tolerance 1e-8 covers
// the table's 9 digits).
func TestHumidAir(t *testing.T) {
	const psat300 = 3536.58941 // Pa, IAPWS R7-97(2012) Table 35
	for _, c := range []struct{ rh, p float64 }{{0.5, 101325}, {1, 101325}, {0.8, 1e5}, {0, 101325}, {1, psat300 * 1.0000001}} {
		m, err := HumidAir(c.rh, 300, c.p)
		if err != nil {
			t.Fatalf("%+v: %v", c, err)
		}
		want := c.rh * psat300 / c.p
		got := m.MoleFractions()["H2O"]
		if math.Abs(got-want) > 1e-8*want {
			t.Errorf("%+v: x_H2O = %.12g, want %.12g", c, got, want)
		}
		// The dry part keeps the dry-air ratios.
		x := m.MoleFractions()
		if want < 1 && math.Abs(x["O2"]/x["N2"]-DryAirO2/DryAirN2) > 1e-14 {
			t.Errorf("%+v: O2/N2 = %v", c, x["O2"]/x["N2"])
		}
		if m.Name() != "humid-air" {
			t.Errorf("name %q", m.Name())
		}
	}
	// Dew point: saturated at Tdew.
	a, err := HumidAirDewPoint(300, 101325)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := HumidAir(1, 300, 101325)
	if math.Abs(a.MoleFractions()["H2O"]-b.MoleFractions()["H2O"]) > 1e-16 {
		t.Error("dew point 300 K differs from RH 1 at 300 K")
	}
	// Humidity ratio: kg vapour per kg dry air back from the mass fractions.
	h, err := HumidAirRatio(0.012)
	if err != nil {
		t.Fatal(err)
	}
	wv := h.MassFractions()["H2O"]
	if got := wv / (1 - wv); math.Abs(got-0.012) > 1e-14 {
		t.Errorf("humidity ratio back %v, want 0.012", got)
	}
	// cp of humid air is the mass-weighted cp of dry air and vapour
	// (definition of an ideal mixture).
	cpd, _ := DryAir().Cp(300)
	cpv := R / mustSpecies(t, "H2O").MolarMass * mustSpecies(t, "H2O").CpR(300)
	cph, _ := h.Cp(300)
	if want := (1-wv)*cpd + wv*cpv; math.Abs(cph-want) > 1e-12*want {
		t.Errorf("humid cp %v, want %v", cph, want)
	}
}

func TestHumidAirErrors(t *testing.T) {
	cases := []struct {
		name     string
		rh, T, p float64
		want     error
	}{
		{"RH above 1", 1.01, 300, 101325, thermo.ErrOutOfRange},
		{"RH in per cent", 50, 300, 101325, thermo.ErrOutOfRange},
		{"RH negative", -0.1, 300, 101325, thermo.ErrOutOfRange},
		{"RH NaN", math.NaN(), 300, 101325, thermo.ErrNotFinite},
		{"p Inf", 0.5, 300, math.Inf(1), thermo.ErrNotFinite},
		{"vapour above total", 1, 373.15, 5e4, thermo.ErrOutOfRange},
		{"below IF97 saturation range (ice)", 0.5, 263.15, 101325, thermo.ErrOutOfRange},
		{"above critical T", 0.5, 700, 101325, thermo.ErrOutOfRange},
		{"p zero", 0.5, 300, 0, thermo.ErrOutOfRange},
	}
	for _, c := range cases {
		m, err := HumidAir(c.rh, c.T, c.p)
		if !errors.Is(err, c.want) {
			t.Errorf("%s: err %v, want %v (mixture %v)", c.name, err, c.want, m)
		}
	}
	if _, err := HumidAirDewPoint(400, 1e5); !errors.Is(err, thermo.ErrOutOfRange) {
		t.Errorf("dew point with psat above p: %v", err)
	}
	if _, err := HumidAirRatio(-0.01); !errors.Is(err, thermo.ErrOutOfRange) {
		t.Errorf("negative humidity ratio: %v", err)
	}
	if _, err := HumidAirRatio(math.NaN()); !errors.Is(err, thermo.ErrNotFinite) {
		t.Errorf("NaN humidity ratio: %v", err)
	}
	var re *thermo.RangeError
	if _, err := HumidAir(1.2, 300, 1e5); !errors.As(err, &re) || re.Quantity != "RH" {
		t.Errorf("RH error is not a RangeError on RH: %v", err)
	}
}
