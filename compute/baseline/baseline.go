// Package baseline prices the drift of a machine from its baseline
// (expected, e.g. as-new or after-overhaul) isentropic efficiency.
//
// For the same duty (same mass flow and the same end pressures, hence the
// same isentropic power Ps = ṁ·w_s):
//
//	compressor or pump:  P = Ps/η,  so at the baseline P_b = Ps/η_b and the
//	                     extra power drawn is ΔP = P − P_b = P (1 − η/η_b);
//	turbine:             P = Ps·η,  so at the baseline P_b = Ps·η_b and the
//	                     output lost is ΔP = P_b − P = P (η_b/η − 1).
//
// ΔP > 0 means the machine costs that much power more than at its baseline
// (definitions of isentropic efficiency as in ASME PTC 6 / PTC 10; the
// same-duty comparison is common practice, no source).
package baseline

import (
	"errors"
	"math"
)

// ErrInput is returned for efficiencies outside (0, 1.5], a non-positive
// power or non-finite inputs.
var ErrInput = errors.New("baseline: inputs out of range")

// Expansion says whether the machine expands (turbine) or compresses.
type Expansion bool

// DegradationPower returns ΔP in W, the power the machine costs beyond its
// baseline efficiency etaBase at the measured efficiency eta and fluid
// power p (W, magnitude), with a first-order U95 from the U95s of eta and
// p (treated as independent: an approximation, since both come from the
// same measurements; it overstates U95 when they are positively
// correlated).
func DegradationPower(expansion Expansion, eta, u95Eta, p, u95P, etaBase float64) (dp, u95 float64, err error) {
	for _, v := range []float64{eta, u95Eta, p, u95P, etaBase} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return 0, 0, ErrInput
		}
	}
	if eta <= 0 || eta > 1.5 || etaBase <= 0 || etaBase > 1.5 || p < 0 || u95Eta < 0 || u95P < 0 {
		return 0, 0, ErrInput
	}
	var dEta, dP float64 // sensitivities ∂ΔP/∂η, ∂ΔP/∂P
	if expansion {
		dp = p * (etaBase/eta - 1)
		dEta = -p * etaBase / (eta * eta)
		dP = etaBase/eta - 1
	} else {
		dp = p * (1 - eta/etaBase)
		dEta = -p / etaBase
		dP = 1 - eta/etaBase
	}
	u95 = math.Hypot(dEta*u95Eta, dP*u95P)
	return dp, u95, nil
}
