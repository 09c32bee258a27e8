package machine

import (
	"math"
	"slices"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

// stagedCase is one machine kind and state method on one fluid. The input
// values are plausible plant states (rounded, common practice, no source);
// the test compares two ways of running the same calculation, so no value
// here is an expected result.
type stagedCase struct {
	name  string
	fluid string
	spec  Spec
	in    Inputs
}

// allUncertain gives every input of the calculation a standard
// uncertainty, and both correlations (values common practice, no source).
var allUncertain = Uncertainty{
	P1: Std{Rel: 0.001}, P2: Std{Rel: 0.001}, T1: Std{Abs: 0.3}, T2: Std{Abs: 0.3},
	H1: Std{Abs: 500}, X1: Std{Abs: 0.004}, X2: Std{Abs: 0.004},
	MassFlow: Std{Rel: 0.01}, Power: Std{Rel: 0.005}, HeatFlow: Std{Rel: 0.1}, DriveEfficiency: Std{Abs: 0.002},
	CorrT: 0.5, CorrP: 0.3,
}

func stagedCases() []stagedCase {
	ng := "natural-gas"
	return []stagedCase{
		// Water (IAPWS-IF97).
		{"turbine p,T/p,T", "water", Spec{Kind: Turbine, Inlet: ByPT, Outlet: ByPT, Power: ShaftPower},
			Inputs{P1: 16e6, T1: 811.15, P2: 4e6, T2: 611.15, MassFlow: 250, ShaftPower: 98e6}},
		{"turbine p,T/energy balance (wet exhaust)", "water", Spec{Kind: Turbine, Inlet: ByPT, Outlet: ByEnergyBalance, Power: ShaftPower},
			Inputs{P1: 0.8e6, T1: 600, P2: 5e3, MassFlow: 40, ShaftPower: 30.9e6, HeatFlow: 0.2e6}},
		{"turbine p,T/p,x", "water", Spec{Kind: Turbine, Inlet: ByPT, Outlet: ByPX},
			Inputs{P1: 0.8e6, T1: 600, P2: 5e3, X2: 0.9, MassFlow: 40}},
		{"turbine p,x/p,x", "water", Spec{Kind: Turbine, Inlet: ByPX, Outlet: ByPX},
			Inputs{P1: 7e6, X1: 0.99, P2: 1e6, X2: 0.88, MassFlow: 300}},
		{"turbine p,h/energy balance, generator power", "water", Spec{Kind: Turbine, Inlet: ByPH, Outlet: ByEnergyBalance, Power: ElectricalPower, DriveEfficiency: 0.985, MechanicalLoss: 0.3e6},
			Inputs{P1: 16e6, H1: 3.4e6, P2: 4e6, MassFlow: 250, ElectricalPower: 80e6}},
		{"pump p,T/p,T", "water", Spec{Kind: Pump, Inlet: ByPT, Outlet: ByPT, Power: ElectricalPower, DriveEfficiency: 0.96},
			Inputs{P1: 1.2e6, T1: 460, P2: 20e6, T2: 461.8, MassFlow: 100, ElectricalPower: 2.9e6}},
		{"pump p,T/energy balance", "water", Spec{Kind: Pump, Inlet: ByPT, Outlet: ByEnergyBalance, Power: ShaftPower},
			Inputs{P1: 1.2e6, T1: 460, P2: 20e6, MassFlow: 100, ShaftPower: 2.68e6}},
		// Dry air (ideal gas, variable cp).
		{"compressor p,T/p,T", "air", Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByPT},
			Inputs{P1: 100e3, T1: 285.15, P2: 800e3, T2: 569.55, MassFlow: 0.2}},
		{"cooled compressor, shaft-power basis", "air", Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByPT, Power: ShaftPower, WorkFromPower: true, HeatRejectionT: 310},
			Inputs{P1: 100e3, T1: 290, P2: 800e3, T2: 420, MassFlow: 2, ShaftPower: 0.62e6}},
		{"compressor p,h/energy balance, motor power", "air", Spec{Kind: Compressor, Inlet: ByPH, Outlet: ByEnergyBalance, Power: ElectricalPower, DriveEfficiency: 0.95, MechanicalLoss: 2e3},
			Inputs{P1: 100e3, H1: 290e3, P2: 400e3, MassFlow: 2, ElectricalPower: 0.39e6, HeatFlow: 5e3}},
		{"expander p,T/p,T", "air", Spec{Kind: Turbine, Inlet: ByPT, Outlet: ByPT},
			Inputs{P1: 1e6, T1: 900, P2: 100e3, T2: 550, MassFlow: 10}},
		// Natural gas (GERG-2008).
		{"compressor p,T/p,T", ng, Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByPT, Power: ShaftPower},
			Inputs{P1: 4e6, T1: 300, P2: 8e6, T2: 365, MassFlow: 20, ShaftPower: 3.3e6}},
		{"expander p,T/energy balance", ng, Spec{Kind: Turbine, Inlet: ByPT, Outlet: ByEnergyBalance, Power: ShaftPower},
			Inputs{P1: 6e6, T1: 330, P2: 2e6, MassFlow: 20, ShaftPower: 1.6e6}},
		// Ammonia (Helmholtz equation of state).
		{"compressor p,T/p,T", "ammonia", Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByPT},
			Inputs{P1: 3e5, T1: 270, P2: 1.5e6, T2: 410, MassFlow: 1.5}},
		{"compressor p,T/energy balance", "ammonia", Spec{Kind: Compressor, Inlet: ByPT, Outlet: ByEnergyBalance, Power: ShaftPower},
			Inputs{P1: 3e5, T1: 270, P2: 1.5e6, MassFlow: 1.5, ShaftPower: 0.42e6}},
		{"pump p,T/p,T", "ammonia", Spec{Kind: Pump, Inlet: ByPT, Outlet: ByPT},
			Inputs{P1: 1e6, T1: 280, P2: 3e6, T2: 280.8, MassFlow: 5}},
		{"expander p,x/p,x", "ammonia", Spec{Kind: Turbine, Inlet: ByPX, Outlet: ByPX},
			Inputs{P1: 1.5e6, X1: 0.98, P2: 3e5, X2: 0.9, MassFlow: 1.5}},
	}
}

