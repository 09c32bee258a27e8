// Package thermo defines the property-model API shared by every fluid in
// exergywatch: a thermodynamic State computed from one of a fixed set of input
// pairs, the Fluid interface that each property model implements, and the
// typed errors that callers branch on.
//
// Units are SI throughout: pressure in Pa (absolute), temperature in K,
// specific volume in m3/kg, density in kg/m3, specific energies in J/kg,
// specific entropy and heat capacities in J/(kg·K), speed of sound in m/s.
//
// thermo and its sub-packages import nothing else of this module; the
// implementations live in sub-packages (thermo/if97, thermo/idealgas,
// thermo/helmholtz, thermo/gerg2008) and thermo/fluids maps a config name to
// one of them.
package thermo

import (
	"errors"
	"fmt"
	"math"
)

// Pair names the two independent properties that fix a state.
type Pair int

// The input pairs. The argument order of Fluid.Flash follows the name:
// PT takes (p, T), PH takes (p, h), and so on.
const (
	PT Pair = iota + 1 // pressure Pa, temperature K
	PH                 // pressure Pa, specific enthalpy J/kg
	PS                 // pressure Pa, specific entropy J/(kg·K)
	PX                 // pressure Pa, vapour mass fraction (quality) 0..1
	TX                 // temperature K, vapour mass fraction (quality) 0..1
	HS                 // specific enthalpy J/kg, specific entropy J/(kg·K)
)

var pairNames = [...]string{"", "p,T", "p,h", "p,s", "p,x", "T,x", "h,s"}

func (p Pair) String() string {
	if p < PT || p > HS {
		return fmt.Sprintf("Pair(%d)", int(p))
	}
	return pairNames[p]
}

// Phase classifies a state.
type Phase int

// Phases. Gas is used by models that do not distinguish vapour from
// supercritical fluid (ideal-gas mixtures).
const (
	PhaseUnknown       Phase = iota
	PhaseLiquid              // compressed or saturated liquid, T below the critical temperature
	PhaseVapour              // superheated or saturated vapour, p below the critical pressure
	PhaseTwoPhase            // liquid and vapour in equilibrium, 0 <= x <= 1
	PhaseSupercritical       // above the critical pressure and temperature
	PhaseGas                 // a gas model without a phase boundary (ideal gas, mixtures)
)

var phaseNames = [...]string{"unknown", "liquid", "vapour", "two-phase", "supercritical", "gas"}

func (p Phase) String() string {
	if p < 0 || int(p) >= len(phaseNames) {
		return fmt.Sprintf("Phase(%d)", int(p))
	}
	return phaseNames[p]
}

// State is a thermodynamic state. Every field is finite when returned with a
// nil error.
type State struct {
	P   float64 // absolute pressure, Pa
	T   float64 // temperature, K
	V   float64 // specific volume, m3/kg
	Rho float64 // density, kg/m3
	U   float64 // specific internal energy, J/kg
	H   float64 // specific enthalpy, J/kg
	S   float64 // specific entropy, J/(kg·K)
	// Cp, Cv and W are the isobaric and isochoric specific heat capacities in
	// J/(kg·K) and the speed of sound in m/s. They are not defined inside the
	// two-phase region; there they are 0 and HasDerivatives is false.
	Cp, Cv, W      float64
	HasDerivatives bool
	// X is the vapour mass fraction (quality) 0..1 when Phase is
	// PhaseTwoPhase (0 and 1 are the saturated liquid and vapour ends);
	// otherwise it is 0 and has no meaning. Use Quality.
	X     float64
	Phase Phase
	// Region is the IAPWS-IF97 region (1..5) for water states, 0 otherwise.
	Region int
}

// Quality returns the vapour mass fraction and whether the state is two-phase.
func (s State) Quality() (x float64, ok bool) {
	return s.X, s.Phase == PhaseTwoPhase
}

// Fluid is a property model. Implementations must be safe for concurrent use
// by several goroutines.
type Fluid interface {
	// Name is the config name of the fluid, e.g. "water".
	Name() string
	// Flash returns the state fixed by the pair (a, b), in the units given by
	// the Pair constants. Inputs outside the model's range return an error
	// wrapping ErrOutOfRange (usually a *RangeError); pairs the model does
	// not support return an error wrapping ErrUnsupported; a non-finite
	// input returns ErrNotFinite. Flash never panics on any float input.
	Flash(pair Pair, a, b float64) (State, error)
}

