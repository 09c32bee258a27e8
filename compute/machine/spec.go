// Package machine evaluates single-stream turbines, pumps and compressors
// (fans and blowers are compressors) from two measured flow-path states:
// isentropic and polytropic efficiency, specific work, entropy generation,
// lost work (Gouy–Stodola), second-law efficiency and power, each with an
// expanded uncertainty (U95, k = 2) and a quality grade with machine-readable
// reasons.
//
// The package depends only on the thermo.Fluid interface (and the optional
// thermo.Saturation and thermo.Critical interfaces), never on a concrete
// property model. Everything is SI: Pa (absolute), K, J/kg, J/(kg·K), kg/s,
// W, m, fractions.
//
// Sign conventions: specific work, isentropic specific work, polytropic head,
// power and heat are magnitudes (positive for a normally working machine);
// work is what the turbine delivers to its shaft or what the shaft delivers
// to the pump or compressor. Heat flow is heat leaving the stream (casing
// loss, oil or jacket cooling), >= 0.
//
// Figures are advisory performance indicators, not inputs to protection.
package machine

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/exergywatch/exergywatch/compute/uncert"
	"github.com/exergywatch/exergywatch/thermo"
)

// Kind is the machine kind.
type Kind int

// Machine kinds.
const (
	Turbine    Kind = iota + 1 // steam or gas expander; work leaves through the shaft
	Pump                       // liquid; polytropic figures are not defined
	Compressor                 // gas compressor, also fans and blowers
)

func (k Kind) String() string {
	switch k {
	case Turbine:
		return "turbine"
	case Pump:
		return "pump"
	case Compressor:
		return "compressor"
	}
	return fmt.Sprintf("Kind(%d)", int(k))
}

// ParseKind reads "turbine" (or "expander"), "pump", "compressor" (or "fan",
// "blower").
func ParseKind(s string) (Kind, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "turbine", "expander":
		return Turbine, nil
	case "pump":
		return Pump, nil
	case "compressor", "fan", "blower":
		return Compressor, nil
	}
	return 0, fmt.Errorf("%w: unknown machine kind %q (want turbine, pump, compressor, fan or blower)", ErrSpec, s)
}

// StateMethod says how a flow-path state is fixed.
type StateMethod int

// State methods. The inlet accepts ByPT, ByPX and ByPH; the outlet accepts
// ByPT, ByPX and ByEnergyBalance.
const (
	ByPT            StateMethod = iota + 1 // pressure and temperature
	ByPX                                   // pressure and vapour mass fraction (wet steam)
	ByPH                                   // pressure and specific enthalpy
	ByEnergyBalance                        // outlet pressure, plus h2 = h1 ∓ (W ± Q)/ṁ from measured power and mass flow
)

func (m StateMethod) String() string {
	switch m {
	case ByPT:
		return "p,T"
	case ByPX:
		return "p,x"
	case ByPH:
		return "p,h"
	case ByEnergyBalance:
		return "energy balance"
	}
	return fmt.Sprintf("StateMethod(%d)", int(m))
}

// PowerSource says which measured power exists.
type PowerSource int

// Power sources.
const (
	NoPower         PowerSource = iota
	ShaftPower                  // Inputs.ShaftPower: mechanical power at the coupling, W
	ElectricalPower             // Inputs.ElectricalPower at the generator or motor terminals, W, with Spec.DriveEfficiency
)

// Defaults (common practice, no source unless stated).
const (
	// DefaultT0 is the dead-state (environment) temperature, K: 25 °C, the
	// standard reference temperature of exergy tables (e.g. Szargut).
	DefaultT0 = 298.15
	// DefaultSaturationMargin is the superheat/subcooling margin, K, within
	// which a (p,T) state is flagged as near saturation.
	DefaultSaturationMargin = 5.0
	// DefaultEfficiencyU95Limit is the largest U95 of an efficiency (as a
	// fraction, 0.05 = 5 points) for which the method is still usable.
	DefaultEfficiencyU95Limit = 0.05
	// DefaultPathSteps is the number of RK4 steps in ln p of the integrated
	// constant-efficiency reference path.
	DefaultPathSteps = 200
	// StandardGravity g_n = 9.80665 m/s2 (3rd CGPM, 1901), for pump head.
	StandardGravity = 9.80665
	// minFixBand is the smallest |T - Tsat| band, K, inside which a (p,T)
	// state is refused as not fixed, whatever the stated uncertainty: about
	// the best a plant temperature measurement achieves (common practice, no
	// source).
	minFixBand = 0.1
)

