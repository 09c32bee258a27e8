package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/exergywatch/exergywatch/compute/machine"
	"github.com/exergywatch/exergywatch/compute/uncert"
	"github.com/exergywatch/exergywatch/config/units"
	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

func init() {
	register("calc", "evaluate one machine from two measured states (advisory figures)", runCalc)
}

const calcUsage = `usage: exergywatch calc --machine turbine|pump|compressor|fan|blower --fluid NAME
         --inlet p=P,T=T|p=P,x=X|p=P,h=H  --outlet p=P,T=T|p=P,x=X|p=P  [flags]

Evaluates one single-stream machine from its inlet and outlet states:
isentropic and polytropic efficiency, specific work, entropy generation,
lost work T0*Sgen, second-law efficiency and power, each with its U95
(k = 2) when instrument uncertainties are given. The figures are advisory.

State specs (units as written, pressures absolute; gauge units are refused):
  --inlet  p=16MPa,T=538degC   (p,T)    p=0.1MPa,x=1 (p,x)    p=1MPa,h=3000kJ/kg (p,h)
  --outlet p=4MPa,T=338degC    (p,T)    p=7kPa,x=0.9 (p,x)
  --outlet p=7kPa              energy balance: needs --flow and a measured power

Work and heat:
  --flow 250kg/s               mass flow
  --shaft-power 113.96MW       measured shaft power
  --generator-power P --generator-efficiency 98.5%     turbine: shaft = P/eta
  --motor-power P --motor-efficiency 95%               pump, compressor: shaft = P*eta
  --mech-loss 0.5MW            bearing/seal/gear loss between coupling and fluid
  --heat-loss Q | --cooling-duty Q   heat leaving the stream (casing loss, cooler)
  --heat-rejection-T 35degC    temperature at which that heat leaves (default T0)
  --basis enthalpy|shaft       with a measured outlet T and power: shaft = work from
                               the power, the rest is heat removed (cooled compressors)
  --T0 298.15K                 dead-state temperature (default 298.15 K)
  --margin 5K                  near-saturation margin of (p,T) states (default 5 K)

Uncertainties (standard uncertainties, k = 1; "%" means of the reading):
  --u-T 0.5K  --u-T1 ..  --u-T2 ..       temperature
  --T-class rtd-A  --T1-class ..  --T2-class ..   IEC 60751 rtd-AA|A|B|C, IEC 60584-1
                               tc-K-1, tc-N-2, ...: tolerance as a rectangular
                               half-width, u = tol/sqrt(3)
  --u-p 0.1%  --u-p1 ..  --u-p2 ..       pressure
  --u-x, --u-h1, --u-flow, --u-power, --u-heat, --u-drive-efficiency
  --corr-T 0.8  --corr-p 0     correlation of inlet/outlet errors (matched sensors)
  --u95-limit 5%               efficiency U95 above which the method is unusable

Fluids: water, air, humid-air, flue-gas, ideal-gas, natural-gas, methane, ammonia,
  r134a, co2, nitrogen (see thermo/fluids).
  --composition CH4=0.9,C2H6=0.06,N2=0.04   mole fractions (natural-gas, ideal-gas,
                               the fuel of flue-gas; H2O=0.02 for humid-air)
  --humidity 60% --ambient-T 20degC --ambient-p 101.325kPa   humid-air
  --excess-air 15%             flue-gas

Other:
       --reference-path (integrate the constant-efficiency path; slow)  --json
`

// portSpec is a parsed --inlet/--outlet value, SI units.
type portSpec struct {
	p, T, x, h       float64
	hasT, hasX, hasH bool
}

