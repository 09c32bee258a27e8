package uncert

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// ErrClass: an unknown instrument class, or a temperature outside the range
// for which the class tolerance is defined.
var ErrClass = errors.New("uncert: instrument class")

// Coverage assumption for tolerance classes: a class tolerance is a limit
// that a conforming sensor does not exceed; with no further knowledge the
// error is taken as uniformly distributed between -tol and +tol (a
// rectangular distribution of half-width tol), whose standard deviation is
// tol/sqrt(3) (GUM JCGM 100:2008 §4.3.7; ASME PTC 19.1-2018 §5-3.1 treats
// a manufacturer's specification the same way). Tolerance of the sensor only:
// the transmitter, the thermowell and installation effects are separate
// inputs the user adds with a direct standard uncertainty.
func StdFromTolerance(tol float64) float64 { return tol / math.Sqrt(3) }

// TempClass is a temperature-sensor tolerance class.
type TempClass struct {
	// Kind is "rtd" (IEC 60751 platinum resistance thermometer) or "tc"
	// (IEC 60584-1 thermocouple).
	Kind string
	// Class is "AA", "A", "B", "C" for RTDs, "1" or "2" for thermocouples.
	Class string
	// Type is the thermocouple type letter ("K", "N", "J", "E", "T", "R",
	// "S"); empty for RTDs.
	Type string
}

// IsZero reports whether no class is set.
func (c TempClass) IsZero() bool { return c.Kind == "" }

func (c TempClass) String() string {
	switch c.Kind {
	case "rtd":
		return "rtd-" + c.Class
	case "tc":
		return "tc-" + c.Type + "-" + c.Class
	}
	return ""
}

// rtdClass holds an IEC 60751 tolerance ±(a + b|t|) in °C (t in °C) and the
// range of validity for wire-wound elements.
// Source: IEC 60751:2008/2022, Table 1 (tolerance classes for wire-wound and
// film resistors), from memory: AA ±(0.1 + 0.0017|t|) -50..250 °C,
// A ±(0.15 + 0.002|t|) -100..450 °C, B ±(0.3 + 0.005|t|) -196..600 °C,
// C ±(0.6 + 0.01|t|) -196..600 °C. Film elements have narrower ranges
// (AA 0..150, A -30..300, B -50..500 °C); the wire-wound ranges are used.
var rtdClasses = map[string]struct{ a, b, lo, hi float64 }{
	"AA": {0.1, 0.0017, -50, 250},
	"A":  {0.15, 0.002, -100, 450},
	"B":  {0.3, 0.005, -196, 600},
	"C":  {0.6, 0.01, -196, 600},
}

// tcClass holds an IEC 60584-1 tolerance max(a, b|t|) in °C and its range.
// Source: IEC 60584-1:2013, Table 2 (tolerance classes), from memory:
//
//	T class 1: ±0.5 °C or ±0.004|t|, -40..350 °C; class 2: ±1.0 °C or ±0.0075|t|, -40..350 °C
//	E class 1: ±1.5 °C or ±0.004|t|, -40..800 °C; class 2: ±2.5 °C or ±0.0075|t|, -40..900 °C
//	J class 1: ±1.5 °C or ±0.004|t|, -40..750 °C; class 2: ±2.5 °C or ±0.0075|t|, -40..750 °C
//	K, N class 1: ±1.5 °C or ±0.004|t|, -40..1000 °C; class 2: ±2.5 °C or ±0.0075|t|, -40..1200 °C
//	R, S class 1: ±1.0 °C 0..1100 °C, ±(1 + 0.003(t-1100)) °C 1100..1600 °C; class 2: ±1.5 °C or ±0.0025|t|, 0..1600 °C
//
// "or" means the greater of the two.
var tcClasses = map[string]struct{ a, b, lo, hi float64 }{
	"T1": {0.5, 0.004, -40, 350}, "T2": {1.0, 0.0075, -40, 350},
	"E1": {1.5, 0.004, -40, 800}, "E2": {2.5, 0.0075, -40, 900},
	"J1": {1.5, 0.004, -40, 750}, "J2": {2.5, 0.0075, -40, 750},
	"K1": {1.5, 0.004, -40, 1000}, "K2": {2.5, 0.0075, -40, 1200},
	"N1": {1.5, 0.004, -40, 1000}, "N2": {2.5, 0.0075, -40, 1200},
	"R1": {1.0, 0, 0, 1600}, "R2": {1.5, 0.0025, 0, 1600},
	"S1": {1.0, 0, 0, 1600}, "S2": {1.5, 0.0025, 0, 1600},
}

