// Package units converts engineering quantities written with a unit
// ("16MPa", "538degC", "250 t/h") into SI values. It is the one place where
// units are converted on the way in: the CLI, the config loader and the tag
// mapper call it; everything behind them works in SI (Pa, K, J/kg,
// J/(kg·K), kg/s, W, rad/s, fraction).
//
// Pressures are absolute. Gauge units (barg, psig, kPag, MPag) are known, so
// that a gauge reading is recognised and refused by callers that need an
// absolute pressure (Parse returns ErrGauge), or converted with an explicit
// barometric pressure (Unit.ToSIAbsolute).
package units

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode"
)

// Kind is the physical quantity a unit measures.
type Kind int

// Quantity kinds. The SI unit of each is given.
const (
	Pressure         Kind = iota + 1 // Pa (absolute)
	Temperature                      // K
	TemperatureDelta                 // K (a difference: 1 degC = 1 K, 1 degF = 5/9 K)
	SpecificEnergy                   // J/kg (enthalpy, work, head as energy)
	SpecificEntropy                  // J/(kg·K) (also specific heat capacity)
	MassFlow                         // kg/s
	Power                            // W
	Fraction                         // dimensionless 0..1 (quality, relative humidity, efficiency)
	RotationalSpeed                  // rad/s
	Density                          // kg/m3
)

var kindNames = map[Kind]string{
	Pressure: "pressure", Temperature: "temperature", TemperatureDelta: "temperature difference",
	SpecificEnergy: "specific energy", SpecificEntropy: "specific entropy", MassFlow: "mass flow",
	Power: "power", Fraction: "fraction", RotationalSpeed: "rotational speed", Density: "density",
}

func (k Kind) String() string {
	if n, ok := kindNames[k]; ok {
		return n
	}
	return fmt.Sprintf("Kind(%d)", int(k))
}

// SIUnit returns the name of the SI unit of the kind.
func (k Kind) SIUnit() string {
	switch k {
	case Pressure:
		return "Pa"
	case Temperature, TemperatureDelta:
		return "K"
	case SpecificEnergy:
		return "J/kg"
	case SpecificEntropy:
		return "J/kgK"
	case MassFlow:
		return "kg/s"
	case Power:
		return "W"
	case Fraction:
		return "fraction"
	case RotationalSpeed:
		return "rad/s"
	case Density:
		return "kg/m3"
	}
	return "?"
}

// Errors callers branch on.
var (
	ErrUnknownUnit = errors.New("unknown unit")
	ErrWrongKind   = errors.New("unit does not fit the quantity")
	ErrGauge       = errors.New("gauge pressure unit where an absolute pressure is required")
	ErrSyntax      = errors.New("not a number with an optional unit")
)

// Unit is a linear conversion to SI: si = value*Scale + Offset.
type Unit struct {
	Name   string  // canonical spelling, e.g. "MPa", "degC"
	Kind   Kind    // what it measures
	Scale  float64 // SI per unit
	Offset float64 // SI offset (temperatures only)
	Gauge  bool    // a gauge pressure: ToSI needs a barometric pressure
}

// ToSI converts v in this unit to SI. For gauge units it returns the gauge
// pressure in Pa (not absolute); use ToSIAbsolute.
func (u Unit) ToSI(v float64) float64 { return v*u.Scale + u.Offset }

// FromSI converts an SI value to this unit.
func (u Unit) FromSI(si float64) float64 { return (si - u.Offset) / u.Scale }

// ToSIAbsolute converts a pressure to absolute Pa, adding the barometric
// pressure barometerPa for gauge units.
func (u Unit) ToSIAbsolute(v, barometerPa float64) float64 {
	if u.Gauge {
		return v*u.Scale + barometerPa
	}
	return v*u.Scale + u.Offset
}

// Exact conversion factors (common practice; the pound and the inch are exact
// by the 1959 international agreement, so psi = 0.45359237 kg * 9.80665
// m/s2 / 0.0254^2 m2; the IT Btu/lb = 2326 J/kg exactly).
const (
	paPerPsi      = 0.45359237 * 9.80665 / (0.0254 * 0.0254)
	kgPerLb       = 0.45359237
	jPerKgPerBtuL = 2326.0
)