// parsePortSpec reads "p=16MPa,T=538degC", "p=7kPa,x=0.9", "p=1MPa,h=3000kJ/kg"
// or "p=7kPa". Pressures must be absolute (gauge units are refused by
// units.Parse with units.ErrGauge).
func parsePortSpec(s string) (portSpec, error) {
	var ps portSpec
	var hasP bool
	if strings.TrimSpace(s) == "" {
		return ps, errors.New("empty state spec; want e.g. p=16MPa,T=538degC")
	}
	for _, item := range strings.Split(s, ",") {
		k, v, ok := strings.Cut(item, "=")
		k = strings.TrimSpace(k)
		if !ok || k == "" {
			return ps, fmt.Errorf("%q is not key=value (keys p, T, x, h)", item)
		}
		var err error
		dup := false
		switch k {
		case "p", "P":
			dup, hasP = hasP, true
			ps.p, err = units.Parse(v, units.Pressure)
			if err == nil && !(ps.p > 0) {
				err = fmt.Errorf("pressure %q must be positive (absolute)", v)
			}
		case "T":
			dup, ps.hasT = ps.hasT, true
			ps.T, err = units.Parse(v, units.Temperature)
			if err == nil && !(ps.T > 0) {
				err = fmt.Errorf("temperature %q is not above absolute zero", v)
			}
		case "x":
			dup, ps.hasX = ps.hasX, true
			ps.x, err = units.Parse(v, units.Fraction)
			if err == nil && !(ps.x >= 0 && ps.x <= 1) {
				err = fmt.Errorf("vapour fraction %q must be in [0, 1]", v)
			}
		case "h":
			dup, ps.hasH = ps.hasH, true
			ps.h, err = units.Parse(v, units.SpecificEnergy)
		default:
			return ps, fmt.Errorf("unknown key %q in %q (keys p, T, x, h)", k, s)
		}
		if dup {
			return ps, fmt.Errorf("key %q given twice in %q", k, s)
		}
		if err != nil {
			return ps, fmt.Errorf("%s: %w", k, err)
		}
	}
	if !hasP {
		return ps, fmt.Errorf("%q has no pressure p=...", s)
	}
	n := 0
	for _, b := range [...]bool{ps.hasT, ps.hasX, ps.hasH} {
		if b {
			n++
		}
	}
	if n > 1 {
		return ps, fmt.Errorf("%q over-specifies the state: give p with one of T, x, h", s)
	}
	return ps, nil
}

// parseStd reads a standard uncertainty: "0.1%" (of the reading) or a value
// with a unit of kind k (bare numbers are SI).
func parseStd(s string, k units.Kind) (machine.Std, error) {
	s = strings.TrimSpace(s)
	if rest, ok := strings.CutSuffix(s, "%"); ok {
		v, err := strconv.ParseFloat(strings.TrimSpace(rest), 64)
		if err != nil || !(v >= 0) || math.IsInf(v, 0) {
			return machine.Std{}, fmt.Errorf("%q is not a percentage >= 0", s)
		}
		return machine.Std{Rel: v / 100}, nil
	}
	if k == units.Temperature {
		k = units.TemperatureDelta
	}
	v, err := units.Parse(s, k)
	if err != nil {
		return machine.Std{}, err
	}
	if v < 0 {
		return machine.Std{}, fmt.Errorf("%q is negative", s)
	}
	return machine.Std{Abs: v}, nil
}

// calcFlags holds the raw flag values.
type calcFlags struct {
	machine, fluid, composition, inlet, outlet          string
	flow, t0, shaft, gen, genEff, motor, motorEff, mech string
	heatLoss, cooling, heatRejT, basis, margin, limit   string
	rh, ambT, ambP, excessAir                           string
	uT, uT1, uT2, uP, uP1, uP2, uX, uH1, uFlow, uPower  string
	uHeat, uEta, tClass, t1Class, t2Class, corrT, corrP string
	refPath, jsonOut                                    bool
}

type usageError struct{ err error }

func (e usageError) Error() string { return e.err.Error() }
func (e usageError) Unwrap() error { return e.err }

func badUsage(format string, a ...any) error { return usageError{fmt.Errorf(format, a...)} }

