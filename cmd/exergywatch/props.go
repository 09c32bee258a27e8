package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/exergywatch/exergywatch/config/units"
	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

func init() {
	register("props", "properties of a fluid state from two of p, T, h, s, x", runProps)
}

const propsUsage = `usage: exergywatch props --fluid water --p 16MPa --T 538degC [--json]

Prints the state fixed by any two of --p --T --h --s --x (supported pairs:
p,T  p,h  p,s  p,x  T,x  h,s). Values take a unit; a bare number is SI.
  --p   absolute pressure   Pa kPa MPa bar psi (gauge units are refused)
  --T   temperature         K degC degF
  --h   specific enthalpy   J/kg kJ/kg
  --s   specific entropy    J/kgK kJ/kgK
  --x   vapour fraction     0..1 (or %)
  --fluid NAME              water (IAPWS-IF97), air, humid-air, flue-gas, ideal-gas,
                            natural-gas (GERG-2008), ammonia, r134a, co2, nitrogen,
                            methane, air-helmholtz, water-iapws95, ammonia-1993
  --composition "CH4=0.9,C2H6=0.06,N2=0.04"
                            mole fractions for natural-gas, ideal-gas and the fuel
                            of flue-gas (with --excess-air 1.5 = 150 %)
  --humidity 60% --ambient-T 25degC --ambient-p 101.325kPa
                            water content of humid-air
  --json                    one JSON object in SI units: p T v rho u h s cp cv w x
                            phase region (cp, cv, w null inside the two-phase
                            region; x null for a single-phase state)
`

// propsVar is one of the state flags.
type propsVar struct {
	name string
	kind units.Kind
	val  string
	set  bool
}

func (v *propsVar) String() string { return v.val }
func (v *propsVar) Set(s string) error {
	if v.set {
		return fmt.Errorf("given twice")
	}
	v.val, v.set = s, true
	return nil
}

// propsPairs maps the two given flag names (in the order p, T, h, s, x) to
// the thermo input pair.
var propsPairs = map[string]thermo.Pair{
	"p,T": thermo.PT, "p,h": thermo.PH, "p,s": thermo.PS, "p,x": thermo.PX, "T,x": thermo.TX, "h,s": thermo.HS,
}

// propsFluid returns the property model for a fluid name (thermo/fluids
// names; "steam" is an alias of water).
func propsFluid(name string, spec fluids.Spec) (thermo.Fluid, error) {
	switch name {
	case "steam":
		name = "water"
	case "":
		return nil, errors.New("--fluid is required (e.g. --fluid water)")
	}
	spec.Name = name
	return fluids.FromSpec(spec)
}

// propsJSON is the --json output: SI units, null where undefined.
type propsJSON struct {
	P      float64  `json:"p"`
	T      float64  `json:"T"`
	V      float64  `json:"v"`
	Rho    float64  `json:"rho"`
	U      float64  `json:"u"`
	H      float64  `json:"h"`
	S      float64  `json:"s"`
	Cp     *float64 `json:"cp"`
	Cv     *float64 `json:"cv"`
	W      *float64 `json:"w"`
	X      *float64 `json:"x"`
	Phase  string   `json:"phase"`
	Region int      `json:"region"`
}

