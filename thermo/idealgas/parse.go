package idealgas

import (
	"fmt"
	"strconv"
	"strings"
)

// ParseComposition parses a composition written as comma- or
// semicolon-separated name=value pairs, e.g. "CH4=0.9, C2H6=0.06, N2=0.04".
// Names are species formulas (case-insensitive, see SpeciesNames). Values
// are fractions, or per cent with a trailing '%' ("CH4=90%"); the result is
// always in fractions. It checks syntax, species names, duplicates and that
// every value is a finite number >= 0; NewMixture checks the sum. Errors
// wrap ErrComposition.
func ParseComposition(s string) (map[string]float64, error) {
	out := make(map[string]float64)
	seen := make(map[int]string)
	fields := strings.FieldsFunc(s, func(r rune) bool { return r == ',' || r == ';' })
	for _, f := range fields {
		f = strings.TrimSpace(f)
		if f == "" {
			continue
		}
		name, val, ok := strings.Cut(f, "=")
		if !ok {
			return nil, fmt.Errorf("idealgas: composition item %q is not name=value: %w", f, ErrComposition)
		}
		name, val = strings.TrimSpace(name), strings.TrimSpace(val)
		i, known := canonical(name)
		if !known {
			return nil, fmt.Errorf("idealgas: unknown species %q (known: %s): %w", name, strings.Join(SpeciesNames(), ", "), ErrComposition)
		}
		if prev, dup := seen[i]; dup {
			return nil, fmt.Errorf("idealgas: species %s given twice (%q and %q): %w", speciesTable[i].Name, prev, name, ErrComposition)
		}
		seen[i] = name
		scale := 1.0
		if v, pct := strings.CutSuffix(val, "%"); pct {
			val, scale = strings.TrimSpace(v), 0.01
		}
		x, err := strconv.ParseFloat(val, 64)
		if err != nil || x != x || x > 1e300 || x < -1e300 {
			return nil, fmt.Errorf("idealgas: fraction of %s: %q is not a finite number: %w", name, val, ErrComposition)
		}
		if x < 0 {
			return nil, fmt.Errorf("idealgas: fraction of %s is negative (%s): %w", name, val, ErrComposition)
		}
		out[speciesTable[i].Name] = x * scale
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("idealgas: empty composition %q: %w", s, ErrComposition)
	}
	return out, nil
}
