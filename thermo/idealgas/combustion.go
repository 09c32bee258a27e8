package idealgas

import (
	"fmt"
	"math"
)

// Combustion is the result of burning a fuel gas completely with an
// oxidiser (air).
type Combustion struct {
	// Products is the product gas, named "flue-gas": CO2, H2O, N2, O2 and
	// Ar, each only if its amount is non-zero (every reactant species,
	// inert or not, is reduced to its elements and reassembled).
	Products *Mixture
	// FuelAirRatio is kg of fuel per kg of air (the air as given, i.e.
	// including its water vapour if humid).
	FuelAirRatio float64
	// StoichiometricFuelAirRatio is the fuel/air mass ratio, kg/kg, at
	// which exactly all oxygen is consumed.
	StoichiometricFuelAirRatio float64
	// ExcessAir is the air supplied over the stoichiometric air, as a
	// fraction: 0.1 means 10 % excess (lambda = 1.1).
	ExcessAir float64
	// ProductMolesPerFuelMole is mol of products per mol of fuel, mol/mol.
	ProductMolesPerFuelMole float64
	// ProductMassPerFuelMass is kg of products per kg of fuel, kg/kg
	// (1 + 1/FuelAirRatio).
	ProductMassPerFuelMass float64
}

// elements sums the atoms of a mixture per mole of mixture.
type elements struct{ C, H, O, N, Ar float64 }

func (m *Mixture) elements() elements {
	var e elements
	for k, a := range m.atoms {
		x := m.x[k]
		e.C += x * float64(a.C)
		e.H += x * float64(a.H)
		e.O += x * float64(a.O)
		e.N += x * float64(a.N)
		e.Ar += x * float64(a.Ar)
	}
	return e
}

// o2Demand is the O2 a mixture needs (positive) or can give (negative) per
// mole for complete combustion to CO2, H2O, N2: C + H/4 - O/2.
func (e elements) o2Demand() float64 { return e.C + e.H/4 - e.O/2 }

// StoichiometricFuelAirRatio returns the fuel/air mass ratio in kg/kg at
// which fuel burns completely with air leaving no oxygen; air nil means
// DryAir.
func StoichiometricFuelAirRatio(fuel, air *Mixture) (float64, error) {
	if air == nil {
		air = DryAir()
	}
	nst, err := stoichAir(fuel, air)
	if err != nil {
		return 0, err
	}
	return fuel.molar / (nst * air.molar), nil
}

// stoichAir returns mol of air per mol of fuel for exactly complete
// combustion.
func stoichAir(fuel, air *Mixture) (float64, error) {
	if fuel == nil {
		return 0, fmt.Errorf("idealgas: combustion: no fuel given: %w", ErrComposition)
	}
	fd := fuel.elements().o2Demand()
	if !(fd > 0) {
		return 0, fmt.Errorf("idealgas: combustion: the fuel (%v) has nothing to burn (O2 demand %g mol/mol): %w", fuel.MoleFractions(), fd, ErrComposition)
	}
	ae := air.elements()
	// Air must be an oxidiser: net O2 available, i.e. it may contain
	// combustibles only if it still has spare oxygen after burning them.
	ad := ae.o2Demand()
	if !(ad < 0) {
		return 0, fmt.Errorf("idealgas: combustion: the air (%v) carries no spare oxygen: %w", air.MoleFractions(), ErrComposition)
	}
	return fd / -ad, nil
}