// Spec describes one machine and how its states and work are measured. The
// zero values of the optional fields select the defaults.
type Spec struct {
	Kind  Kind
	Fluid thermo.Fluid
	// Inlet is ByPT, ByPX or ByPH; Outlet is ByPT, ByPX or ByEnergyBalance.
	Inlet, Outlet StateMethod
	// Power says which measured power exists (needed by ByEnergyBalance
	// and WorkFromPower; otherwise used for the power cross-check).
	Power PowerSource
	// DriveEfficiency is the generator (turbine) or motor (pump,
	// compressor) efficiency, fraction 0..1, for ElectricalPower:
	// turbine shaft power = P_el/eta; driven-machine shaft power = P_el*eta.
	DriveEfficiency float64
	// MechanicalLoss is the bearing, seal and gear loss between the
	// coupling and the fluid, W: fluid power = shaft + loss (turbine),
	// shaft - loss (pump, compressor).
	MechanicalLoss float64
	// WorkFromPower selects the shaft-power basis with a (p,T) or (p,x)
	// outlet: the actual work is the measured power per kg, and the
	// difference from the enthalpy change is heat removed (e.g. an
	// oil-cooled compressor), counted in entropy generation at
	// HeatRejectionT and reported as HeatFlow.
	WorkFromPower bool
	// T0 is the dead-state temperature of the site, K (default 298.15 K).
	T0 float64
	// HeatRejectionT is the temperature, K, at which heat leaving the
	// stream is rejected (casing surface, cooling water); default T0.
	HeatRejectionT float64
	// SaturationMargin is the superheat/subcooling margin, K, for the
	// near-saturation flag of (p,T) states (default 5 K; negative disables
	// the flag but never the refusal of a state that cannot be fixed).
	SaturationMargin float64
	// EfficiencyU95Limit is the largest acceptable U95 of an efficiency,
	// fraction (default 0.05 = 5 points).
	EfficiencyU95Limit float64
	// ReferencePath also computes the numerically integrated
	// constant-efficiency polytropic path (PolytropicEfficiencyIntegrated;
	// slow, no uncertainty). Turbines and compressors only.
	ReferencePath bool
	// PathSteps is the number of integration steps (default 200).
	PathSteps int
	// Uncertainty holds the standard uncertainties of the inputs.
	Uncertainty Uncertainty
}

// Std is a standard uncertainty (k = 1): u = sqrt(Abs^2 + (Rel*|reading|)^2).
type Std struct {
	Abs float64 // in the SI unit of the input
	Rel float64 // fraction of the reading
}

func (s Std) of(v float64) float64 { return math.Hypot(s.Abs, s.Rel*math.Abs(v)) }

func (s Std) zero() bool { return s.Abs == 0 && s.Rel == 0 }

// Uncertainty holds per-input standard uncertainties (k = 1). A temperature
// class adds (root-sum-square) its tolerance as a rectangular half-width,
// u = tol/sqrt(3) (see uncert.StdFromTolerance), to any direct value.
type Uncertainty struct {
	P1, P2           Std // Pa
	T1, T2           Std // K
	T1Class, T2Class uncert.TempClass
	H1               Std // J/kg
	X1, X2           Std // fraction
	MassFlow         Std // kg/s
	Power            Std // W, the measured power (shaft or electrical)
	HeatFlow         Std // W, the declared heat flow
	DriveEfficiency  Std // fraction
	// CorrT and CorrP are the correlation coefficients (-1..1) between the
	// errors of the inlet and outlet temperatures (matched sensors
	// calibrated together) and pressures.
	CorrT, CorrP float64
}

// IsZero reports whether no uncertainty is given.
func (u *Uncertainty) IsZero() bool {
	for _, s := range [...]Std{u.P1, u.P2, u.T1, u.T2, u.H1, u.X1, u.X2, u.MassFlow, u.Power, u.HeatFlow, u.DriveEfficiency} {
		if !s.zero() {
			return false
		}
	}
	return u.T1Class.IsZero() && u.T2Class.IsZero()
}

