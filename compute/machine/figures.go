package machine

import (
	"math"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/thermo"
)

// FigureID names a derived figure. Definitions (state 1 inlet, 2 outlet,
// 2s isentropic outlet h(p2, s1); w actual specific shaft work, q heat
// leaving the stream per kg, both magnitudes; ṁ mass flow):
//
//   - IsentropicEfficiency: expansion eta_s = w/(h1 - h2s); compression
//     eta_s = (h2s - h1)/w. With no declared heat, w = |h2 - h1| and these are
//     the usual enthalpy forms (e.g. Çengel & Boles, Thermodynamics, §7-12;
//     ASME PTC 6 and PTC 10 use the same ratio of isentropic to actual
//     enthalpy change).
//   - PolytropicEfficiency, PolytropicHead (turbines, compressors): the
//     efficiency of the constant-efficiency path dh = v dp/eta_p
//     (compression) or dh = eta_p v dp (expansion) through the measured end
//     states; head = |∫v dp| along it. Ideal gases (the fluid reports
//     PhaseGas with p v/T the same at both ends): the exact relation for
//     variable cp obtained by integrating that path, cp dT/T = (R/eta_p)
//     dp/p, which gives eta_p = R ln(p2/p1)/(s°(T2) - s°(T1)) (compression;
//     the inverse for expansion) with s°(T2) - s°(T1) = s2 - s1 + R
//     ln(p2/p1) — closed, no approximation for any cp(T). Real fluids:
//     the Schultz method (J.M. Schultz, Trans. ASME J. Eng. Power 84 (1962)
//     69; ASME PTC 10-1997 §5): n = ln(p2/p1)/ln(v1/v2), n_s the same with
//     v2s, f = (h2s - h1)/[n_s/(n_s - 1)(p2 v2s - p1 v1)], head = f n/(n-1)
//     (p2 v2 - p1 v1). Checked against IntegratedPolytropic. With declared
//     or inferred heat the efficiency is on the shaft basis: head/w
//     (compression), w/head (expansion).
//   - SpecificWork w (J/kg): the shaft work per kg, = measured fluid power/ṁ
//     on the energy-balance or shaft-power basis, else |h2 - h1| ∓ q.
//   - IsentropicSpecificWork |h2s - h1| (J/kg).
//   - SpecificEntropyGeneration s_gen = s2 - s1 + q/T_rej (J/(kg·K)), the
//     entropy balance of an open system with heat q leaving at T_rej (e.g.
//     Bejan, Advanced Engineering Thermodynamics, ch. 3); EntropyGenerationRate
//     Ṡgen = ṁ s_gen (W/K), the primary series: it does not depend on T0.
//   - SpecificLostWork T0 s_gen and LostWorkRate T0 Ṡgen (W): the
//     Gouy–Stodola theorem (Gouy 1889, Stodola 1910; Bejan ch. 3).
//   - SecondLawEfficiency: expansion w/(ψ1 - ψ2), compression (ψ2 - ψ1)/w,
//     with flow exergy differences ψ2 - ψ1 = h2 - h1 - T0 (s2 - s1) (Kotas,
//     The Exergy Method of Thermal Plant Analysis, ch. 3). The exergy of
//     heat rejected above T0 is counted as lost.
//   - Power ṁ w (W): the power exchanged with the fluid, i.e. the shaft
//     power plus (turbine) or minus (driven machine) Spec.MechanicalLoss;
//     from a generator power P_el it is P_el/eta_gen + loss. PumpHead (pumps) (p2 - p1)/(ρ̄ g_n), ρ̄ = 2/(v1 + v2),
//     the pressure part of the total head of ISO 9906 (equal inlet and
//     outlet velocities and heights assumed).
//   - PowerMismatch (ṁ w - W_fluid)/W_fluid when a measured power exists
//     but was not used to fix the work: the cross-check of thermodynamic
//     and measured power.
//   - HeatFlow (W): on the shaft-power basis, the heat removed that the
//     measured power implies, ṁ(w - (h2 - h1)) for compression.
//   - PolytropicEfficiencyIntegrated: the constant-efficiency path found by
//     IntegratedPolytropic (only with Spec.ReferencePath; no uncertainty).
type FigureID int

