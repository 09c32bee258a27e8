// Package fluids maps the fluid names used in configuration and on the
// command line to property models:
//
//	water          IAPWS-IF97 (thermo/if97)
//	air            ideal-gas dry air, NASA-7 polynomials (thermo/idealgas)
//	humid-air      ideal-gas humid air from relative humidity, temperature and pressure
//	flue-gas       ideal-gas products of complete combustion of a fuel gas with air
//	ideal-gas      an ideal-gas mixture of any composition of the NASA-7 species
//	natural-gas    GERG-2008, ISO 20765-2 (thermo/gerg2008), with a composition
//	ammonia, r134a, co2, nitrogen, methane, air-helmholtz, water-iapws95,
//	ammonia-1993   multiparameter Helmholtz equations (thermo/helmholtz)
//
// Compositions are mole fractions keyed by formula (CH4, C2H6, N2, ...).
package fluids

import (
	"errors"
	"fmt"
	"sort"
	"strconv"
	"strings"

	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/gerg2008"
	"github.com/exergywatch/exergywatch/thermo/helmholtz"
	"github.com/exergywatch/exergywatch/thermo/idealgas"
	"github.com/exergywatch/exergywatch/thermo/if97"
)

// ErrUnknown is wrapped when a fluid name is not known.
var ErrUnknown = errors.New("unknown fluid")

// ErrSpec is wrapped when a fluid's parameters are missing or invalid.
var ErrSpec = errors.New("invalid fluid specification")

// Spec is a fluid as configured.
type Spec struct {
	Name string
	// Composition: mole fractions, for natural-gas and ideal-gas mixtures,
	// and the fuel of flue-gas. For humid-air an "H2O" mole fraction may be
	// given instead of the humidity fields.
	Composition map[string]float64
	// RelativeHumidity (fraction 0..1), AmbientT (K) and AmbientP (Pa) fix
	// the water content of humid-air.
	RelativeHumidity, AmbientT, AmbientP float64
	// ExcessAir (fraction, 0.1 = 10 %) sets the air of flue-gas.
	ExcessAir float64
}

// Names lists the accepted fluid names.
func Names() []string {
	n := []string{"water", "air", "humid-air", "flue-gas", "ideal-gas", "natural-gas"}
	n = append(n, helmholtz.Names()...)
	sort.Strings(n)
	return dedupe(n)
}

func dedupe(s []string) []string {
	out := s[:0]
	for i, v := range s {
		if i == 0 || v != s[i-1] {
			out = append(out, v)
		}
	}
	return out
}

// New returns the model for a fluid name with an optional composition.
func New(name string, composition map[string]float64) (thermo.Fluid, error) {
	return FromSpec(Spec{Name: name, Composition: composition})
}

// FromSpec returns the model for a configured fluid.
func FromSpec(s Spec) (thermo.Fluid, error) {
	name := strings.ToLower(strings.TrimSpace(s.Name))
	needComp := func() error {
		if len(s.Composition) == 0 {
			return fmt.Errorf("%w: fluid %s needs a composition (mole fractions, e.g. CH4=0.9,C2H6=0.06,N2=0.04)", ErrSpec, name)
		}
		return nil
	}
	noComp := func() error {
		if len(s.Composition) > 0 {
			return fmt.Errorf("%w: fluid %s has a fixed composition; remove the composition", ErrSpec, name)
		}
		return nil
	}
	switch name {
	case "water":
		if err := noComp(); err != nil {
			return nil, err
		}
		return if97.Water{}, nil
	case "air":
		if err := noComp(); err != nil {
			return nil, err
		}
		return idealgas.DryAir(), nil
	case "humid-air":
		if len(s.Composition) > 0 {
			xv, ok := s.Composition["H2O"]
			if !ok || len(s.Composition) != 1 {
				return nil, fmt.Errorf("%w: humid-air takes only an H2O mole fraction as composition, or relative humidity with ambient T and p", ErrSpec)
			}
			if !(xv >= 0 && xv < 1) {
				return nil, fmt.Errorf("%w: humid-air H2O mole fraction %g must be in [0, 1)", ErrSpec, xv)
			}
			return idealgas.NewMixture(map[string]float64{
				"N2": idealgas.DryAirN2 * (1 - xv), "O2": idealgas.DryAirO2 * (1 - xv), "Ar": idealgas.DryAirAr * (1 - xv), "H2O": xv,
			}, idealgas.MoleFraction)
		}
		if s.AmbientT <= 0 || s.AmbientP <= 0 {
			return nil, fmt.Errorf("%w: humid-air needs relative humidity with ambient temperature and pressure", ErrSpec)
		}
		return idealgas.HumidAir(s.RelativeHumidity, s.AmbientT, s.AmbientP)
	case "flue-gas":
		if err := needComp(); err != nil {
			return nil, err
		}
		fuel, err := idealgas.NewMixture(s.Composition, idealgas.MoleFraction)
		if err != nil {
			return nil, fmt.Errorf("%w: fuel: %w", ErrSpec, err)
		}
		c, err := idealgas.CombustionProductsExcessAir(fuel, idealgas.DryAir(), s.ExcessAir)
		if err != nil {
			return nil, fmt.Errorf("%w: %w", ErrSpec, err)
		}
		return c.Products, nil
	case "ideal-gas":
		if err := needComp(); err != nil {
			return nil, err
		}
		return idealgas.NewMixture(s.Composition, idealgas.MoleFraction)
	case "natural-gas":
		if err := needComp(); err != nil {
			return nil, err
		}
		return gerg2008.New(s.Composition)
	}
	for _, h := range helmholtz.Names() {
		if h == name {
			if err := noComp(); err != nil {
				return nil, err
			}
			return helmholtz.New(name)
		}
	}
	if f, err := helmholtz.New(name); err == nil { // aliases
		if err := noComp(); err != nil {
			return nil, err
		}
		return f, nil
	}
	return nil, fmt.Errorf("%w %q (known: %s)", ErrUnknown, s.Name, strings.Join(Names(), ", "))
}

// ParseComposition reads "CH4=0.9,C2H6=0.06,N2=0.04" (mole fractions; a
// trailing % on every value means per cent).
func ParseComposition(text string) (map[string]float64, error) {
	out := map[string]float64{}
	text = strings.TrimSpace(text)
	if text == "" {
		return nil, fmt.Errorf("%w: empty composition", ErrSpec)
	}
	for _, part := range strings.Split(text, ",") {
		k, v, ok := strings.Cut(strings.TrimSpace(part), "=")
		k, v = strings.TrimSpace(k), strings.TrimSpace(v)
		if !ok || k == "" || v == "" {
			return nil, fmt.Errorf("%w: %q is not NAME=FRACTION", ErrSpec, part)
		}
		scale := 1.0
		if strings.HasSuffix(v, "%") {
			v, scale = strings.TrimSuffix(v, "%"), 0.01
		}
		f, err := strconv.ParseFloat(v, 64)
		if err != nil || f < 0 || f > 100 || f != f {
			return nil, fmt.Errorf("%w: %s=%s is not a fraction", ErrSpec, k, v)
		}
		if _, dup := out[k]; dup {
			return nil, fmt.Errorf("%w: %s given twice", ErrSpec, k)
		}
		out[k] = f * scale
	}
	return out, nil
}