// Saturation is implemented by fluids with a vapour-liquid boundary.
type Saturation interface {
	// SatT returns the saturation temperature in K at pressure p in Pa.
	SatT(p float64) (float64, error)
	// SatP returns the saturation pressure in Pa at temperature T in K.
	SatP(T float64) (float64, error)
}

// SaturationSlope is implemented by fluids that give the slope of their
// saturation line together with the saturation temperature, so that a
// caller needing dTsat/dp (e.g. to turn a pressure uncertainty into one of
// Tsat) does not take a difference of two SatT calls.
type SaturationSlope interface {
	// SatTSlope returns the saturation temperature T in K at pressure p in
	// Pa and the slope of the saturation line dT/dp in K/Pa at p. Errors
	// are those of SatT.
	SatTSlope(p float64) (T, dTdp float64, err error)
}

// Critical is implemented by fluids with a critical point.
type Critical interface {
	// CriticalPoint returns the critical temperature (K), pressure (Pa) and
	// density (kg/m3) of the model.
	CriticalPoint() (T, p, rho float64)
}

// Sentinel errors. Test with errors.Is.
var (
	// ErrOutOfRange: an input lies outside the validity range of the model.
	ErrOutOfRange = errors.New("thermo: input out of range")
	// ErrUnsupported: the model does not support the requested input pair.
	ErrUnsupported = errors.New("thermo: input pair not supported")
	// ErrNotFinite: an input is NaN or infinite.
	ErrNotFinite = errors.New("thermo: input is not a finite number")
	// ErrNoConvergence: an iterative solution did not converge. This is a
	// model failure, not a plant fault; it is reported, never guessed over.
	ErrNoConvergence = errors.New("thermo: iteration did not converge")
	// ErrPhase: the input lies in a phase the model or caller does not
	// accept (e.g. a two-phase state from a gas-only equation of state).
	ErrPhase = errors.New("thermo: state in an unsupported phase")
)

// RangeError says which bound of which quantity was crossed. It wraps
// ErrOutOfRange.
type RangeError struct {
	Fluid    string  // config name of the fluid model
	Quantity string  // "p", "T", "h", "s", "x", ...
	Value    float64 // the offending value, SI units
	Limit    float64 // the bound that was crossed, SI units
	Above    bool    // true if Value exceeds an upper bound
	Unit     string  // SI unit of Value and Limit, e.g. "Pa"
	Context  string  // optional, e.g. "IF97 region 5 applies up to 50 MPa"
}

func (e *RangeError) Error() string {
	rel := "below the minimum"
	if e.Above {
		rel = "above the maximum"
	}
	msg := fmt.Sprintf("%s: %s = %g %s is %s %g %s", e.Fluid, e.Quantity, e.Value, e.Unit, rel, e.Limit, e.Unit)
	if e.Context != "" {
		msg += " (" + e.Context + ")"
	}
	return msg
}

// Unwrap makes errors.Is(err, ErrOutOfRange) true.
func (e *RangeError) Unwrap() error { return ErrOutOfRange }

// CheckFinite returns an error wrapping ErrNotFinite naming the first
// argument that is NaN or infinite. names and values are parallel.
func CheckFinite(fluid string, names []string, values ...float64) error {
	for i, v := range values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			n := "input"
			if i < len(names) {
				n = names[i]
			}
			return fmt.Errorf("%s: %s = %v: %w", fluid, n, v, ErrNotFinite)
		}
	}
	return nil
}

// Below returns a RangeError for value below limit.
func Below(fluid, quantity, unit string, value, limit float64, context string) *RangeError {
	return &RangeError{Fluid: fluid, Quantity: quantity, Value: value, Limit: limit, Unit: unit, Context: context}
}

// Above returns a RangeError for value above limit.
func Above(fluid, quantity, unit string, value, limit float64, context string) *RangeError {
	return &RangeError{Fluid: fluid, Quantity: quantity, Value: value, Limit: limit, Above: true, Unit: unit, Context: context}
}

// Finite reports whether every field of the state is finite. Implementations
// call it before returning a state; a non-finite field is a model bug that
// must surface as an error, never reach a caller.
func (s State) Finite() bool {
	for _, v := range [...]float64{s.P, s.T, s.V, s.Rho, s.U, s.H, s.S, s.Cp, s.Cv, s.W, s.X} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}