var table = func() map[string]Unit {
	m := map[string]Unit{}
	add := func(u Unit, aliases ...string) {
		m[u.Name] = u
		for _, a := range aliases {
			m[a] = u
		}
	}
	// Pressure (absolute unless Gauge).
	add(Unit{Name: "Pa", Kind: Pressure, Scale: 1})
	add(Unit{Name: "kPa", Kind: Pressure, Scale: 1e3})
	add(Unit{Name: "MPa", Kind: Pressure, Scale: 1e6})
	add(Unit{Name: "bar", Kind: Pressure, Scale: 1e5}, "bara", "bar(a)")
	add(Unit{Name: "mbar", Kind: Pressure, Scale: 100}, "hPa")
	add(Unit{Name: "psi", Kind: Pressure, Scale: paPerPsi}, "psia")
	add(Unit{Name: "Pag", Kind: Pressure, Scale: 1, Gauge: true})
	add(Unit{Name: "kPag", Kind: Pressure, Scale: 1e3, Gauge: true}, "kPa(g)")
	add(Unit{Name: "MPag", Kind: Pressure, Scale: 1e6, Gauge: true}, "MPa(g)")
	add(Unit{Name: "barg", Kind: Pressure, Scale: 1e5, Gauge: true}, "bar(g)")
	add(Unit{Name: "mbarg", Kind: Pressure, Scale: 100, Gauge: true})
	add(Unit{Name: "psig", Kind: Pressure, Scale: paPerPsi, Gauge: true})
	// Temperature.
	add(Unit{Name: "K", Kind: Temperature, Scale: 1})
	add(Unit{Name: "degC", Kind: Temperature, Scale: 1, Offset: 273.15}, "°C", "celsius")
	add(Unit{Name: "degF", Kind: Temperature, Scale: 5.0 / 9.0, Offset: 273.15 - 32*5.0/9.0}, "°F", "fahrenheit")
	// Specific energy.
	add(Unit{Name: "J/kg", Kind: SpecificEnergy, Scale: 1})
	add(Unit{Name: "kJ/kg", Kind: SpecificEnergy, Scale: 1e3})
	add(Unit{Name: "MJ/kg", Kind: SpecificEnergy, Scale: 1e6})
	add(Unit{Name: "Btu/lb", Kind: SpecificEnergy, Scale: jPerKgPerBtuL})
	// Specific entropy / heat capacity.
	add(Unit{Name: "J/kgK", Kind: SpecificEntropy, Scale: 1}, "J/(kg K)", "J/(kg·K)", "J/kg-K", "J/kg/K")
	add(Unit{Name: "kJ/kgK", Kind: SpecificEntropy, Scale: 1e3}, "kJ/(kg K)", "kJ/(kg·K)", "kJ/kg-K", "kJ/kg/K")
	// Mass flow.
	add(Unit{Name: "kg/s", Kind: MassFlow, Scale: 1})
	add(Unit{Name: "g/s", Kind: MassFlow, Scale: 1e-3})
	add(Unit{Name: "kg/min", Kind: MassFlow, Scale: 1.0 / 60})
	add(Unit{Name: "kg/h", Kind: MassFlow, Scale: 1.0 / 3600})
	add(Unit{Name: "t/h", Kind: MassFlow, Scale: 1000.0 / 3600})
	add(Unit{Name: "lb/h", Kind: MassFlow, Scale: kgPerLb / 3600})
	// Power.
	add(Unit{Name: "W", Kind: Power, Scale: 1})
	add(Unit{Name: "kW", Kind: Power, Scale: 1e3})
	add(Unit{Name: "MW", Kind: Power, Scale: 1e6})
	// Fraction.
	add(Unit{Name: "fraction", Kind: Fraction, Scale: 1}, "1", "ratio")
	add(Unit{Name: "%", Kind: Fraction, Scale: 0.01}, "percent", "pct")
	// Rotational speed.
	add(Unit{Name: "rad/s", Kind: RotationalSpeed, Scale: 1})
	add(Unit{Name: "rpm", Kind: RotationalSpeed, Scale: 2 * math.Pi / 60}, "1/min", "rev/min")
	add(Unit{Name: "rev/s", Kind: RotationalSpeed, Scale: 2 * math.Pi})
	// Density.
	add(Unit{Name: "kg/m3", Kind: Density, Scale: 1}, "kg/m^3", "kg/m³")
	return m
}()