// ParseTempClass reads "rtd-AA", "rtd-A", "rtd-B", "rtd-C" (IEC 60751) or
// "tc-K-1", "tc-N-2", ... (IEC 60584-1 type and class). Case-insensitive.
func ParseTempClass(s string) (TempClass, error) {
	parts := strings.Split(strings.ToUpper(strings.TrimSpace(s)), "-")
	switch {
	case len(parts) == 2 && parts[0] == "RTD":
		if _, ok := rtdClasses[parts[1]]; ok {
			return TempClass{Kind: "rtd", Class: parts[1]}, nil
		}
	case len(parts) == 3 && parts[0] == "TC":
		if _, ok := tcClasses[parts[1]+parts[2]]; ok {
			return TempClass{Kind: "tc", Type: parts[1], Class: parts[2]}, nil
		}
	}
	return TempClass{}, fmt.Errorf("%w %q unknown: want rtd-AA, rtd-A, rtd-B, rtd-C (IEC 60751) or tc-<K|N|J|E|T|R|S>-<1|2> (IEC 60584-1)", ErrClass, s)
}

// Tolerance returns the class tolerance (half-width, K) at temperature T in
// K, or an error if T lies outside the range for which the class is defined.
func (c TempClass) Tolerance(T float64) (float64, error) {
	if !finite(T) {
		return 0, fmt.Errorf("%w: temperature %v is not finite", ErrClass, T)
	}
	t := T - 273.15 // the standards state tolerances in °C of the reading
	var a, b, lo, hi float64
	switch c.Kind {
	case "rtd":
		k, ok := rtdClasses[c.Class]
		if !ok {
			return 0, fmt.Errorf("%w: unknown RTD class %q", ErrClass, c.Class)
		}
		if t < k.lo || t > k.hi {
			return 0, fmt.Errorf("%w: IEC 60751 class %s is defined from %g to %g degC, not at %.2f degC", ErrClass, c.Class, k.lo, k.hi, t)
		}
		return k.a + k.b*math.Abs(t), nil
	case "tc":
		k, ok := tcClasses[c.Type+c.Class]
		if !ok {
			return 0, fmt.Errorf("%w: unknown thermocouple type/class %s/%s", ErrClass, c.Type, c.Class)
		}
		a, b, lo, hi = k.a, k.b, k.lo, k.hi
		if t < lo || t > hi {
			return 0, fmt.Errorf("%w: IEC 60584-1 type %s class %s is defined from %g to %g degC, not at %.2f degC", ErrClass, c.Type, c.Class, lo, hi, t)
		}
		if (c.Type == "R" || c.Type == "S") && c.Class == "1" && t > 1100 {
			return 1 + 0.003*(t-1100), nil
		}
		return math.Max(a, b*math.Abs(t)), nil
	}
	return 0, fmt.Errorf("%w: no class set", ErrClass)
}

// StdUncertainty returns the standard uncertainty (K) of a reading at T (K)
// from the class tolerance under the rectangular assumption of
// StdFromTolerance.
func (c TempClass) StdUncertainty(T float64) (float64, error) {
	tol, err := c.Tolerance(T)
	if err != nil {
		return 0, err
	}
	return StdFromTolerance(tol), nil
}