// Figures.
const (
	IsentropicEfficiency FigureID = iota
	PolytropicEfficiency
	PolytropicHead
	SpecificWork
	IsentropicSpecificWork
	SpecificEntropyGeneration
	EntropyGenerationRate
	SpecificLostWork
	LostWorkRate
	SecondLawEfficiency
	Power
	PumpHead
	PowerMismatch
	HeatFlow
	PolytropicEfficiencyIntegrated
	NumFigures
)

type figureInfo struct {
	record string // compute.Record series name (snake_case, SI unit suffix)
	key    string // short key (calc --json)
	unit   string // SI unit
	eff    bool   // an efficiency (fraction) subject to the U95 limit
}

var figureInfos = [NumFigures]figureInfo{
	IsentropicEfficiency:           {"isentropic_efficiency", "isentropic_efficiency", "1", true},
	PolytropicEfficiency:           {"polytropic_efficiency", "polytropic_efficiency", "1", true},
	PolytropicHead:                 {"polytropic_head_j_per_kg", "polytropic_head", "J/kg", false},
	SpecificWork:                   {"specific_work_j_per_kg", "specific_work", "J/kg", false},
	IsentropicSpecificWork:         {"isentropic_specific_work_j_per_kg", "isentropic_specific_work", "J/kg", false},
	SpecificEntropyGeneration:      {"specific_entropy_generation_j_per_kg_k", "specific_entropy_generation", "J/(kg K)", false},
	EntropyGenerationRate:          {"entropy_generation_rate_w_per_k", "entropy_generation_rate", "W/K", false},
	SpecificLostWork:               {"specific_lost_work_j_per_kg", "specific_lost_work", "J/kg", false},
	LostWorkRate:                   {"lost_work_rate_w", "lost_work_rate", "W", false},
	SecondLawEfficiency:            {"second_law_efficiency", "second_law_efficiency", "1", true},
	Power:                          {"power_w", "power", "W", false},
	PumpHead:                       {"pump_head_m", "pump_head", "m", false},
	PowerMismatch:                  {"power_mismatch", "power_mismatch", "1", false},
	HeatFlow:                       {"heat_flow_w", "heat_flow", "W", false},
	PolytropicEfficiencyIntegrated: {"polytropic_efficiency_integrated", "polytropic_efficiency_integrated", "1", false},
}

// RecordName is the compute.Record series name of the figure, e.g.
// "entropy_generation_rate_w_per_k".
func (f FigureID) RecordName() string { return figureInfos[f].record }

// Key is the short name used by `exergywatch calc --json`, e.g.
// "entropy_generation_rate" (SI units).
func (f FigureID) Key() string { return figureInfos[f].key }

// Unit is the SI unit of the figure ("1" for fractions).
func (f FigureID) Unit() string { return figureInfos[f].unit }

func (f FigureID) String() string {
	if f < 0 || f >= NumFigures {
		return "figure?"
	}
	return figureInfos[f].key
}

// Figure is one evaluated figure.
type Figure struct {
	// Defined is false for figures that do not apply (e.g. polytropic
	// figures of a pump, rates without mass flow); the other fields are then
	// zero.
	Defined bool
	Value   float64 // SI unit of the figure; NaN when not computable (then Bad)
	U95     float64 // expanded uncertainty, k = 2, same unit; valid if HasU95
	HasU95  bool
	Quality compute.Quality
	Reasons []string
}

// PolyMethod says how the polytropic figures were found.
type PolyMethod int

// Polytropic methods.
const (
	PolyNone     PolyMethod = iota // pumps
	PolyIdealGas                   // exact ideal-gas relation with variable cp
	PolySchultz                    // Schultz (ASME PTC 10) for real fluids
)