// Lookup returns the unit with the given name or alias. Names are case
// sensitive where SI prefixes require it ("MPa" vs "mPa" is not accepted);
// the gauge suffixes are recognised.
func Lookup(name string) (Unit, error) {
	name = strings.TrimSpace(name)
	if u, ok := table[name]; ok {
		return u, nil
	}
	return Unit{}, fmt.Errorf("%w %q", ErrUnknownUnit, name)
}

// LookupKind returns the unit with the given name and checks that it measures
// kind k. For temperature differences, K, degC and degF are accepted and
// mean a difference (no offset).
func LookupKind(name string, k Kind) (Unit, error) {
	u, err := Lookup(name)
	if err != nil {
		return Unit{}, fmt.Errorf("%w; %s units are %s", err, k, strings.Join(Names(k), ", "))
	}
	if k == TemperatureDelta && u.Kind == Temperature {
		u.Kind, u.Offset = TemperatureDelta, 0
	}
	if u.Kind != k {
		return Unit{}, fmt.Errorf("%w: %q is a %s unit, need a %s unit (%s)", ErrWrongKind, name, u.Kind, k, strings.Join(Names(k), ", "))
	}
	return u, nil
}

// Names lists the canonical unit names of a kind, for error messages.
func Names(k Kind) []string {
	if k == TemperatureDelta {
		k = Temperature
	}
	seen := map[string]bool{}
	var out []string
	for _, u := range table {
		if u.Kind == k && !seen[u.Name] {
			seen[u.Name] = true
			out = append(out, u.Name)
		}
	}
	sortStrings(out)
	return out
}

func sortStrings(s []string) {
	for i := 1; i < len(s); i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
}

// Split separates "16MPa", "16 MPa" or "-3.5e2 degC" into the number and the
// unit text (empty when the string is a bare number).
func Split(s string) (float64, string, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, "", fmt.Errorf("%w: empty value", ErrSyntax)
	}
	// The number is the longest prefix that parses as a float.
	end := 0
	for i, r := range s {
		if unicode.IsDigit(r) || r == '.' || r == '+' || r == '-' || r == 'e' || r == 'E' {
			// 'e' may start a unit ("e" never does here) — accept only if a
			// digit or sign follows; handled by trying the parse below.
			end = i + 1
			continue
		}
		break
	}
	for ; end > 0; end-- {
		_, err := strconv.ParseFloat(s[:end], 64)
		if err == nil {
			break
		}
		if errors.Is(err, strconv.ErrRange) {
			return 0, "", fmt.Errorf("%w: %q is out of the floating-point range", ErrSyntax, s)
		}
	}
	if end == 0 {
		return 0, "", fmt.Errorf("%w: %q does not start with a number", ErrSyntax, s)
	}
	v, _ := strconv.ParseFloat(s[:end], 64)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, "", fmt.Errorf("%w: %q is not finite", ErrSyntax, s)
	}
	return v, strings.TrimSpace(s[end:]), nil
}

// Parse reads a value of kind k such as "16MPa" or "538 degC" and returns it
// in SI. A bare number is taken as SI. Gauge pressure units return an error
// wrapping ErrGauge, since an absolute pressure cannot be formed without a
// barometric pressure.
func Parse(s string, k Kind) (float64, error) {
	v, name, err := Split(s)
	if err != nil {
		return 0, err
	}
	if name == "" {
		return v, nil
	}
	u, err := LookupKind(name, k)
	if err != nil {
		return 0, err
	}
	if u.Gauge {
		return 0, fmt.Errorf("%w: %q is a gauge reading; give the absolute pressure (e.g. add the barometric pressure, about 101.325 kPa at sea level) with an absolute unit such as %s",
			ErrGauge, s, strings.Join(absolutePressureNames(), ", "))
	}
	return u.ToSI(v), nil
}

func absolutePressureNames() []string {
	var out []string
	for _, n := range Names(Pressure) {
		if !table[n].Gauge {
			out = append(out, n)
		}
	}
	return out
}
