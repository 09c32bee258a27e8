package fluids

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

func TestEveryNameGivesAState(t *testing.T) {
	ng := map[string]float64{"CH4": 0.9, "C2H6": 0.06, "N2": 0.04}
	// Points chosen inside each model's single-phase range (common practice, no source):
	// the check is that the registry wires a working model, not its numbers, which
	// the model packages test against their references.
	cases := []struct {
		spec Spec
		p, T float64
	}{
		{Spec{Name: "water"}, 1e6, 500},
		{Spec{Name: "air"}, 1e5, 300},
		{Spec{Name: "humid-air", RelativeHumidity: 0.6, AmbientT: 298.15, AmbientP: 101325}, 1e5, 300},
		{Spec{Name: "humid-air", Composition: map[string]float64{"H2O": 0.02}}, 1e5, 300},
		{Spec{Name: "flue-gas", Composition: map[string]float64{"CH4": 1}, ExcessAir: 2}, 1e5, 800},
		{Spec{Name: "ideal-gas", Composition: ng}, 1e5, 300},
		{Spec{Name: "natural-gas", Composition: ng}, 5e6, 300},
		{Spec{Name: "ammonia"}, 1e5, 300},
		{Spec{Name: "r134a"}, 1e5, 300},
		{Spec{Name: "co2"}, 1e5, 300},
		{Spec{Name: "nitrogen"}, 1e5, 300},
		{Spec{Name: "methane"}, 1e5, 300},
		{Spec{Name: "air-helmholtz"}, 1e5, 300},
		{Spec{Name: "water-iapws95"}, 1e5, 300},
	}
	for _, c := range cases {
		f, err := FromSpec(c.spec)
		if err != nil {
			t.Errorf("%s: %v", c.spec.Name, err)
			continue
		}
		st, err := f.Flash(thermo.PT, c.p, c.T)
		if err != nil {
			t.Errorf("%s: Flash(PT): %v", c.spec.Name, err)
			continue
		}
		if !st.Finite() || st.Rho <= 0 || math.Abs(st.T-c.T) > 1e-9*c.T {
			t.Errorf("%s: bad state %+v", c.spec.Name, st)
		}
	}
}

func TestErrors(t *testing.T) {
	cases := []struct {
		spec Spec
		want error
	}{
		{Spec{Name: "unobtainium"}, ErrUnknown},
		{Spec{Name: "natural-gas"}, ErrSpec},
		{Spec{Name: "water", Composition: map[string]float64{"H2O": 1}}, ErrSpec},
		{Spec{Name: "humid-air"}, ErrSpec},
		{Spec{Name: "humid-air", Composition: map[string]float64{"H2O": 1.5}}, ErrSpec},
		{Spec{Name: "flue-gas"}, ErrSpec},
	}
	for _, c := range cases {
		if _, err := FromSpec(c.spec); !errors.Is(err, c.want) {
			t.Errorf("%+v: err %v, want %v", c.spec, err, c.want)
		}
	}
}

func TestParseComposition(t *testing.T) {
	c, err := ParseComposition("CH4=0.9, C2H6=6%,N2=0.04")
	if err != nil || c["CH4"] != 0.9 || math.Abs(c["C2H6"]-0.06) > 1e-15 || c["N2"] != 0.04 {
		t.Fatalf("%v %v", c, err)
	}
	for _, bad := range []string{"", "CH4", "CH4=", "=0.5", "CH4=x", "CH4=0.5,CH4=0.5", "CH4=-1", "CH4=NaN"} {
		if _, err := ParseComposition(bad); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
}

func FuzzParseComposition(f *testing.F) {
	for _, s := range []string{"CH4=0.9,N2=0.1", "a=1%", "=", ",,", "x=1e400"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		c, err := ParseComposition(s)
		if err == nil {
			for k, v := range c {
				if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
					t.Fatalf("%q: %s=%v accepted", s, k, v)
				}
			}
		}
	})
}
