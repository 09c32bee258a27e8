package if97

// Glue to the region-3 code of this package (region3*.go, sat3*.go,
// hs*.go): region 3 from (p, T), (p, h), (p, s), the saturated phases above
// 623.15 K and the (h, s) flash.

import (
	"fmt"

	"github.com/exergywatch/exergywatch/thermo"
)

// flashPT3 returns the region-3 state at p in Pa and T in K.
func flashPT3(p, T float64) (thermo.State, error) {
	rho, err := rho3PT(p, T)
	if err != nil {
		return thermo.State{}, err
	}
	return single(region3(rho, T), 3), nil
}

// sat3Props returns the saturated liquid and vapour at T in K above
// 623.15 K from region 3.
func sat3Props(T float64) (l, v props, err error) {
	rl, rv, err := sat3(T)
	if err != nil {
		return props{}, props{}, fmt.Errorf("%s: saturated densities at T = %g K: %w", fluidName, T, err)
	}
	return region3(rl, T), region3(rv, T), nil
}

// solve3 solves a (p, h) or (p, s) flash inside region 3.
func solve3(k kind, p, y float64) (props, error) {
	var rho, T float64
	var err error
	if k == kindH {
		rho, T, err = region3PH(p, y)
	} else {
		rho, T, err = region3PS(p, y)
	}
	if err != nil {
		return props{}, err
	}
	return region3(rho, T), nil
}