// Inputs are the measured values of one evaluation, SI units. Which fields
// are used follows the Spec's methods; unused fields are ignored.
type Inputs struct {
	P1 float64 // inlet absolute pressure, Pa
	T1 float64 // inlet temperature, K (ByPT)
	H1 float64 // inlet specific enthalpy, J/kg (ByPH)
	X1 float64 // inlet vapour mass fraction 0..1 (ByPX)
	P2 float64 // outlet absolute pressure, Pa
	T2 float64 // outlet temperature, K (ByPT)
	X2 float64 // outlet vapour mass fraction 0..1 (ByPX)
	// MassFlow is the mass flow, kg/s; 0 when unknown (rates are then not
	// computed). Required by ByEnergyBalance, WorkFromPower and HeatFlow.
	MassFlow float64
	// ShaftPower is the measured shaft power, W, magnitude (Spec.Power ==
	// ShaftPower).
	ShaftPower float64
	// ElectricalPower is the measured generator or motor power, W,
	// magnitude (Spec.Power == ElectricalPower).
	ElectricalPower float64
	// HeatFlow is the declared heat leaving the stream, W, >= 0: a turbine
	// casing loss or a compressor cooling duty.
	HeatFlow float64
	// Stale names inputs whose source values are stale (e.g. "T2"); the
	// result is then at best uncertain.
	Stale []string
	// Doubtful names inputs their source marked uncertain.
	Doubtful []string
}

// Errors callers branch on (errors.Is). State failures come as *StateError.
var (
	ErrSpec  = errors.New("machine: invalid machine specification")
	ErrInput = errors.New("machine: invalid input")
	// ErrStateNotFixed: a (p,T) state lies within the measurement
	// uncertainty of saturation, where p and T do not fix the state. Use
	// (p,x) or an energy balance.
	ErrStateNotFixed = errors.New("state cannot be fixed by (p,T)")
)

// StateError is a flow-path state that could not be computed.
type StateError struct {
	Port string // "inlet", "outlet" or "isentropic outlet"
	Pair thermo.Pair
	A, B float64 // the pair's values, SI
	Err  error
}

func (e *StateError) Error() string {
	return fmt.Sprintf("%s state from (%s) = (%g, %g): %v", e.Port, e.Pair, e.A, e.B, e.Err)
}

func (e *StateError) Unwrap() error { return e.Err }

// Reason codes (machine-readable; stable names used by sinks and alerts).
const (
	ReasonStaleInput                = "stale_input"
	ReasonDoubtfulInput             = "doubtful_input"
	ReasonNearSaturationInlet       = "near_saturation_inlet"
	ReasonNearSaturationOutlet      = "near_saturation_outlet"
	ReasonEfficiencyAboveOne        = "efficiency_above_one"
	ReasonNegativeEfficiency        = "negative_efficiency"
	ReasonNegativeEntropyGeneration = "negative_entropy_generation"
	ReasonHeatAdded                 = "heat_added"
	ReasonInstrumentSuspect         = "instrument_suspect"
	ReasonUncertaintyAboveLimit     = "uncertainty_above_limit"
	ReasonUncertaintyNotEvaluated   = "uncertainty_not_evaluated"
	ReasonPowerMismatch             = "power_mismatch"
	ReasonPolytropicTwoPhase        = "polytropic_two_phase"
	ReasonNotComputable             = "not_computable"
	ReasonOutOfRange                = "out_of_range"
	ReasonStateNotFixed             = "state_not_fixed"
	ReasonNoConvergence             = "no_convergence"
	ReasonInvalidInput              = "invalid_input"
	ReasonModelError                = "model_error"
)

// ReasonCode maps an error of Evaluate to a reason code for a record.
func ReasonCode(err error) string {
	switch {
	case err == nil:
		return ""
	case errors.Is(err, ErrStateNotFixed):
		return ReasonStateNotFixed
	case errors.Is(err, thermo.ErrOutOfRange), errors.Is(err, uncert.ErrClass):
		return ReasonOutOfRange
	case errors.Is(err, thermo.ErrNoConvergence):
		return ReasonNoConvergence
	case errors.Is(err, ErrInput), errors.Is(err, ErrSpec), errors.Is(err, thermo.ErrNotFinite):
		return ReasonInvalidInput
	}
	return ReasonModelError
}

// resolved is a Spec with defaults applied and checked.
type resolved struct {
	Spec
	sat  thermo.Saturation
	pc   float64 // critical pressure, Pa; +Inf when unknown
	turb bool
	// memo holds the nominal states while recording is false (see flash).
	memo      [nPorts]memo
	recording bool
	full      bool // memo disabled (tests: the unstaged reference)
	flashes   int  // property-model flashes run
}