func stagedFluid(t *testing.T, name string) thermo.Fluid {
	t.Helper()
	fl, err := fluids.New(name, stagedComposition(name))
	if err != nil {
		t.Fatal(err)
	}
	return fl
}

// stagedComposition is the composition a fluid name needs (nil if none).
func stagedComposition(name string) map[string]float64 {
	if name == "natural-gas" {
		// The demo plant's gas (cmd/exergywatch/demo.yaml).
		return map[string]float64{"CH4": 0.90, "C2H6": 0.05, "C3H8": 0.01, "N2": 0.02, "CO2": 0.02}
	}
	return nil
}

// minimalFlashes is the number of flashes the staged propagation needs:
// three nominal states, and for each uncertain input two perturbations
// that each recompute only the states the input reaches.
func minimalFlashes(s *Spec, in *Inputs) int {
	eb := 0
	if s.Outlet == ByEnergyBalance {
		eb = 1
	}
	n := 3
	if s.Inlet == ByPH {
		n += 2 * 2 // p1 with a given h1: inlet, isentropic outlet (see slack)
	} else {
		n += 2 * (2 + eb) // p1: inlet, isentropic outlet (and energy-balance outlet)
	}
	n += 2 * (2 + eb) // T1, h1 or x1: the same
	n += 2 * 2        // p2: outlet, isentropic outlet
	if s.Outlet != ByEnergyBalance {
		n += 2 * 1 // T2 or x2: outlet only
	}
	rates := 0 // inputs that change no state but the energy-balance outlet
	if in.MassFlow > 0 {
		rates++
	}
	if in.HeatFlow > 0 {
		rates++
	}
	if s.Power != NoPower {
		rates++
	}
	if s.Power == ElectricalPower {
		rates++
	}
	return n + 2*rates*eb
}

