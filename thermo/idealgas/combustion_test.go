package idealgas

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

// TestMethaneStoichiometric: CH4 + 2 O2 -> CO2 + 2 H2O (stoichiometry):
// no O2 left, CO2:H2O = 1:2, the air's N2 and Ar pass through.
func TestMethaneStoichiometric(t *testing.T) {
	fuel := mustMix(t, map[string]float64{"CH4": 1}, MoleFraction)
	c, err := CombustionProductsExcessAir(fuel, nil, 0)
	if err != nil {
		t.Fatal(err)
	}
	x := c.Products.MoleFractions()
	if _, ok := x["O2"]; ok {
		t.Errorf("O2 left at 0 %% excess air: %v", x["O2"])
	}
	if r := x["CO2"] / x["H2O"]; math.Abs(r-0.5) > 1e-15 {
		t.Errorf("CO2/H2O = %v, want 1/2", r)
	}
	if r := x["Ar"] / x["N2"]; math.Abs(r-DryAirAr/DryAirN2) > 1e-15 {
		t.Errorf("Ar/N2 = %v", r)
	}
	// Per mol CH4: 2/0.2096 mol air; products 1 + 2 + 0.7812 n_a + 0.0092 n_a.
	na := 2 / DryAirO2
	if want := 3 + (DryAirN2+DryAirAr)*na; math.Abs(c.ProductMolesPerFuelMole-want) > 1e-12*want {
		t.Errorf("product moles %v, want %v", c.ProductMolesPerFuelMole, want)
	}
	// Stoichiometric air/fuel mass ratio of methane with dry air: 17.2
	// (handbook value, from memory); ours 17.22 with this air.
	if afr := 1 / c.StoichiometricFuelAirRatio; math.Abs(afr-17.2) > 0.1 {
		t.Errorf("stoichiometric AFR %v, want about 17.2", afr)
	}
	if c.ExcessAir != 0 || c.Products.Name() != "flue-gas" {
		t.Errorf("excess %v name %q", c.ExcessAir, c.Products.Name())
	}
}

// TestMethaneLean: 100 % excess air, by hand: per mol CH4, n_a = 4/0.2096,
// O2 left 2 mol.
func TestMethaneLean(t *testing.T) {
	fuel := mustMix(t, map[string]float64{"CH4": 1}, MoleFraction)
	c, err := CombustionProductsExcessAir(fuel, DryAir(), 1)
	if err != nil {
		t.Fatal(err)
	}
	na := 4 / DryAirO2
	total := 1 + 2 + 2 + (DryAirN2+DryAirAr)*na
	want := map[string]float64{"CO2": 1 / total, "H2O": 2 / total, "O2": 2 / total, "N2": DryAirN2 * na / total, "Ar": DryAirAr * na / total}
	for k, v := range want {
		if g := c.Products.MoleFractions()[k]; math.Abs(g-v) > 1e-14 {
			t.Errorf("%s: %v, want %v", k, g, v)
		}
	}
	// The same products from the fuel/air ratio.
	d, err := CombustionProducts(fuel, nil, c.FuelAirRatio)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(d.ExcessAir-1) > 1e-12 {
		t.Errorf("excess air back %v", d.ExcessAir)
	}
	for k, v := range want {
		if g := d.Products.MoleFractions()[k]; math.Abs(g-v) > 1e-14 {
			t.Errorf("far: %s: %v, want %v", k, g, v)
		}
	}
	// The products are a usable fluid in gas-turbine expander duty.
	if _, err := d.Products.Flash(thermo.PT, 1.6e6, 1600); err != nil {
		t.Error(err)
	}
}