func runCalc(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("calc", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	var f calcFlags
	s := func(p *string, name, usage string) { fs.StringVar(p, name, "", usage) }
	s(&f.machine, "machine", "")
	s(&f.fluid, "fluid", "")
	s(&f.composition, "composition", "")
	s(&f.rh, "humidity", "")
	s(&f.ambT, "ambient-T", "")
	s(&f.ambP, "ambient-p", "")
	s(&f.excessAir, "excess-air", "")
	s(&f.inlet, "inlet", "")
	s(&f.outlet, "outlet", "")
	s(&f.flow, "flow", "")
	s(&f.t0, "T0", "")
	s(&f.shaft, "shaft-power", "")
	s(&f.gen, "generator-power", "")
	s(&f.genEff, "generator-efficiency", "")
	s(&f.motor, "motor-power", "")
	s(&f.motorEff, "motor-efficiency", "")
	s(&f.mech, "mech-loss", "")
	s(&f.heatLoss, "heat-loss", "")
	s(&f.cooling, "cooling-duty", "")
	s(&f.heatRejT, "heat-rejection-T", "")
	s(&f.basis, "basis", "")
	s(&f.margin, "margin", "")
	s(&f.limit, "u95-limit", "")
	s(&f.uT, "u-T", "")
	s(&f.uT1, "u-T1", "")
	s(&f.uT2, "u-T2", "")
	s(&f.uP, "u-p", "")
	s(&f.uP1, "u-p1", "")
	s(&f.uP2, "u-p2", "")
	s(&f.uX, "u-x", "")
	s(&f.uH1, "u-h1", "")
	s(&f.uFlow, "u-flow", "")
	s(&f.uPower, "u-power", "")
	s(&f.uHeat, "u-heat", "")
	s(&f.uEta, "u-drive-efficiency", "")
	s(&f.tClass, "T-class", "")
	s(&f.t1Class, "T1-class", "")
	s(&f.t2Class, "T2-class", "")
	s(&f.corrT, "corr-T", "")
	s(&f.corrP, "corr-p", "")
	fs.BoolVar(&f.refPath, "reference-path", false, "")
	fs.BoolVar(&f.jsonOut, "json", false, "")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprint(stdout, calcUsage)
			return 0
		}
		fmt.Fprintf(stderr, "exergywatch calc: %v (see exergywatch calc -h)\n", err)
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "exergywatch calc: unexpected argument %q (see exergywatch calc -h)\n", fs.Arg(0))
		return 2
	}
	spec, in, err := f.build()
	if err != nil {
		fmt.Fprintf(stderr, "exergywatch calc: %v\n", oneLine(err))
		return 2
	}
	res, err := machine.Evaluate(spec, in)
	if err != nil {
		fmt.Fprintf(stderr, "exergywatch calc: %v\n", oneLine(err))
		if errors.Is(err, thermo.ErrNoConvergence) {
			return 1
		}
		return 2
	}
	if f.jsonOut {
		if err := writeCalcJSON(stdout, res); err != nil {
			fmt.Fprintf(stderr, "exergywatch calc: %v\n", err)
			return 1
		}
		return 0
	}
	writeCalcText(stdout, res, spec)
	return 0
}

func oneLine(err error) string { return strings.ReplaceAll(err.Error(), "\n", "; ") }

// parseOpt parses an optional flag value of kind k into dst (SI).
func parseOpt(dst *float64, s, name string, k units.Kind) error {
	if s == "" {
		return nil
	}
	v, err := units.Parse(s, k)
	if err != nil {
		return fmt.Errorf("--%s: %w", name, err)
	}
	*dst = v
	return nil
}