// slack is how many flashes the staged propagation may run above
// minimalFlashes: with a (p,h) inlet a perturbed p1 leaves h1 as given, but
// an iterative (p,h) flash returns an h that differs from the given one in
// the last bits, and the energy-balance outlet built on it is recomputed
// (the same as the full re-evaluation does; the ideal-gas model returns h
// exactly and needs no slack).
func slack(s *Spec) int {
	if s.Inlet == ByPH && s.Outlet == ByEnergyBalance {
		return 2
	}
	return 0
}

// The staged propagation (each perturbed input recomputes only the states
// it reaches, the others answered from the nominal evaluation) gives the
// same figures, sensitivities and U95 as re-running the whole calculation
// for every perturbation, for every machine kind and state method on
// water, air, natural gas and ammonia; and it runs the minimal number of
// flashes. Reference: the unstaged calculation itself (same code, memo
// off); tolerance 1e-12 relative (the flashes are deterministic, so the two
// agree exactly unless a flash is not).
func TestStagedPropagationEqualsFullReevaluation(t *testing.T) {
	for _, c := range stagedCases() {
		t.Run(c.fluid+"/"+c.name, func(t *testing.T) {
			spec := c.spec
			spec.Fluid = stagedFluid(t, c.fluid)
			spec.Uncertainty = allUncertain
			staged, nStaged, err := evaluate(&spec, &c.in, false)
			if err != nil {
				t.Fatalf("staged: %v", err)
			}
			full, nFull, err := evaluate(&spec, &c.in, true)
			if err != nil {
				t.Fatalf("full: %v", err)
			}
			if want := minimalFlashes(&spec, &c.in); nStaged < want || nStaged > want+slack(&spec) {
				t.Errorf("staged propagation ran %d flashes, want the minimal %d (+%d) (full re-evaluation: %d)", nStaged, want, slack(&spec), nFull)
			}
			if nFull <= nStaged {
				t.Errorf("full re-evaluation ran %d flashes, staged %d: the reference is not unstaged", nFull, nStaged)
			}
			t.Logf("flashes: staged %d, full %d", nStaged, nFull)
			same := func(what string, a, b float64) {
				t.Helper()
				if math.IsNaN(a) && math.IsNaN(b) {
					return
				}
				if !relNear(a, b, 1e-12) && !(a == 0 && b == 0) {
					t.Errorf("%s: staged %.17g, full %.17g", what, a, b)
				}
			}
			nU := 0
			for id := range NumFigures {
				fs, ff := staged.Figures[id], full.Figures[id]
				if fs.Defined != ff.Defined || fs.HasU95 != ff.HasU95 || fs.Quality != ff.Quality || !slices.Equal(fs.Reasons, ff.Reasons) {
					t.Errorf("%v: staged %+v, full %+v", id, fs, ff)
					continue
				}
				same(id.String(), fs.Value, ff.Value)
				if fs.HasU95 {
					nU++
					same(id.String()+" U95", fs.U95, ff.U95)
				}
				for _, in := range inputNames {
					a, oka := staged.Sensitivity(id, in)
					b, okb := full.Sensitivity(id, in)
					if oka != okb {
						t.Errorf("d %v/d %s: staged %v, full %v", id, in, oka, okb)
					}
					same("d "+id.String()+"/d "+in, a, b)
				}
			}
			if nU < 8 {
				t.Errorf("only %d figures with U95: the case does not exercise the propagation", nU)
			}
			if staged.Quality != full.Quality || !slices.Equal(staged.Reasons, full.Reasons) {
				t.Errorf("quality: staged %v %v, full %v %v", staged.Quality, staged.Reasons, full.Quality, full.Reasons)
			}
		})
	}
}
