package gerg2008

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
)

// ErrComposition is wrapped by every error New and ParseComposition return
// for a bad composition (unknown or repeated component, negative, non-finite
// or non-normalised fractions, malformed text).
var ErrComposition = errors.New("gerg2008: invalid composition")

// componentNames lists the 21 GERG-2008 components in the published order of
// Kunz & Wagner (2012) with the extra names New accepts for each. Matching is
// case-insensitive; '_' counts as a space.
var componentNames = [nComp][]string{
	{"methane", "CH4", "C1"},
	{"nitrogen", "N2"},
	{"carbon dioxide", "CO2", "carbon-dioxide", "carbondioxide"},
	{"ethane", "C2H6", "C2"},
	{"propane", "C3H8", "C3"},
	{"n-butane", "n-C4H10", "nC4H10", "nC4", "n-C4", "butane"},
	{"isobutane", "i-C4H10", "iC4H10", "iC4", "i-C4", "i-butane", "2-methylpropane"},
	{"n-pentane", "n-C5H12", "nC5H12", "nC5", "n-C5", "pentane"},
	{"isopentane", "i-C5H12", "iC5H12", "iC5", "i-C5", "i-pentane", "2-methylbutane"},
	{"n-hexane", "n-C6H14", "nC6H14", "C6H14", "nC6", "n-C6", "C6", "hexane"},
	{"n-heptane", "n-C7H16", "nC7H16", "C7H16", "nC7", "n-C7", "C7", "heptane"},
	{"n-octane", "n-C8H18", "nC8H18", "C8H18", "nC8", "n-C8", "C8", "octane"},
	{"n-nonane", "n-C9H20", "nC9H20", "C9H20", "nC9", "n-C9", "C9", "nonane"},
	{"n-decane", "n-C10H22", "nC10H22", "C10H22", "nC10", "n-C10", "C10", "decane"},
	{"hydrogen", "H2"},
	{"oxygen", "O2"},
	{"carbon monoxide", "CO", "carbon-monoxide", "carbonmonoxide"},
	{"water", "H2O"},
	{"hydrogen sulfide", "H2S", "hydrogen sulphide", "hydrogen-sulfide"},
	{"helium", "He"},
	{"argon", "Ar"},
}

var aliasIndex = func() map[string]int {
	m := make(map[string]int, 6*nComp)
	for i, names := range componentNames {
		for _, n := range names {
			k := normName(n)
			if _, dup := m[k]; dup {
				panic("gerg2008: duplicate component alias " + n) // programmer error in the table above
			}
			m[k] = i
		}
	}
	return m
}()

func normName(s string) string {
	return strings.ToLower(strings.Join(strings.Fields(strings.ReplaceAll(s, "_", " ")), " "))
}

// Components returns the canonical names of the 21 GERG-2008 components in
// the published order (methane, nitrogen, carbon dioxide, ethane, propane,
// n-butane, isobutane, n-pentane, isopentane, n-hexane, n-heptane, n-octane,
// n-nonane, n-decane, hydrogen, oxygen, carbon monoxide, water, hydrogen
// sulfide, helium, argon).
func Components() []string {
	out := make([]string, nComp)
	for i, n := range componentNames {
		out[i] = n[0]
	}
	return out
}

// Aliases returns every name New accepts for the canonical component name
// (the canonical name first), or nil for an unknown name.
func Aliases(component string) []string {
	i, ok := aliasIndex[normName(component)]
	if !ok {
		return nil
	}
	return append([]string(nil), componentNames[i]...)
}

// Canonical returns the canonical name of a component given any accepted
// name (e.g. "CH4", "nC4", "Methane"), and false for an unknown name.
func Canonical(name string) (string, bool) {
	i, ok := aliasIndex[normName(name)]
	if !ok {
		return "", false
	}
	return componentNames[i][0], true
}

// sumTolerance is how far the fractions given to New may sum from 1.
const sumTolerance = 1e-6

// normalise validates a composition and returns mole fractions indexed in
// published order, scaled to sum exactly to 1.
func normalise(comp map[string]float64) ([nComp]float64, error) {
	var x [nComp]float64
	if len(comp) == 0 {
		return x, fmt.Errorf("%w: no components given", ErrComposition)
	}
	var given [nComp]string
	// Sorted keys make the error for a map with several faults deterministic.
	keys := make([]string, 0, len(comp))
	for k := range comp {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	sum := 0.0
	for _, name := range keys {
		v := comp[name]
		i, ok := aliasIndex[normName(name)]
		if !ok {
			return x, fmt.Errorf("%w: unknown component %q (GERG-2008 knows: %s)", ErrComposition, name, strings.Join(Components(), ", "))
		}
		if given[i] != "" {
			return x, fmt.Errorf("%w: %q and %q both name %s", ErrComposition, given[i], name, componentNames[i][0])
		}
		given[i] = name
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return x, fmt.Errorf("%w: %s fraction %v is not finite", ErrComposition, name, v)
		}
		if v < 0 {
			return x, fmt.Errorf("%w: %s fraction %g is negative", ErrComposition, name, v)
		}
		if v > 1+sumTolerance {
			return x, fmt.Errorf("%w: %s fraction %g exceeds 1", ErrComposition, name, v)
		}
		x[i] = v
		sum += v
	}
	if math.Abs(sum-1) > sumTolerance {
		return x, fmt.Errorf("%w: mole fractions sum to %.9g, want 1 within %g", ErrComposition, sum, sumTolerance)
	}
	for i := range x {
		x[i] /= sum
	}
	return x, nil
}

// ParseComposition reads a composition written as comma- or
// semicolon-separated name=fraction pairs, e.g. "CH4=0.9, C2H6=0.06, N2=0.04".
// Names are any accepted by Canonical; fractions are mole fractions. The
// result is validated as by New.
func ParseComposition(s string) (map[string]float64, error) {
	out := map[string]float64{}
	fields := strings.FieldsFunc(s, func(r rune) bool { return r == ',' || r == ';' })
	if len(fields) == 0 {
		return nil, fmt.Errorf("%w: empty composition", ErrComposition)
	}
	for _, f := range fields {
		name, val, ok := strings.Cut(f, "=")
		name = strings.TrimSpace(name)
		val = strings.TrimSpace(val)
		if !ok || name == "" || val == "" {
			return nil, fmt.Errorf("%w: %q is not name=fraction", ErrComposition, strings.TrimSpace(f))
		}
		v, err := strconv.ParseFloat(val, 64)
		if err != nil {
			return nil, fmt.Errorf("%w: %q: fraction %q is not a number", ErrComposition, name, val)
		}
		if _, dup := out[name]; dup {
			return nil, fmt.Errorf("%w: %q given twice", ErrComposition, name)
		}
		out[name] = v
	}
	if _, err := normalise(out); err != nil {
		return nil, err
	}
	return out, nil
}
