package machine

import (
	"fmt"
	"math"
	"slices"

	"github.com/exergywatch/exergywatch/compute"
)

// Tolerances for checks without an uncertainty band (rounding of the
// property models; common practice, no source).
const (
	sgenRoundTol     = 1e-6 // J/(kg·K)
	effRoundTol      = 1e-9 // fraction
	defaultPowerBand = 0.02 // relative power mismatch accepted without U95
)

// grade sets the quality and reasons of every figure and of the result.
//
// Rules (each adds its reason code to the figure):
//   - stale or doubtful inputs, a (p,T) state within the saturation margin:
//     every figure at best uncertain;
//   - a figure that could not be computed (NaN): bad, not_computable;
//   - uncertainty asked for but not evaluable: uncertain;
//   - an efficiency above 1 or below 0: uncertain while the U95 band still
//     reaches the physical range, bad and instrument_suspect beyond it;
//   - negative entropy generation: the same rule, for the entropy, lost-work
//     and second-law figures;
//   - an efficiency whose U95 exceeds Spec.EfficiencyU95Limit: bad,
//     uncertainty_above_limit (the method is unusable with these instruments);
//   - thermodynamic vs measured power differing by more than U95 (2 % without
//     uncertainty): uncertain, power_mismatch;
//   - Schultz polytropic figures on a path that touches the two-phase
//     region: uncertain, polytropic_two_phase;
//   - a negative inferred heat flow on the shaft-power basis beyond U95: the
//     measured power is below the enthalpy rise: bad, instrument_suspect.
func (c *resolved) grade(res *Result, in *Inputs, wantU, nearIn, nearOut bool) {
	var base []string
	if len(in.Stale) > 0 {
		base = append(base, ReasonStaleInput)
		res.Notes = append(res.Notes, fmt.Sprintf("stale inputs: %v", in.Stale))
	}
	if len(in.Doubtful) > 0 {
		base = append(base, ReasonDoubtfulInput)
		res.Notes = append(res.Notes, fmt.Sprintf("inputs marked uncertain by their source: %v", in.Doubtful))
	}
	if nearIn {
		base = append(base, ReasonNearSaturationInlet)
		res.Notes = append(res.Notes, fmt.Sprintf("the inlet (p,T) is within %g K of saturation: a small temperature error moves the state a long way", c.SaturationMargin))
	}
	if nearOut {
		base = append(base, ReasonNearSaturationOutlet)
		res.Notes = append(res.Notes, fmt.Sprintf("the outlet (p,T) is within %g K of saturation: the outlet may be wet; prefer an energy balance", c.SaturationMargin))
	}
	F := &res.Figures
	set := func(id FigureID, q compute.Quality, reason string) {
		f := &F[id]
		if !f.Defined {
			return
		}
		f.Quality = compute.Worse(f.Quality, q)
		if reason != "" && !slices.Contains(f.Reasons, reason) {
			f.Reasons = append(f.Reasons, reason)
		}
	}
	band := func(id FigureID) float64 {
		if F[id].HasU95 {
			return F[id].U95
		}
		return 0
	}
	for id := range NumFigures {
		f := &F[id]
		if !f.Defined {
			continue
		}
		for _, r := range base {
			set(id, compute.QualityUncertain, r)
		}
		if math.IsNaN(f.Value) {
			set(id, compute.QualityBad, ReasonNotComputable)
			continue
		}
		if wantU && !f.HasU95 && id != PolytropicEfficiencyIntegrated {
			set(id, compute.QualityUncertain, ReasonUncertaintyNotEvaluated)
		}
	}
	// Efficiencies.
	for _, id := range [...]FigureID{IsentropicEfficiency, PolytropicEfficiency, SecondLawEfficiency, PolytropicEfficiencyIntegrated} {
		f := &F[id]
		if !f.Defined || math.IsNaN(f.Value) {
			continue
		}
		b := band(id) + effRoundTol
		switch {
		case f.Value > 1 && f.Value-b > 1:
			set(id, compute.QualityBad, ReasonEfficiencyAboveOne)
			set(id, compute.QualityBad, ReasonInstrumentSuspect)
			res.Notes = append(res.Notes, fmt.Sprintf("%s = %.4f is above 1 beyond its uncertainty: an instrument is suspect (e.g. a gauge pressure read as absolute, a wet outlet read by temperature), not the machine", id, f.Value))
		case f.Value > 1+effRoundTol:
			set(id, compute.QualityUncertain, ReasonEfficiencyAboveOne)
		case f.Value < 0 && f.Value+b < 0:
			set(id, compute.QualityBad, ReasonNegativeEfficiency)
			set(id, compute.QualityBad, ReasonInstrumentSuspect)
		case f.Value < 0:
			set(id, compute.QualityUncertain, ReasonNegativeEfficiency)
		}
		if f.HasU95 && f.U95 > c.EfficiencyU95Limit {
			set(id, compute.QualityBad, ReasonUncertaintyAboveLimit)
			note := fmt.Sprintf("%s U95 = %.3f exceeds the limit %.3f: the method is unusable with these instruments", id, f.U95, c.EfficiencyU95Limit)
			if res.prop != nil {
				if d := res.prop.dominant(id); d >= 0 {
					note += fmt.Sprintf(" (dominant input: %s)", inputLabels[d])
				}
			}
			res.Notes = append(res.Notes, note)
		}
	}
	// Entropy generation.
	if sg := F[SpecificEntropyGeneration]; sg.Defined && !math.IsNaN(sg.Value) && sg.Value < -sgenRoundTol {
		q, reasons := compute.QualityUncertain, []string{ReasonNegativeEntropyGeneration}
		if sg.Value+band(SpecificEntropyGeneration) < -sgenRoundTol {
			q, reasons = compute.QualityBad, append(reasons, ReasonInstrumentSuspect)
			res.Notes = append(res.Notes, fmt.Sprintf("entropy generation %.4g J/(kg K) is negative beyond its uncertainty: an instrument is suspect", sg.Value))
		}
		for _, id := range [...]FigureID{SpecificEntropyGeneration, EntropyGenerationRate, SpecificLostWork, LostWorkRate, SecondLawEfficiency} {
			for _, r := range reasons {
				set(id, q, r)
			}
		}
	}
	// Power cross-check.
	if pm := F[PowerMismatch]; pm.Defined && !math.IsNaN(pm.Value) {
		b := defaultPowerBand
		if pm.HasU95 {
			b = pm.U95
		}
		if math.Abs(pm.Value) > b {
			set(PowerMismatch, compute.QualityUncertain, ReasonPowerMismatch)
			set(Power, compute.QualityUncertain, ReasonPowerMismatch)
			res.Notes = append(res.Notes, fmt.Sprintf("thermodynamic power differs from the measured power by %.1f %% (more than its U95 %.1f %%)", 100*pm.Value, 100*b))
		}
	}
	// Schultz across the saturation line: its constant volume exponent is a
	// poor model of a wet expansion (2 points off the integrated path for a
	// 600 K -> 5 kPa steam expansion, see TestSchultzSteam).
	if res.PolytropicMethod == PolySchultz {
		_, wet2 := res.Outlet.Quality()
		_, wet1 := res.Inlet.Quality()
		_, wets := res.IsentropicOutlet.Quality()
		if wet1 || wet2 || wets {
			set(PolytropicEfficiency, compute.QualityUncertain, ReasonPolytropicTwoPhase)
			set(PolytropicHead, compute.QualityUncertain, ReasonPolytropicTwoPhase)
			res.Notes = append(res.Notes, "the path crosses the saturation line: the Schultz polytropic figures are approximate there (use the integrated reference path)")
		}
	}
	// Inferred heat on the shaft-power basis.
	if hf := F[HeatFlow]; hf.Defined && !math.IsNaN(hf.Value) && hf.Value+band(HeatFlow) < 0 {
		set(HeatFlow, compute.QualityBad, ReasonHeatAdded)
		set(HeatFlow, compute.QualityBad, ReasonInstrumentSuspect)
		for _, id := range [...]FigureID{IsentropicEfficiency, PolytropicEfficiency, SecondLawEfficiency} {
			set(id, compute.QualityUncertain, ReasonHeatAdded)
		}
		res.Notes = append(res.Notes, "the measured power is below the enthalpy change: heat would have to be added; an instrument is suspect")
	}
	res.Quality = compute.QualityGood
	res.Reasons = nil
	for id := range NumFigures {
		f := &F[id]
		if !f.Defined {
			continue
		}
		res.Quality = compute.Worse(res.Quality, f.Quality)
		for _, r := range f.Reasons {
			if !slices.Contains(res.Reasons, r) {
				res.Reasons = append(res.Reasons, r)
			}
		}
	}
	for _, r := range base {
		if !slices.Contains(res.Reasons, r) {
			res.Reasons = append(res.Reasons, r)
		}
	}
}
