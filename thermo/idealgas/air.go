package idealgas

import (
	"fmt"
	"math"
	"sync"

	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/if97"
)

// Dry-air composition, mole fractions: the composition for which Lemmon,
// Jacobsen, Penoncello and Friend, J. Phys. Chem. Ref. Data 29 (2000) 331,
// fitted their air equation of state (N2 0.7812, Ar 0.0092, O2 0.2096; sum
// exactly 1; molar mass here 28.9585 g/mol with the GRI-Mech molar masses).
// It is chosen over a CO2-bearing standard atmosphere (e.g. ISO 2533) so that
// this ideal-gas air and the Helmholtz air of thermo/helmholtz describe the
// same gas; the 0.03-0.04 % CO2 of real air is inside the argon share there.
const (
	DryAirN2 = 0.7812
	DryAirO2 = 0.2096
	DryAirAr = 0.0092
)

var dryAir = sync.OnceValue(func() *Mixture {
	m, err := NewMixture(map[string]float64{"N2": DryAirN2, "O2": DryAirO2, "Ar": DryAirAr}, MoleFraction)
	if err != nil {
		panic("idealgas: dry-air table is invalid: " + err.Error()) // a constant table; cannot happen
	}
	return m.Named("air")
})

// DryAir returns ideal-gas dry air (DryAirN2, DryAirO2, DryAirAr by mole)
// named "air", valid 200-3500 K. The returned mixture is shared and
// immutable.
func DryAir() *Mixture { return dryAir() }

// humidAir mixes dry air with water vapour at mole fraction xv.
func humidAir(xv float64) (*Mixture, error) {
	d := 1 - xv
	iN2, _ := canonical("N2")
	iO2, _ := canonical("O2")
	iAr, _ := canonical("Ar")
	iH2O, _ := canonical("H2O")
	idx := []int{iN2, iO2, iAr}
	f := []float64{DryAirN2 * d, DryAirO2 * d, DryAirAr * d}
	if d == 0 {
		idx, f = nil, nil
	}
	if xv > 0 {
		idx = append(idx, iH2O)
		f = append(f, xv)
	}
	return newMixture("humid-air", idx, f, MoleFraction)
}

// HumidAir returns humid air named "humid-air" at relative humidity rh
// (0..1, a fraction, not per cent), temperature T in K and absolute pressure
// p in Pa: water-vapour mole fraction x_v = rh psat(T)/p, the rest dry air as
// DryAir. psat is the IAPWS-IF97 saturation pressure over liquid water
// (if97.SatP, 273.15-647.096 K); below 273.15 K (saturation over ice) it
// returns if97's range error. The enhancement factor of real moist air
// (about 1.004 near 1 bar) is not applied: this is an ideal mixture.
//
// rh outside [0, 1] returns a *thermo.RangeError for quantity "RH"; a vapour
// partial pressure rh psat(T) above p returns a *thermo.RangeError for "p".
func HumidAir(rh, T, p float64) (*Mixture, error) {
	const name = "humid-air"
	if err := thermo.CheckFinite(name, []string{"RH", "T", "p"}, rh, T, p); err != nil {
		return nil, err
	}
	if rh < 0 {
		return nil, thermo.Below(name, "RH", "1", rh, 0, "relative humidity as a fraction")
	}
	if rh > 1 {
		return nil, thermo.Above(name, "RH", "1", rh, 1, "relative humidity as a fraction, not per cent; supersaturated air is not modelled")
	}
	psat, err := if97.SatP(T)
	if err != nil {
		return nil, fmt.Errorf("%s: saturation pressure of water at T = %g K: %w", name, T, err)
	}
	return humidFromPv(rh*psat, p)
}

// HumidAirDewPoint returns humid air named "humid-air" with dew point Tdew
// in K (>= 273.15 K, IF97 saturation over liquid water) at absolute pressure
// p in Pa: x_v = psat(Tdew)/p. A dew point whose saturation pressure exceeds
// p returns a *thermo.RangeError.
func HumidAirDewPoint(Tdew, p float64) (*Mixture, error) {
	const name = "humid-air"
	if err := thermo.CheckFinite(name, []string{"Tdew", "p"}, Tdew, p); err != nil {
		return nil, err
	}
	psat, err := if97.SatP(Tdew)
	if err != nil {
		return nil, fmt.Errorf("%s: saturation pressure of water at the dew point %g K: %w", name, Tdew, err)
	}
	return humidFromPv(psat, p)
}

func humidFromPv(pv, p float64) (*Mixture, error) {
	const name = "humid-air"
	if p < MinPressure {
		return nil, thermo.Below(name, "p", "Pa", p, MinPressure, "absolute pressure")
	}
	if pv > p {
		return nil, thermo.Below(name, "p", "Pa", p, pv, "the water-vapour partial pressure exceeds the total pressure")
	}
	return humidAir(pv / p)
}

// HumidAirRatio returns humid air named "humid-air" with humidity ratio
// (mixing ratio) wr in kg of water vapour per kg of dry air (>= 0):
// x_v = (wr/M_w) / (wr/M_w + 1/M_a).
func HumidAirRatio(wr float64) (*Mixture, error) {
	const name = "humid-air"
	if err := thermo.CheckFinite(name, []string{"humidity ratio"}, wr); err != nil {
		return nil, err
	}
	if wr < 0 {
		return nil, thermo.Below(name, "humidity ratio", "kg/kg", wr, 0, "kg water vapour per kg dry air")
	}
	iH2O, _ := canonical("H2O")
	nv := wr / speciesTable[iH2O].MolarMass
	na := 1 / DryAir().MolarMass()
	xv := nv / (nv + na)
	if math.IsNaN(xv) || math.IsInf(wr, 0) {
		return nil, fmt.Errorf("%s: humidity ratio %g: %w", name, wr, thermo.ErrNotFinite)
	}
	return humidAir(xv)
}
