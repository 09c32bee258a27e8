package main

import (
	"fmt"

	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/idealgas"
)

// calcFluid maps a config fluid name to a property model for calc. It will
// hand over to thermo/fluids once that package exists.
func calcFluid(name string, comp map[string]float64) (thermo.Fluid, error) {
	switch name {
	case "air":
		if comp != nil {
			return nil, fmt.Errorf("dry air has a fixed composition; use --fluid ideal-gas with --composition")
		}
		return idealgas.DryAir(), nil
	case "ideal-gas":
		if comp == nil {
			return nil, fmt.Errorf("--composition is required (mole fractions, e.g. N2=0.78,O2=0.21,Ar=0.01)")
		}
		return idealgas.NewMixture(comp, idealgas.MoleFraction)
	}
	return nil, fmt.Errorf("unknown fluid %q", name)
}