// build turns the flags into a machine spec and SI inputs.
func (f *calcFlags) build() (*machine.Spec, *machine.Inputs, error) {
	if f.machine == "" || f.fluid == "" || f.inlet == "" || f.outlet == "" {
		return nil, nil, badUsage("--machine, --fluid, --inlet and --outlet are required (see exergywatch calc -h)")
	}
	kind, err := machine.ParseKind(f.machine)
	if err != nil {
		return nil, nil, err
	}
	fspec := fluids.Spec{Name: f.fluid}
	if f.composition != "" {
		if fspec.Composition, err = fluids.ParseComposition(f.composition); err != nil {
			return nil, nil, fmt.Errorf("--composition: %w", err)
		}
	}
	if err := errors.Join(
		parseOpt(&fspec.RelativeHumidity, f.rh, "humidity", units.Fraction),
		parseOpt(&fspec.AmbientT, f.ambT, "ambient-T", units.Temperature),
		parseOpt(&fspec.AmbientP, f.ambP, "ambient-p", units.Pressure),
		parseOpt(&fspec.ExcessAir, f.excessAir, "excess-air", units.Fraction),
	); err != nil {
		return nil, nil, err
	}
	fl, err := fluids.FromSpec(fspec)
	if err != nil {
		return nil, nil, fmt.Errorf("--fluid %s: %w", f.fluid, err)
	}
	spec := &machine.Spec{Kind: kind, Fluid: fl, ReferencePath: f.refPath}
	in := &machine.Inputs{}
	ip, err := parsePortSpec(f.inlet)
	if err != nil {
		return nil, nil, fmt.Errorf("--inlet: %w", err)
	}
	op, err := parsePortSpec(f.outlet)
	if err != nil {
		return nil, nil, fmt.Errorf("--outlet: %w", err)
	}
	in.P1, in.P2 = ip.p, op.p
	switch {
	case ip.hasT:
		spec.Inlet, in.T1 = machine.ByPT, ip.T
	case ip.hasX:
		spec.Inlet, in.X1 = machine.ByPX, ip.x
	case ip.hasH:
		spec.Inlet, in.H1 = machine.ByPH, ip.h
	default:
		return nil, nil, fmt.Errorf("--inlet needs p with one of T, x, h")
	}
	switch {
	case op.hasT:
		spec.Outlet, in.T2 = machine.ByPT, op.T
	case op.hasX:
		spec.Outlet, in.X2 = machine.ByPX, op.x
	case op.hasH:
		return nil, nil, fmt.Errorf("--outlet by p,h is not a measurement; give p,T, p,x or p alone with a measured power (energy balance)")
	default:
		spec.Outlet = machine.ByEnergyBalance
	}
	num := parseOpt
	var genEff, motorEff float64
	var heatLoss, cooling float64
	errs := []error{
		num(&in.MassFlow, f.flow, "flow", units.MassFlow),
		num(&spec.T0, f.t0, "T0", units.Temperature),
		num(&in.ShaftPower, f.shaft, "shaft-power", units.Power),
		num(&in.ElectricalPower, f.gen, "generator-power", units.Power),
		num(&genEff, f.genEff, "generator-efficiency", units.Fraction),
		num(&motorEff, f.motorEff, "motor-efficiency", units.Fraction),
		num(&spec.MechanicalLoss, f.mech, "mech-loss", units.Power),
		num(&heatLoss, f.heatLoss, "heat-loss", units.Power),
		num(&cooling, f.cooling, "cooling-duty", units.Power),
		num(&spec.HeatRejectionT, f.heatRejT, "heat-rejection-T", units.Temperature),
		num(&spec.SaturationMargin, f.margin, "margin", units.TemperatureDelta),
		num(&spec.EfficiencyU95Limit, f.limit, "u95-limit", units.Fraction),
	}
	if err := errors.Join(errs...); err != nil {
		return nil, nil, err
	}
	if f.t0 != "" && !(spec.T0 > 0) {
		return nil, nil, fmt.Errorf("--T0 %s must be above absolute zero", f.t0)
	}
	if f.heatRejT != "" && !(spec.HeatRejectionT > 0) {
		return nil, nil, fmt.Errorf("--heat-rejection-T %s must be above absolute zero", f.heatRejT)
	}
	if f.limit != "" && !(spec.EfficiencyU95Limit > 0) {
		return nil, nil, fmt.Errorf("--u95-limit must be positive")
	}
	if f.margin != "" && spec.SaturationMargin == 0 {
		spec.SaturationMargin = -1 // an explicit 0 K disables the flag
	}
	if f.heatLoss != "" && f.cooling != "" {
		return nil, nil, fmt.Errorf("give --heat-loss or --cooling-duty, not both (both are heat leaving the stream)")
	}
	in.HeatFlow = heatLoss + cooling
	// Measured power.
	nPow := 0
	for _, s := range [...]string{f.shaft, f.gen, f.motor} {
		if s != "" {
			nPow++
		}
	}
	if nPow > 1 {
		return nil, nil, fmt.Errorf("give one of --shaft-power, --generator-power, --motor-power")
	}
	switch {
	case f.shaft != "":
		spec.Power = machine.ShaftPower
	case f.gen != "":
		if kind != machine.Turbine {
			return nil, nil, fmt.Errorf("--generator-power is for turbines; a %s has --motor-power", kind)
		}
		if f.genEff == "" {
			return nil, nil, fmt.Errorf("--generator-power needs --generator-efficiency")
		}
		spec.Power, spec.DriveEfficiency = machine.ElectricalPower, genEff
	case f.motor != "":
		if kind == machine.Turbine {
			return nil, nil, fmt.Errorf("--motor-power is for pumps and compressors; a turbine has --generator-power")
		}
		if f.motorEff == "" {
			return nil, nil, fmt.Errorf("--motor-power needs --motor-efficiency")
		}
		if err := num(&in.ElectricalPower, f.motor, "motor-power", units.Power); err != nil {
			return nil, nil, err
		}
		spec.Power, spec.DriveEfficiency = machine.ElectricalPower, motorEff
	}
	if f.genEff != "" && f.gen == "" || f.motorEff != "" && f.motor == "" {
		return nil, nil, fmt.Errorf("a drive efficiency is given without its generator or motor power")
	}
	if f.mech != "" && spec.Power == machine.NoPower {
		return nil, nil, fmt.Errorf("--mech-loss needs a measured power")
	}
	switch f.basis {
	case "", "enthalpy":
	case "shaft":
		spec.WorkFromPower = true
	default:
		return nil, nil, fmt.Errorf("--basis %q: want enthalpy or shaft", f.basis)
	}
	if spec.Outlet == machine.ByEnergyBalance && spec.Power == machine.NoPower {
		return nil, nil, fmt.Errorf("--outlet %s gives only a pressure: the energy balance needs --flow and --shaft-power, --generator-power or --motor-power", f.outlet)
	}
	if err := f.uncertainties(spec); err != nil {
		return nil, nil, err
	}
	return spec, in, nil
}

