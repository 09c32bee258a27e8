package units

import (
	"errors"
	"math"
	"testing"
)

func TestParse(t *testing.T) {
	// Conversion factors: SI prefixes and bar (exact by definition); psi from the
	// exact 1959 pound and inch (NIST SP 811, Appendix B: 1 psi = 6894.757 Pa);
	// degC/degF offsets from the definition of the kelvin scale (common practice).
	cases := []struct {
		in   string
		kind Kind
		want float64
	}{
		{"16MPa", Pressure, 16e6},
		{"16 MPa", Pressure, 16e6},
		{"7kPa", Pressure, 7e3},
		{"1.5bar", Pressure, 1.5e5},
		{"14.695948775513psi", Pressure, 101325.0},
		{"101325", Pressure, 101325},
		{"538degC", Temperature, 811.15},
		{"538°C", Temperature, 811.15},
		{"32degF", Temperature, 273.15},
		{"212degF", Temperature, 373.15},
		{"300K", Temperature, 300},
		{"0.5K", TemperatureDelta, 0.5},
		{"0.5degC", TemperatureDelta, 0.5},
		{"1.8degF", TemperatureDelta, 1.0},
		{"3400kJ/kg", SpecificEnergy, 3.4e6},
		{"6.5kJ/kgK", SpecificEntropy, 6500},
		{"6.5 kJ/(kg K)", SpecificEntropy, 6500},
		{"250kg/s", MassFlow, 250},
		{"900t/h", MassFlow, 250},
		{"3600kg/h", MassFlow, 1},
		{"113.96MW", Power, 113.96e6},
		{"85%", Fraction, 0.85},
		{"0.85", Fraction, 0.85},
		{"3000rpm", RotationalSpeed, 100 * math.Pi},
		{"-5e2Pa", Pressure, -500},
	}
	for _, c := range cases {
		got, err := Parse(c.in, c.kind)
		if err != nil {
			t.Errorf("Parse(%q): %v", c.in, err)
			continue
		}
		if math.Abs(got-c.want) > 1e-9*math.Max(1, math.Abs(c.want)) && math.Abs(got-c.want) > 1e-6 {
			t.Errorf("Parse(%q) = %.12g, want %.12g", c.in, got, c.want)
		}
	}
}

func TestParseErrors(t *testing.T) {
	cases := []struct {
		in   string
		kind Kind
		want error
	}{
		{"10barg", Pressure, ErrGauge},
		{"150psig", Pressure, ErrGauge},
		{"16MPa", Temperature, ErrWrongKind},
		{"538degC", Pressure, ErrWrongKind},
		{"16mpa", Pressure, ErrUnknownUnit},
		{"MPa", Pressure, ErrSyntax},
		{"", Pressure, ErrSyntax},
		{"NaN", Pressure, ErrSyntax},
		{"inf K", Temperature, ErrSyntax},
		{"1e999Pa", Pressure, ErrSyntax},
	}
	for _, c := range cases {
		_, err := Parse(c.in, c.kind)
		if !errors.Is(err, c.want) {
			t.Errorf("Parse(%q, %v) error = %v, want %v", c.in, c.kind, err, c.want)
		}
	}
}

func TestGaugeToAbsolute(t *testing.T) {
	u, err := LookupKind("barg", Pressure)
	if err != nil {
		t.Fatal(err)
	}
	// 10 barg at a barometer of 101.325 kPa is 1 101 325 Pa absolute (definition of gauge pressure).
	if got := u.ToSIAbsolute(10, 101325); got != 1101325 {
		t.Errorf("10 barg -> %v Pa, want 1101325", got)
	}
	a, _ := LookupKind("kPa", Pressure)
	if got := a.ToSIAbsolute(7, 101325); got != 7000 {
		t.Errorf("absolute unit must ignore the barometer: got %v", got)
	}
}

func TestRoundTripFromSI(t *testing.T) {
	for _, n := range []string{"degC", "degF", "psi", "t/h", "kJ/kgK", "%", "rpm"} {
		u, err := Lookup(n)
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range []float64{-40, 0, 1, 538, 1e4} {
			if got := u.FromSI(u.ToSI(v)); math.Abs(got-v) > 1e-9*math.Max(1, math.Abs(v)) {
				t.Errorf("%s: FromSI(ToSI(%v)) = %v", n, v, got)
			}
		}
	}
}

func FuzzParse(f *testing.F) {
	for _, s := range []string{"16MPa", "538degC", "1e5", "-", "1e", "e5", "1..2bar", "10barg", "0x10Pa", " 3 kg/s "} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		for k := Pressure; k <= Density; k++ {
			v, err := Parse(s, k)
			if err == nil && (math.IsNaN(v) || math.IsInf(v, 0)) {
				t.Fatalf("Parse(%q, %v) = %v without error", s, k, v)
			}
		}
	})
}