// TestAtomBalance: for a mixed fuel burned with humid air, every element
// into the burner comes out, to 1e-12 relative (mass conservation).
func TestAtomBalance(t *testing.T) {
	fuel := mustMix(t, map[string]float64{"CH4": 0.8, "C2H6": 0.05, "C3H8": 0.02, "CO": 0.03, "H2": 0.05, "CO2": 0.02, "N2": 0.02, "O2": 0.005, "H2O": 0.005}, MoleFraction)
	air, err := HumidAir(0.6, 293.15, 101325)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range []float64{0, 0.1, 2.5} {
		c, err := CombustionProductsExcessAir(fuel, air, e)
		if err != nil {
			t.Fatal(err)
		}
		fst, _ := StoichiometricFuelAirRatio(fuel, air)
		na := fuel.MolarMass() / (c.FuelAirRatio * air.MolarMass())
		count := func(m *Mixture, scale float64) (el [5]float64) {
			for _, n := range m.Species() {
				a := mustSpecies(t, n).Atoms
				x := m.MoleFractions()[n] * scale
				el[0] += x * float64(a.C)
				el[1] += x * float64(a.H)
				el[2] += x * float64(a.O)
				el[3] += x * float64(a.N)
				el[4] += x * float64(a.Ar)
			}
			return
		}
		in1, in2 := count(fuel, 1), count(air, na)
		out := count(c.Products, c.ProductMolesPerFuelMole)
		for i, name := range []string{"C", "H", "O", "N", "Ar"} {
			in := in1[i] + in2[i]
			if math.Abs(out[i]-in) > 1e-12*math.Max(in, 1) {
				t.Errorf("excess %v: %s in %v, out %v", e, name, in, out[i])
			}
		}
		// Mass: products per kg fuel = 1 + 1/far.
		if math.Abs(c.ProductMolesPerFuelMole*c.Products.MolarMass()/fuel.MolarMass()-c.ProductMassPerFuelMass) > 1e-12*c.ProductMassPerFuelMass {
			t.Errorf("excess %v: mass balance off", e)
		}
		if math.Abs(c.StoichiometricFuelAirRatio-fst) > 1e-15 || math.Abs(c.FuelAirRatio*(1+e)-fst) > 1e-12*fst {
			t.Errorf("excess %v: far %v, stoichiometric %v", e, c.FuelAirRatio, fst)
		}
		_, hasO2 := c.Products.MoleFractions()["O2"]
		if hasO2 != (e > 0) {
			t.Errorf("excess %v: O2 present = %v", e, hasO2)
		}
	}
}

func TestCombustionErrors(t *testing.T) {
	ch4 := mustMix(t, map[string]float64{"CH4": 1}, MoleFraction)
	inert := mustMix(t, map[string]float64{"CO2": 0.5, "N2": 0.5}, MoleFraction)
	fst, _ := StoichiometricFuelAirRatio(ch4, nil)
	cases := []struct {
		name string
		run  func() (*Combustion, error)
	}{
		{"rich by ratio", func() (*Combustion, error) { return CombustionProducts(ch4, nil, fst*1.001) }},
		{"negative excess", func() (*Combustion, error) { return CombustionProductsExcessAir(ch4, nil, -0.05) }},
		{"NaN excess", func() (*Combustion, error) { return CombustionProductsExcessAir(ch4, nil, math.NaN()) }},
		{"zero ratio", func() (*Combustion, error) { return CombustionProducts(ch4, nil, 0) }},
		{"Inf ratio", func() (*Combustion, error) { return CombustionProducts(ch4, nil, math.Inf(1)) }},
		{"inert fuel", func() (*Combustion, error) { return CombustionProductsExcessAir(inert, nil, 0.1) }},
		{"nil fuel", func() (*Combustion, error) { return CombustionProductsExcessAir(nil, nil, 0.1) }},
		{"fuel as oxidiser", func() (*Combustion, error) { return CombustionProductsExcessAir(ch4, ch4, 0.1) }},
	}
	for _, c := range cases {
		r, err := c.run()
		if !errors.Is(err, ErrComposition) {
			t.Errorf("%s: err %v, result %+v", c.name, err, r)
		}
	}
	// Exactly stoichiometric by ratio is accepted and leaves no O2.
	c, err := CombustionProducts(ch4, nil, fst)
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := c.Products.MoleFractions()["O2"]; ok {
		t.Error("O2 left at the stoichiometric ratio")
	}
}