func (f *calcFlags) uncertainties(spec *machine.Spec) error {
	U := &spec.Uncertainty
	std := func(dst *machine.Std, s, name string, k units.Kind) error {
		if s == "" {
			return nil
		}
		v, err := parseStd(s, k)
		if err != nil {
			return fmt.Errorf("--%s: %w", name, err)
		}
		*dst = v
		return nil
	}
	pick := func(specific, general string) string {
		if specific != "" {
			return specific
		}
		return general
	}
	errs := []error{
		std(&U.T1, pick(f.uT1, f.uT), "u-T1", units.Temperature),
		std(&U.T2, pick(f.uT2, f.uT), "u-T2", units.Temperature),
		std(&U.P1, pick(f.uP1, f.uP), "u-p1", units.Pressure),
		std(&U.P2, pick(f.uP2, f.uP), "u-p2", units.Pressure),
		std(&U.X1, f.uX, "u-x", units.Fraction),
		std(&U.X2, f.uX, "u-x", units.Fraction),
		std(&U.H1, f.uH1, "u-h1", units.SpecificEnergy),
		std(&U.MassFlow, f.uFlow, "u-flow", units.MassFlow),
		std(&U.Power, f.uPower, "u-power", units.Power),
		std(&U.HeatFlow, f.uHeat, "u-heat", units.Power),
		std(&U.DriveEfficiency, f.uEta, "u-drive-efficiency", units.Fraction),
	}
	class := func(dst *uncert.TempClass, s, name string) error {
		if s == "" {
			return nil
		}
		c, err := uncert.ParseTempClass(s)
		if err != nil {
			return fmt.Errorf("--%s: %w", name, err)
		}
		*dst = c
		return nil
	}
	if f.t1Class == "" && f.t2Class == "" && f.tClass != "" {
		if err := class(&U.T1Class, f.tClass, "T-class"); err != nil {
			return err
		}
		U.T2Class = U.T1Class
	} else {
		errs = append(errs,
			class(&U.T1Class, pick(f.t1Class, f.tClass), "T1-class"),
			class(&U.T2Class, pick(f.t2Class, f.tClass), "T2-class"))
	}
	corr := func(dst *float64, s, name string) error {
		if s == "" {
			return nil
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
		if err != nil || !(v >= -1 && v <= 1) {
			return fmt.Errorf("--%s %q: want a correlation coefficient in [-1, 1]", name, s)
		}
		*dst = v
		return nil
	}
	errs = append(errs, corr(&U.CorrT, f.corrT, "corr-T"), corr(&U.CorrP, f.corrP, "corr-p"))
	return errors.Join(errs...)
}

// round7 keeps 7 significant digits: more than any plant measurement
// supports, few enough that output does not churn with the last bits of a
// property model's iterations.
func round7(v float64) float64 {
	r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 7, 64), 64)
	return r
}

