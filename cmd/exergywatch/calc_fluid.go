package main

import (
	"fmt"

	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/gerg2008"
	"github.com/exergywatch/exergywatch/thermo/helmholtz"
	"github.com/exergywatch/exergywatch/thermo/idealgas"
	"github.com/exergywatch/exergywatch/thermo/if97"
)

// calcFluid maps a config fluid name to a property model for calc. It hands
// over to thermo/fluids once that package exists.
func calcFluid(name string, comp map[string]float64) (thermo.Fluid, error) {
	noComp := func() error {
		if comp != nil {
			return fmt.Errorf("%s has a fixed composition; --composition applies to natural-gas and ideal-gas", name)
		}
		return nil
	}
	switch name {
	case "water", "steam":
		if err := noComp(); err != nil {
			return nil, err
		}
		return if97.Water{}, nil
	case "air":
		if err := noComp(); err != nil {
			return nil, err
		}
		return idealgas.DryAir(), nil
	case "ideal-gas":
		if comp == nil {
			return nil, fmt.Errorf("--composition is required (mole fractions, e.g. N2=0.78,O2=0.21,Ar=0.01)")
		}
		return idealgas.NewMixture(comp, idealgas.MoleFraction)
	case "natural-gas":
		if comp == nil {
			return nil, fmt.Errorf("--composition is required (mole fractions, e.g. CH4=0.9,C2H6=0.06,N2=0.04)")
		}
		return gerg2008.New(comp)
	case "methane", "ammonia", "r134a", "co2", "nitrogen":
		if err := noComp(); err != nil {
			return nil, err
		}
		return helmholtz.New(name)
	}
	return nil, fmt.Errorf("unknown fluid %q (water, air, ideal-gas, natural-gas, methane, ammonia, r134a, co2, nitrogen)", name)
}