func resolve(s *Spec) (*resolved, error) {
	if s == nil {
		return nil, fmt.Errorf("%w: nil spec", ErrSpec)
	}
	r := &resolved{Spec: *s, pc: math.Inf(1)}
	if r.Kind < Turbine || r.Kind > Compressor {
		return nil, fmt.Errorf("%w: machine kind %v", ErrSpec, r.Kind)
	}
	r.turb = r.Kind == Turbine
	if r.Fluid == nil {
		return nil, fmt.Errorf("%w: no fluid", ErrSpec)
	}
	switch r.Inlet {
	case ByPT, ByPX, ByPH:
	default:
		return nil, fmt.Errorf("%w: inlet state method %v (want p,T, p,x or p,h)", ErrSpec, r.Inlet)
	}
	switch r.Outlet {
	case ByPT, ByPX, ByEnergyBalance:
	default:
		return nil, fmt.Errorf("%w: outlet state method %v (want p,T, p,x or energy balance)", ErrSpec, r.Outlet)
	}
	if r.Power < NoPower || r.Power > ElectricalPower {
		return nil, fmt.Errorf("%w: power source %d", ErrSpec, r.Power)
	}
	if (r.Outlet == ByEnergyBalance || r.WorkFromPower) && r.Power == NoPower {
		return nil, fmt.Errorf("%w: the outlet energy balance and the shaft-power basis need a measured shaft or electrical power", ErrSpec)
	}
	if r.WorkFromPower && r.Outlet == ByEnergyBalance {
		return nil, fmt.Errorf("%w: the shaft-power basis needs a measured outlet state, not an energy balance", ErrSpec)
	}
	if r.Power == ElectricalPower && !(r.DriveEfficiency > 0 && r.DriveEfficiency <= 1) {
		return nil, fmt.Errorf("%w: drive (generator or motor) efficiency %v must be in (0, 1]", ErrSpec, r.DriveEfficiency)
	}
	if !finite(r.MechanicalLoss) || r.MechanicalLoss < 0 {
		return nil, fmt.Errorf("%w: mechanical loss %v W must be finite and >= 0", ErrSpec, r.MechanicalLoss)
	}
	if r.T0 == 0 {
		r.T0 = DefaultT0
	}
	if !finite(r.T0) || r.T0 <= 0 {
		return nil, fmt.Errorf("%w: dead-state temperature T0 = %v K", ErrSpec, r.T0)
	}
	if r.HeatRejectionT == 0 {
		r.HeatRejectionT = r.T0
	}
	if !finite(r.HeatRejectionT) || r.HeatRejectionT <= 0 {
		return nil, fmt.Errorf("%w: heat rejection temperature %v K", ErrSpec, r.HeatRejectionT)
	}
	if r.SaturationMargin == 0 {
		r.SaturationMargin = DefaultSaturationMargin
	}
	if !finite(r.SaturationMargin) {
		return nil, fmt.Errorf("%w: saturation margin %v K", ErrSpec, r.SaturationMargin)
	}
	if r.EfficiencyU95Limit == 0 {
		r.EfficiencyU95Limit = DefaultEfficiencyU95Limit
	}
	if !finite(r.EfficiencyU95Limit) || r.EfficiencyU95Limit < 0 {
		return nil, fmt.Errorf("%w: efficiency U95 limit %v", ErrSpec, r.EfficiencyU95Limit)
	}
	if r.PathSteps == 0 {
		r.PathSteps = DefaultPathSteps
	}
	if r.PathSteps < 4 || r.PathSteps > 100000 {
		return nil, fmt.Errorf("%w: path steps %d (want 4..100000)", ErrSpec, r.PathSteps)
	}
	u := &r.Uncertainty
	for _, c := range [...]float64{u.CorrT, u.CorrP} {
		if !finite(c) || c < -1 || c > 1 {
			return nil, fmt.Errorf("%w: correlation coefficient %v outside [-1, 1]", ErrSpec, c)
		}
	}
	for _, s := range [...]Std{u.P1, u.P2, u.T1, u.T2, u.H1, u.X1, u.X2, u.MassFlow, u.Power, u.HeatFlow, u.DriveEfficiency} {
		if !finite(s.Abs) || !finite(s.Rel) || s.Abs < 0 || s.Rel < 0 {
			return nil, fmt.Errorf("%w: standard uncertainty %+v must be finite and >= 0", ErrSpec, s)
		}
	}
	if sat, ok := r.Fluid.(thermo.Saturation); ok {
		r.sat = sat
		if c, ok := r.Fluid.(thermo.Critical); ok {
			_, pc, _ := c.CriticalPoint()
			if pc > 0 {
				r.pc = pc
			}
		}
	}
	return r, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
