package idealgas

import (
	"errors"
	"math"
	"testing"
)

func TestParseComposition(t *testing.T) {
	good := []struct {
		in   string
		want map[string]float64
	}{
		{"CH4=0.9,C2H6=0.06,N2=0.04", map[string]float64{"CH4": 0.9, "C2H6": 0.06, "N2": 0.04}},
		{" ch4 = 90% ; c2h6=6 %, n2=4%", map[string]float64{"CH4": 0.9, "C2H6": 0.06, "N2": 0.04}},
		{"nC4H10=0.5,i-C4H10=0.5,", map[string]float64{"n-C4H10": 0.5, "i-C4H10": 0.5}},
		{"AR=1", map[string]float64{"Ar": 1}},
	}
	for _, c := range good {
		got, err := ParseComposition(c.in)
		if err != nil {
			t.Errorf("%q: %v", c.in, err)
			continue
		}
		if len(got) != len(c.want) {
			t.Errorf("%q: %v, want %v", c.in, got, c.want)
		}
		for k, v := range c.want {
			if math.Abs(got[k]-v) > 1e-15 {
				t.Errorf("%q: %s = %v, want %v", c.in, k, got[k], v)
			}
		}
	}
	bad := []string{"", " , ;", "CH4", "CH4=", "CH4=abc", "CH4=0.5,ch4=0.5", "XX=1", "CH4=-0.1", "CH4=NaN", "CH4=Inf", "CH4=1e400", "=0.5", "CH4=0.5=0.5", "CH4=%"}
	for _, in := range bad {
		if m, err := ParseComposition(in); !errors.Is(err, ErrComposition) {
			t.Errorf("%q: accepted as %v (err %v)", in, m, err)
		}
	}
	// The sum is NewMixture's check.
	m, err := ParseComposition("CH4=0.9,N2=0.05")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := NewMixture(m, MoleFraction); !errors.Is(err, ErrComposition) {
		t.Errorf("sum 0.95 accepted: %v", err)
	}
}

// FuzzParseComposition: any string parses to finite non-negative
// fractions of known species or fails with ErrComposition; never panics.
// A parsed composition either builds a mixture or fails with
// ErrComposition.
func FuzzParseComposition(f *testing.F) {
	for _, s := range []string{"CH4=0.9,C2H6=0.06,N2=0.04", "N2=78.12%,O2=20.96%,Ar=0.92%", "co2=1", "H2O=0.5;;;H2=0.5", "x=y", "CH4=1e-320,N2=1", "=,=,=", "CH4=0x1p-2,N2=0.75"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		m, err := ParseComposition(s)
		if err != nil {
			if !errors.Is(err, ErrComposition) {
				t.Fatalf("%q: error %v does not wrap ErrComposition", s, err)
			}
			return
		}
		for k, v := range m {
			if _, err := LookupSpecies(k); err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
				t.Fatalf("%q: bad entry %s=%v", s, k, v)
			}
		}
		mix, err := NewMixture(m, MoleFraction)
		if err != nil {
			if !errors.Is(err, ErrComposition) {
				t.Fatalf("%q: NewMixture error %v does not wrap ErrComposition", s, err)
			}
			return
		}
		if mix.MolarMass() <= 0 || math.IsNaN(mix.MolarMass()) {
			t.Fatalf("%q: molar mass %v", s, mix.MolarMass())
		}
	})
}