func (m PolyMethod) String() string {
	switch m {
	case PolyIdealGas:
		return "ideal_gas_exact"
	case PolySchultz:
		return "schultz"
	}
	return "none"
}

// Result is one evaluation.
type Result struct {
	Kind  Kind
	Fluid string // fluid config name
	// Inlet, Outlet and IsentropicOutlet (p2, s1) are the states.
	Inlet, Outlet, IsentropicOutlet thermo.State
	Figures                         [NumFigures]Figure
	PolytropicMethod                PolyMethod
	// SchultzFactor is f of the Schultz method (1 for an ideal gas with
	// constant cp); 0 when not used.
	SchultzFactor float64
	T0            float64 // dead-state temperature used, K
	// Quality is the worst quality of the figures; Reasons the union of
	// their reason codes in a stable order.
	Quality compute.Quality
	Reasons []string
	// Notes explain the reasons for a person (one sentence each).
	Notes []string
	// SensitivityAge says where the sensitivity coefficients behind the
	// U95s (and Sensitivity) come from, in evaluations: 0 when they were
	// found by central differences at these inputs (always so from
	// Evaluate); n > 0 when EvaluateWith reused those of an anchor
	// evaluation n evaluations back at a nearby operating point (see
	// Sensitivities). The U95s use the current inputs' uncertainties
	// either way.
	SensitivityAge int
	// prop is the propagation result; nil without uncertainty.
	prop *propagation
}

// Figure returns one figure.
func (r *Result) Figure(id FigureID) Figure { return r.Figures[id] }

// Sensitivity returns d(figure)/d(input) from the uncertainty propagation,
// input named as in InputNames ("p1", "T1", "h1", "x1", "p2", "T2", "x2",
// "flow", "power", "heat", "drive_efficiency"), in SI units (e.g. 1/K for an
// efficiency and a temperature). ok is false when the input had no
// uncertainty or no propagation was done. With SensitivityAge > 0 it is
// the reused coefficient of the anchor evaluation.
func (r *Result) Sensitivity(id FigureID, input string) (float64, bool) {
	if r.prop == nil {
		return 0, false
	}
	for i, n := range inputNames {
		if n == input {
			c := r.prop.sens[id][i]
			if c == 0 || math.IsNaN(c) {
				return 0, false
			}
			return c, true
		}
	}
	return 0, false
}

// InputNames lists the input names used by Sensitivity and in notes.
func InputNames() []string { return append([]string(nil), inputNames[:]...) }

// Record converts the result to a compute.Record. Every defined figure is
// included; a Bad figure carries NaN as its value and no U95, so that it
// cannot pass as a plain number (sinks write its quality and reasons).
func (r *Result) Record(t time.Time, site, machineID string) compute.Record {
	rec := compute.Record{
		Time:        t.UTC(),
		Site:        site,
		Machine:     machineID,
		MachineKind: r.Kind.String(),
		Quality:     r.Quality,
		Reasons:     append([]string(nil), r.Reasons...),
	}
	for id := FigureID(0); id < NumFigures; id++ {
		f := r.Figures[id]
		if !f.Defined {
			continue
		}
		cf := compute.Figure{
			Name:    id.RecordName(),
			Value:   f.Value,
			U95:     f.U95,
			HasU95:  f.HasU95,
			Quality: f.Quality,
			Reasons: append([]string(nil), f.Reasons...),
		}
		if f.Quality == compute.QualityBad {
			cf.Value, cf.U95, cf.HasU95 = math.NaN(), 0, false
		}
		rec.Figures = append(rec.Figures, cf)
	}
	return rec
}

// BadRecord is the record of an evaluation that failed with err (see
// ReasonCode): quality Bad, the reason code, no figures.
func BadRecord(t time.Time, site, machineID string, kind Kind, err error) compute.Record {
	code := ReasonCode(err)
	if code == "" {
		code = ReasonModelError
	}
	return compute.Record{
		Time: t.UTC(), Site: site, Machine: machineID, MachineKind: kind.String(),
		Quality: compute.QualityBad, Reasons: []string{code},
	}
}
