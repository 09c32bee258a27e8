package gerg2008

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

func TestCompositionErrors(t *testing.T) {
	cases := []struct {
		name string
		comp map[string]float64
		msg  string // part of the error text
	}{
		{"empty", map[string]float64{}, "no components"},
		{"nil", nil, "no components"},
		{"unknown", map[string]float64{"methane": 0.5, "neopentane": 0.5}, "unknown component"},
		{"duplicate alias", map[string]float64{"CH4": 0.5, "methane": 0.5}, "both name methane"},
		{"negative", map[string]float64{"CH4": 0.95, "N2": 0.1, "CO2": -0.05}, "negative"},
		{"NaN", map[string]float64{"CH4": math.NaN()}, "not finite"},
		{"Inf", map[string]float64{"CH4": math.Inf(1)}, "not finite"},
		{"sum low", map[string]float64{"CH4": 0.9, "N2": 0.09}, "sum to"},
		{"sum high", map[string]float64{"CH4": 0.9, "N2": 0.100002}, "sum to"},
		{"percent", map[string]float64{"CH4": 90, "N2": 10}, "exceeds 1"},
		{"all zero", map[string]float64{"CH4": 0}, "sum to"},
	}
	for _, c := range cases {
		_, err := New(c.comp)
		if !errors.Is(err, ErrComposition) || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("%s: %v, want ErrComposition mentioning %q", c.name, err, c.msg)
		}
	}
	// Within 1e-6 of 1 is accepted and normalised.
	m, err := New(map[string]float64{"CH4": 0.9, "N2": 0.1000005})
	if err != nil {
		t.Fatal(err)
	}
	sum := 0.0
	for _, v := range m.Composition() {
		sum += v
	}
	if math.Abs(sum-1) > 1e-15 {
		t.Errorf("normalised fractions sum to %.17g", sum)
	}
}

func TestNames(t *testing.T) {
	if got := Components(); len(got) != 21 || got[0] != "methane" || got[5] != "n-butane" || got[6] != "isobutane" || got[20] != "argon" {
		t.Errorf("Components() = %v (published order: Kunz & Wagner 2012)", got)
	}
	g, err := loadData()
	if err != nil {
		t.Fatal(err)
	}
	for i, n := range Components() {
		if g.comps[i].name != n {
			t.Errorf("component %d: table says %q, data file %q", i, n, g.comps[i].name)
		}
		if c, ok := Canonical(g.comps[i].formula); !ok || c != n {
			t.Errorf("formula %q of the data file maps to %q, want %q", g.comps[i].formula, c, n)
		}
	}
	for alias, want := range map[string]string{"CH4": "methane", "Methane": "methane", "nC4": "n-butane", "iC4": "isobutane",
		"i-C4H10": "isobutane", "n-C5H12": "n-pentane", "iC5": "isopentane", "C6": "n-hexane", "C10": "n-decane",
		"carbon_dioxide": "carbon dioxide", "  CO2 ": "carbon dioxide", "co": "carbon monoxide", "H2S": "hydrogen sulfide",
		"He": "helium", "AR": "argon", "h2o": "water"} {
		if got, ok := Canonical(alias); !ok || got != want {
			t.Errorf("Canonical(%q) = %q, %v; want %q", alias, got, ok, want)
		}
	}
	if _, ok := Canonical("C4H10"); ok {
		t.Error("C4H10 is ambiguous (n- or iso-) and must be rejected")
	}
	if a := Aliases("nC4"); len(a) == 0 || a[0] != "n-butane" {
		t.Errorf("Aliases(nC4) = %v", a)
	}
	if Aliases("xenon") != nil {
		t.Error("Aliases of an unknown name must be nil")
	}
}

func TestParseComposition(t *testing.T) {
	c, err := ParseComposition("CH4=0.9, C2H6=0.06; N2 = 0.04")
	if err != nil || len(c) != 3 || c["CH4"] != 0.9 || c["N2"] != 0.04 {
		t.Fatalf("ParseComposition = %v, %v", c, err)
	}
	for _, bad := range []string{"", " , ", "CH4", "CH4=", "=0.5", "CH4=abc", "CH4=0.5,CH4=0.5", "CH4=0.5,N2=0.4", "XX=1", "CH4=NaN", "CH4=1e400"} {
		if _, err := ParseComposition(bad); !errors.Is(err, ErrComposition) {
			t.Errorf("ParseComposition(%q) = %v, want ErrComposition", bad, err)
		}
	}
}