// CombustionProducts burns fuel completely with air at the fuel/air mass
// ratio far in kg fuel per kg air; air nil means DryAir. The mixture must be
// lean or stoichiometric: a ratio above the stoichiometric one (oxygen
// short) returns an error wrapping ErrComposition.
//
// Stoichiometry (complete combustion; no dissociation, CO, NOx or unburnt
// fuel): per mole of fuel with n_a moles of air, the elements of fuel and
// air are summed and reassembled as
//
//	CO2 = C,  H2O = H/2,  N2 = N/2,  Ar = Ar,  O2 = (O - 2 CO2 - H2O)/2,
//
// which is the usual CxHyOz + (x + y/4 - z/2) O2 -> x CO2 + y/2 H2O per
// species. n_a = M_fuel / (far M_air). At the stoichiometric ratio the O2
// left (a rounding residue of order 1e-16) is set to exactly zero.
func CombustionProducts(fuel, air *Mixture, far float64) (*Combustion, error) {
	if math.IsNaN(far) || math.IsInf(far, 0) || !(far > 0) {
		return nil, fmt.Errorf("idealgas: combustion: fuel/air ratio %g kg/kg must be finite and > 0: %w", far, ErrComposition)
	}
	if air == nil {
		air = DryAir()
	}
	nst, err := stoichAir(fuel, air)
	if err != nil {
		return nil, err
	}
	na := fuel.molar / (far * air.molar)
	return burn(fuel, air, na, nst)
}

// CombustionProductsExcessAir burns fuel completely with (1 + excess) times
// the stoichiometric air; excess >= 0 (0.15 = 15 % excess air). See
// CombustionProducts for the stoichiometry.
func CombustionProductsExcessAir(fuel, air *Mixture, excess float64) (*Combustion, error) {
	if math.IsNaN(excess) || math.IsInf(excess, 0) {
		return nil, fmt.Errorf("idealgas: combustion: excess air %v is not finite: %w", excess, ErrComposition)
	}
	if excess < 0 {
		return nil, fmt.Errorf("idealgas: combustion: excess air %g < 0 is a rich mixture; only complete (lean) combustion is modelled: %w", excess, ErrComposition)
	}
	if air == nil {
		air = DryAir()
	}
	nst, err := stoichAir(fuel, air)
	if err != nil {
		return nil, err
	}
	return burn(fuel, air, (1+excess)*nst, nst)
}

func burn(fuel, air *Mixture, na, nst float64) (*Combustion, error) {
	fe, ae := fuel.elements(), air.elements()
	e := elements{
		C:  fe.C + na*ae.C,
		H:  fe.H + na*ae.H,
		O:  fe.O + na*ae.O,
		N:  fe.N + na*ae.N,
		Ar: fe.Ar + na*ae.Ar,
	}
	co2, h2o := e.C, e.H/2
	o2 := (e.O - 2*co2 - h2o) / 2
	// Oxygen supplied, to scale the rounding test.
	supplied := e.O / 2
	if o2 < 0 {
		if -o2 > 1e-12*supplied {
			return nil, fmt.Errorf("idealgas: combustion: rich mixture (%.6g of the stoichiometric air, %g mol O2 short per mol fuel); only complete (lean) combustion is modelled: %w", na/nst, -o2, ErrComposition)
		}
		o2 = 0
	}
	if o2 <= 1e-12*supplied {
		o2 = 0
	}
	names := []string{"CO2", "H2O", "N2", "O2", "Ar"}
	amounts := []float64{co2, h2o, e.N / 2, o2, e.Ar}
	var idx []int
	var f []float64
	total := 0.0
	for k, n := range names {
		if amounts[k] > 0 {
			i, _ := canonical(n)
			idx = append(idx, i)
			f = append(f, amounts[k])
			total += amounts[k]
		}
	}
	prod, err := newMixture("flue-gas", idx, f, MoleFraction)
	if err != nil {
		return nil, fmt.Errorf("idealgas: combustion products: %w", err)
	}
	far := fuel.molar / (na * air.molar)
	return &Combustion{
		Products:                   prod,
		FuelAirRatio:               far,
		StoichiometricFuelAirRatio: fuel.molar / (nst * air.molar),
		ExcessAir:                  na/nst - 1,
		ProductMolesPerFuelMole:    total,
		ProductMassPerFuelMass:     1 + 1/far,
	}, nil
}
