package machine

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// Small reference fluids for tests whose answers have closed forms. They are
// the textbook models themselves (e.g. Çengel & Boles §7-9 for the ideal
// gas, §7-7 for the incompressible substance), not stand-ins for a real
// property model.

const (
	tRef = 298.15
	pRef = 101325.0
)

// idealGas has cp(T) = a + b T (b = 0: constant cp), R in J/(kg K):
// h = a (T - Tr) + b/2 (T² - Tr²), s = a ln(T/Tr) + b (T - Tr) - R ln(p/pr).
// phase lets a test pretend the gas is a real fluid (PhaseVapour) so that
// the Schultz method is used instead of the ideal-gas relation.
type idealGas struct {
	R, a, b float64
	phase   thermo.Phase
}

func (g idealGas) Name() string { return "test-ideal-gas" }

func (g idealGas) cp(T float64) float64 { return g.a + g.b*T }
func (g idealGas) h(T float64) float64 {
	return g.a*(T-tRef) + g.b/2*(T*T-tRef*tRef)
}
func (g idealGas) s0(T float64) float64 { return g.a*math.Log(T/tRef) + g.b*(T-tRef) }

func (g idealGas) state(p, T float64) (thermo.State, error) {
	if !(T > 20 && T < 5000) || !(p > 0 && p < 1e9) {
		return thermo.State{}, fmt.Errorf("test gas p=%g T=%g: %w", p, T, thermo.ErrOutOfRange)
	}
	cp := g.cp(T)
	v := g.R * T / p
	ph := g.phase
	if ph == 0 {
		ph = thermo.PhaseGas
	}
	h := g.h(T)
	return thermo.State{P: p, T: T, V: v, Rho: 1 / v, H: h, U: h - g.R*T, S: g.s0(T) - g.R*math.Log(p/pRef),
		Cp: cp, Cv: cp - g.R, W: math.Sqrt(cp / (cp - g.R) * g.R * T), HasDerivatives: true, Phase: ph}, nil
}

func (g idealGas) Flash(pair thermo.Pair, a, b float64) (thermo.State, error) {
	if err := thermo.CheckFinite(g.Name(), []string{"a", "b"}, a, b); err != nil {
		return thermo.State{}, err
	}
	switch pair {
	case thermo.PT:
		return g.state(a, b)
	case thermo.PH:
		T := 300.0
		for range 60 {
			dT := (g.h(T) - b) / g.cp(T)
			T -= dT
			if math.Abs(dT) < 1e-13*T {
				break
			}
		}
		return g.state(a, T)
	case thermo.PS:
		target := b + g.R*math.Log(a/pRef) // s0(T) = s + R ln(p/pr)
		T := 300.0
		for range 60 {
			dT := (g.s0(T) - target) / (g.cp(T) / T)
			T -= dT
			if T <= 0 {
				T = 1
			}
			if math.Abs(dT) < 1e-13*T {
				break
			}
		}
		return g.state(a, T)
	}
	return thermo.State{}, fmt.Errorf("test gas pair %v: %w", pair, thermo.ErrUnsupported)
}

// liquid is an incompressible substance with constant c and v:
// h = c (T - Tr) + v (p - pr), s = c ln(T/Tr). Its isentrope is isothermal,
// so h2s - h1 = v (p2 - p1) exactly.
type liquid struct{ c, v float64 }

func (l liquid) Name() string { return "test-liquid" }

func (l liquid) state(p, T float64) (thermo.State, error) {
	if !(T > 200 && T < 700) || !(p > 0) {
		return thermo.State{}, fmt.Errorf("test liquid: %w", thermo.ErrOutOfRange)
	}
	h := l.c*(T-tRef) + l.v*(p-pRef)
	return thermo.State{P: p, T: T, V: l.v, Rho: 1 / l.v, H: h, U: h - p*l.v, S: l.c * math.Log(T/tRef),
		Cp: l.c, Cv: l.c, W: 1500, HasDerivatives: true, Phase: thermo.PhaseLiquid}, nil
}

func (l liquid) Flash(pair thermo.Pair, a, b float64) (thermo.State, error) {
	if err := thermo.CheckFinite(l.Name(), []string{"a", "b"}, a, b); err != nil {
		return thermo.State{}, err
	}
	switch pair {
	case thermo.PT:
		return l.state(a, b)
	case thermo.PH:
		return l.state(a, tRef+(b-l.v*(a-pRef))/l.c)
	case thermo.PS:
		return l.state(a, tRef*math.Exp(b/l.c))
	}
	return thermo.State{}, fmt.Errorf("test liquid pair %v: %w", pair, thermo.ErrUnsupported)
}

// Air as a constant-cp ideal gas: R = 287.05 J/(kg K), cp = 1004.5 J/(kg K),
// k ≈ 1.4 (Çengel & Boles Table A-2a values rounded; from memory).
var airConst = idealGas{R: 287.05, a: 1004.5}