// FuzzParseComposition: no panic; either an error or a composition New accepts.
func FuzzParseComposition(f *testing.F) {
	for _, s := range []string{"CH4=0.9,C2H6=0.06,N2=0.04", "methane=1", "CH4=0.5;CH4=0.5", "nC4=1e-7,CH4=0.9999999", "=,=;", "He=1e308,Ar=-1e308", "CO2=0x1p-1,N2=.5"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		c, err := ParseComposition(s)
		if err != nil {
			if !errors.Is(err, ErrComposition) {
				t.Fatalf("%q: error %v does not wrap ErrComposition", s, err)
			}
			return
		}
		if _, err := New(c); err != nil {
			t.Fatalf("%q parsed to %v but New fails: %v", s, c, err)
		}
	})
}

// FuzzFlash: New and Flash never panic; they return an error or a finite
// state whose inputs are reproduced.
func FuzzFlash(f *testing.F) {
	f.Add(0.9, 0.05, 0.03, 0.02, uint8(1), 6e6, 300.0)
	f.Add(1.0, 0.0, 0.0, 0.0, uint8(2), 1e5, 1e5)
	f.Add(0.5, 0.5, 0.0, 0.0, uint8(3), 3e6, 7000.0)
	f.Add(0.0, 0.0, 0.0, 1.0, uint8(1), 1e3, 60.0)
	f.Add(0.25, 0.25, 0.25, 0.25, uint8(4), 1e6, 0.5)
	f.Add(math.NaN(), 0.0, 0.0, 1.0, uint8(1), math.Inf(1), -1.0)
	f.Add(0.9, 0.05, 0.03, 0.02, uint8(0x81), 6e6, 300.0) // DETAIL
	f.Add(0.9, 0.05, 0.03, 0.02, uint8(0x41), 3e6, 250.0) // with the stability test
	f.Add(0.6, 0.2, 0.1, 0.1, uint8(0x41), 5e6, 280.0)
	f.Fuzz(func(t *testing.T, a, b, c, d float64, pair uint8, x, y float64) {
		newModel := New
		if pair&0x80 != 0 {
			newModel = NewDetail
		}
		m, err := newModel(map[string]float64{"methane": a, "ethane": b, "n-hexane": c, "hydrogen": d})
		if err != nil {
			if !errors.Is(err, ErrComposition) {
				t.Fatalf("New error %v does not wrap ErrComposition", err)
			}
			return
		}
		p := thermo.Pair(pair & 7)
		st, err := m.Flash(p, x, y)
		if err != nil {
			return
		}
		if !st.Finite() || st.Phase != thermo.PhaseGas {
			t.Fatalf("Flash(%v, %g, %g) = %+v", p, x, y, st)
		}
		if p == thermo.PT && pair&0x40 != 0 { // the stability test must not panic either
			if _, err := m.Stable(x, y); err != nil && !m.detail && !errors.Is(err, thermo.ErrPhase) {
				t.Fatalf("Stable(%g, %g) after a successful flash: %v", x, y, err)
			}
		}
		// The (p,h) and (p,s) flashes promise T to 1e-9 relative, i.e. h to
		// cp T 1e-9 and s to cp 1e-9.
		var in, tol float64
		switch p {
		case thermo.PT:
			in, tol = st.T, 0
		case thermo.PH:
			in, tol = st.H, 1e-9*st.Cp*st.T
		case thermo.PS:
			in, tol = st.S, 1e-9*st.Cp
		default:
			t.Fatalf("pair %v answered", p)
		}
		if st.P != x || math.Abs(in-y) > tol {
			t.Fatalf("Flash(%v, %g, %g) returned p = %g and %g", p, x, y, st.P, in)
		}
	})
}