func runProps(args []string, stdout, stderr io.Writer) int {
	fail := func(format string, a ...any) int {
		msg := fmt.Sprintf(format, a...)
		fmt.Fprintln(stderr, "exergywatch props: "+strings.ReplaceAll(msg, "\n", " "))
		return 2
	}
	fs := flag.NewFlagSet("props", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fluid := fs.String("fluid", "", "fluid name")
	asJSON := fs.Bool("json", false, "JSON output")
	comp := fs.String("composition", "", "mole fractions NAME=x,...")
	humidity := fs.String("humidity", "", "relative humidity of humid-air (fraction or %)")
	ambT := fs.String("ambient-T", "", "ambient temperature of humid-air")
	ambP := fs.String("ambient-p", "", "ambient pressure of humid-air")
	excess := fs.Float64("excess-air", 0, "excess air of flue-gas, fraction")
	vars := []*propsVar{
		{name: "p", kind: units.Pressure},
		{name: "T", kind: units.Temperature},
		{name: "h", kind: units.SpecificEnergy},
		{name: "s", kind: units.SpecificEntropy},
		{name: "x", kind: units.Fraction},
	}
	for _, v := range vars {
		fs.Var(v, v.name, v.name)
	}
	// -h is the enthalpy flag; alone it asks for help, as for the other
	// commands
	if len(args) == 1 && (args[0] == "-h" || args[0] == "--h") {
		fmt.Fprint(stdout, propsUsage)
		return 0
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprint(stdout, propsUsage)
			return 0
		}
		return fail("%v (see exergywatch props -h)", err)
	}
	if fs.NArg() > 0 {
		return fail("unexpected argument %q (see exergywatch props -h)", fs.Arg(0))
	}
	spec := fluids.Spec{ExcessAir: *excess}
	if *comp != "" {
		c, err := fluids.ParseComposition(*comp)
		if err != nil {
			return fail("--composition: %v", err)
		}
		spec.Composition = c
	}
	for _, q := range []struct {
		flag, val string
		kind      units.Kind
		dst       *float64
	}{{"humidity", *humidity, units.Fraction, &spec.RelativeHumidity}, {"ambient-T", *ambT, units.Temperature, &spec.AmbientT}, {"ambient-p", *ambP, units.Pressure, &spec.AmbientP}} {
		if q.val == "" {
			continue
		}
		v, err := units.Parse(q.val, q.kind)
		if err != nil {
			return fail("--%s: %v", q.flag, err)
		}
		*q.dst = v
	}
	f, err := propsFluid(*fluid, spec)
	if err != nil {
		return fail("%v", err)
	}
	var names []string
	var vals []float64
	for _, v := range vars {
		if !v.set {
			continue
		}
		x, err := units.Parse(v.val, v.kind)
		if err != nil {
			return fail("--%s %s: %v", v.name, v.val, err)
		}
		names = append(names, v.name)
		vals = append(vals, x)
	}
	if len(names) != 2 {
		return fail("give exactly two of --p --T --h --s --x (got %d)", len(names))
	}
	pair, ok := propsPairs[names[0]+","+names[1]]
	if !ok {
		return fail("the pair %s,%s is not supported; use one of p,T p,h p,s p,x T,x h,s", names[0], names[1])
	}
	st, err := f.Flash(pair, vals[0], vals[1])
	if err != nil {
		if errors.Is(err, thermo.ErrNoConvergence) {
			fmt.Fprintln(stderr, "exergywatch props: "+err.Error())
			return 1
		}
		return fail("%v", err)
	}
	if *asJSON {
		out := propsJSON{P: st.P, T: st.T, V: st.V, Rho: st.Rho, U: st.U, H: st.H, S: st.S,
			Phase: st.Phase.String(), Region: st.Region}
		if st.HasDerivatives {
			out.Cp, out.Cv, out.W = &st.Cp, &st.Cv, &st.W
		}
		if x, two := st.Quality(); two {
			out.X = &x
		}
		b, err := json.Marshal(out)
		if err != nil {
			fmt.Fprintln(stderr, "exergywatch props: "+err.Error())
			return 1
		}
		fmt.Fprintln(stdout, string(b))
		return 0
	}
	writePropsTable(stdout, *fluid, st)
	return 0
}

// g formats a value to 7 significant digits, without an exponent for
// magnitudes from 1e-4 to 1e12.
func g(v float64) string {
	r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 7, 64), 64)
	if a := math.Abs(r); a == 0 || (a >= 1e-4 && a < 1e12) {
		return strconv.FormatFloat(r, 'f', -1, 64)
	}
	return strconv.FormatFloat(r, 'g', -1, 64)
}

func writePropsTable(w io.Writer, fluid string, st thermo.State) {
	model := ""
	if st.Region > 0 {
		model = fmt.Sprintf(", IAPWS-IF97 region %d", st.Region)
	}
	fmt.Fprintf(w, "%s%s, %s\n", fluid, model, st.Phase)
	row := func(name, si, unit, alt string) {
		line := fmt.Sprintf("  %-4s %14s %-9s %s", name, si, unit, alt)
		fmt.Fprintln(w, strings.TrimRight(line, " "))
	}
	row("p", g(st.P), "Pa", fmt.Sprintf("%s MPa  %s bar", g(st.P/1e6), g(st.P/1e5)))
	row("T", g(st.T), "K", fmt.Sprintf("%s degC", g(st.T-273.15)))
	row("v", g(st.V), "m3/kg", "")
	row("rho", g(st.Rho), "kg/m3", "")
	row("u", g(st.U), "J/kg", fmt.Sprintf("%s kJ/kg", g(st.U/1e3)))
	row("h", g(st.H), "J/kg", fmt.Sprintf("%s kJ/kg", g(st.H/1e3)))
	row("s", g(st.S), "J/kgK", fmt.Sprintf("%s kJ/kgK", g(st.S/1e3)))
	if st.HasDerivatives {
		row("cp", g(st.Cp), "J/kgK", fmt.Sprintf("%s kJ/kgK", g(st.Cp/1e3)))
		row("cv", g(st.Cv), "J/kgK", fmt.Sprintf("%s kJ/kgK", g(st.Cv/1e3)))
		row("w", g(st.W), "m/s", "speed of sound")
	} else {
		row("cp", "-", "", "not defined inside the two-phase region")
		row("cv", "-", "", "")
		row("w", "-", "", "")
	}
	if x, two := st.Quality(); two {
		row("x", g(x), "", "vapour mass fraction")
	} else {
		row("x", "-", "", "single phase")
	}
}