func jsonNum(v float64) any {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return round7(v)
}

func stateJSON(s thermo.State) map[string]any {
	m := map[string]any{"p": jsonNum(s.P), "T": jsonNum(s.T), "h": jsonNum(s.H), "s": jsonNum(s.S), "x": nil, "phase": s.Phase.String()}
	if x, ok := s.Quality(); ok {
		m["x"] = jsonNum(x)
	}
	return m
}

// calcJSONKeys are the figure keys always present in --json output (null
// when the figure does not apply).
var calcJSONKeys = []machine.FigureID{
	machine.IsentropicEfficiency, machine.PolytropicEfficiency, machine.PolytropicHead, machine.SpecificWork,
	machine.IsentropicSpecificWork, machine.SpecificEntropyGeneration, machine.EntropyGenerationRate,
	machine.SpecificLostWork, machine.LostWorkRate, machine.SecondLawEfficiency, machine.Power, machine.PumpHead,
	machine.PowerMismatch, machine.HeatFlow, machine.PolytropicEfficiencyIntegrated,
}

func writeCalcJSON(w io.Writer, r *machine.Result) error {
	out := map[string]any{
		"machine": r.Kind.String(), "fluid": r.Fluid, "T0": jsonNum(r.T0),
		"quality": r.Quality.String(), "reasons": nonNil(r.Reasons), "notes": nonNil(r.Notes),
		"polytropic_method": r.PolytropicMethod.String(),
		"advisory":          "advisory performance figures, not for protection or control",
		"states": map[string]any{
			"inlet": stateJSON(r.Inlet), "outlet": stateJSON(r.Outlet), "isentropic_outlet": stateJSON(r.IsentropicOutlet),
		},
	}
	if r.PolytropicMethod == machine.PolySchultz {
		out["schultz_factor"] = jsonNum(r.SchultzFactor)
	}
	unc := map[string]any{}
	fq := map[string]any{}
	for _, id := range calcJSONKeys {
		f := r.Figure(id)
		if !f.Defined {
			out[id.Key()] = nil
			continue
		}
		out[id.Key()] = jsonNum(f.Value)
		if f.HasU95 {
			unc[id.Key()] = jsonNum(f.U95)
		}
		fq[id.Key()] = map[string]any{"quality": f.Quality.String(), "reasons": nonNil(f.Reasons)}
	}
	out["uncertainty"] = unc
	out["figure_quality"] = fq
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(out)
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

// textFigure says how a figure is shown to a person.
type textFigure struct {
	id    machine.FigureID
	label string
	scale float64
	unit  string
	big   string // unit used instead when |value| >= 1e6 SI (MW), "" for none
}

var textFigures = []textFigure{
	{machine.IsentropicEfficiency, "isentropic efficiency", 100, "%", ""},
	{machine.PolytropicEfficiency, "polytropic efficiency", 100, "%", ""},
	{machine.PolytropicEfficiencyIntegrated, "polytropic eff. (integrated path)", 100, "%", ""},
	{machine.PolytropicHead, "polytropic head", 1e-3, "kJ/kg", ""},
	{machine.SpecificWork, "specific work", 1e-3, "kJ/kg", ""},
	{machine.IsentropicSpecificWork, "isentropic specific work", 1e-3, "kJ/kg", ""},
	{machine.SpecificEntropyGeneration, "specific entropy generation", 1e-3, "kJ/(kg K)", ""},
	{machine.EntropyGenerationRate, "entropy generation rate", 1e-3, "kW/K", ""},
	{machine.SpecificLostWork, "specific lost work T0*sgen", 1e-3, "kJ/kg", ""},
	{machine.LostWorkRate, "lost work rate T0*Sgen", 1e-3, "kW", "MW"},
	{machine.SecondLawEfficiency, "second-law efficiency", 100, "%", ""},
	{machine.Power, "power", 1e-3, "kW", "MW"},
	{machine.PumpHead, "pump head", 1, "m", ""},
	{machine.PowerMismatch, "power: thermodynamic vs measured", 100, "%", ""},
	{machine.HeatFlow, "heat removed (shaft basis)", 1e-3, "kW", "MW"},
}

func writeCalcText(w io.Writer, r *machine.Result, spec *machine.Spec) {
	fmt.Fprintf(w, "exergywatch calc: %s, fluid %s, T0 = %.2f K\n", r.Kind, r.Fluid, r.T0)
	fmt.Fprintln(w, "Figures are advisory performance indicators, not for protection or control.")
	fmt.Fprintln(w)
	fmt.Fprintf(w, "%-18s %12s %10s %12s %14s %7s  %s\n", "state", "p [kPa]", "T [K]", "h [kJ/kg]", "s [kJ/(kg K)]", "x", "phase")
	for _, st := range []struct {
		name string
		s    thermo.State
	}{{"inlet", r.Inlet}, {"outlet", r.Outlet}, {"isentropic outlet", r.IsentropicOutlet}} {
		x := "-"
		if q, ok := st.s.Quality(); ok {
			x = fmt.Sprintf("%.4f", q)
		}
		fmt.Fprintf(w, "%-18s %12.4f %10.3f %12.3f %14.5f %7s  %s\n", st.name, st.s.P/1e3, st.s.T, st.s.H/1e3, st.s.S/1e3, x, st.s.Phase)
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "%-34s %18s %18s  %-10s %s\n", "figure", "value", "U95 (k=2)", "quality", "reasons")
	for _, tf := range textFigures {
		f := r.Figure(tf.id)
		if !f.Defined {
			continue
		}
		scale, unit := tf.scale, tf.unit
		if tf.big != "" && math.Abs(f.Value) >= 1e6 {
			scale, unit = 1e-6, tf.big
		}
		v := "n/a"
		if !math.IsNaN(f.Value) {
			v = fmt.Sprintf("%.4g %s", f.Value*scale, unit)
		}
		u := "-"
		if f.HasU95 {
			u = fmt.Sprintf("±%.3g %s", f.U95*scale, unit)
		}
		q := f.Quality.String()
		if f.Quality.String() == "bad" {
			q = "NOT USABLE"
		}
		line := fmt.Sprintf("%-34s %18s %18s  %-10s %s", tf.label, v, u, q, strings.Join(f.Reasons, ","))
		fmt.Fprintln(w, strings.TrimRight(line, " "))
	}
	fmt.Fprintln(w)
	if r.PolytropicMethod != machine.PolyNone {
		fmt.Fprintf(w, "polytropic method: %s", r.PolytropicMethod)
		if r.PolytropicMethod == machine.PolySchultz {
			fmt.Fprintf(w, " (f = %.5f)", r.SchultzFactor)
		}
		fmt.Fprintln(w)
	}
	reasons := append([]string(nil), r.Reasons...)
	sort.Strings(reasons)
	fmt.Fprintf(w, "quality: %s", r.Quality)
	if len(reasons) > 0 {
		fmt.Fprintf(w, " (%s)", strings.Join(reasons, ", "))
	}
	fmt.Fprintln(w)
	for _, n := range r.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	if spec.Uncertainty.IsZero() {
		fmt.Fprintln(w, "no instrument uncertainties given (--u-T, --u-p, --T-class ...): U95 not evaluated")
	}
}
