package helmholtz

import (
	"fmt"
	"math"

	"github.com/exergywatch/exergywatch/thermo"
)

// props computes the single-phase state at (T, rho) from the tau cache.
// Formulas of testdata/reference/eos/NOTES.md section 5.
func (f *Fluid) props(tp *tauPart, T, rho float64) (thermo.State, resid) {
	return f.propsR(tp, T, rho, f.q.residual(tp, rho/f.rhor, true))
}

// propsR is props with the full residual derivatives r at (T, rho) given.
func (f *Fluid) propsR(tp *tauPart, T, rho float64, r resid) (thermo.State, resid) {
	return f.propsRI(tp, T, rho, r, f.q.ideal(tp.tau))
}

// propsRI is propsR with the ideal-gas part i at tp.tau given as well (both
// saturated phases share it).
func (f *Fluid) propsRI(tp *tauPart, T, rho float64, r resid, i ideal) (thermo.State, resid) {
	delta := rho / f.rhor
	R := f.r
	RT := R * T
	var s thermo.State
	s.T = T
	s.Rho = rho
	s.V = 1 / rho
	s.P = rho * RT * (1 + r.D)
	tt := i.T + r.T // tau (a0_t + ar_t)
	s.U = RT * tt
	s.H = RT * (tt + 1 + r.D)
	s.S = R * (tt - i.A - math.Log(delta) - r.A)
	cvR := -(i.TT + r.TT)
	X := 1 + r.D - r.DT
	Y := 1 + 2*r.D + r.DD
	s.Cv = R * cvR
	s.Cp = s.Cv + R*X*X/Y
	w2 := RT * (Y + X*X/cvR)
	if w2 > 0 {
		s.W = math.Sqrt(w2)
	} else {
		s.W = math.NaN()
	}
	s.HasDerivatives = true
	return s, r
}

// StateTRho returns the single-phase state at temperature T (K) and density
// rho (kg/m3) straight from the equation, with no phase check (Phase is
// PhaseUnknown; a state inside the two-phase dome is the equation's
// metastable or unstable continuation). Inputs outside [T_min, T_max] or
// rho <= 0 are range errors.
func (f *Fluid) StateTRho(T, rho float64) (thermo.State, error) {
	if err := thermo.CheckFinite(f.name, []string{"T", "rho"}, T, rho); err != nil {
		return thermo.State{}, err
	}
	if err := f.checkT(T); err != nil {
		return thermo.State{}, err
	}
	if !(rho > 0) {
		return thermo.State{}, thermo.Below(f.name, "rho", "kg/m3", rho, 0, "density must be positive")
	}
	var tp tauPart
	f.q.tauPart(f.tr/T, &tp)
	s, _ := f.props(&tp, T, rho)
	if !s.Finite() {
		return thermo.State{}, fmt.Errorf("%s: non-finite property at T = %g K, rho = %g kg/m3: %w", f.name, T, rho, thermo.ErrNoConvergence)
	}
	return s, nil
}

func (f *Fluid) checkT(T float64) error {
	if T < f.tmin {
		return thermo.Below(f.name, "T", "K", T, f.tmin, "triple-point temperature of the equation")
	}
	if T > f.tmax {
		return thermo.Above(f.name, "T", "K", T, f.tmax, "")
	}
	return nil
}

func (f *Fluid) checkP(p float64) error {
	if !(p > 0) {
		return thermo.Below(f.name, "p", "Pa", p, 0, "pressure must be positive")
	}
	if p > f.pmax {
		return thermo.Above(f.name, "p", "Pa", p, f.pmax, "")
	}
	return nil
}

// pOf returns p and dp/drho at (T, rho) using only the delta derivatives.
func (f *Fluid) pOf(tp *tauPart, T, rho float64) (p, dpdrho float64) {
	r := f.q.residual(tp, rho/f.rhor, false)
	RT := f.r * T
	return rho * RT * (1 + r.D), RT * (1 + 2*r.D + r.DD)
}

// side selects the branch the density solver looks for.
type side int

const (
	sideVapour side = iota // lowest-density stable root
	sideLiquid             // root above the liquid spinodal
	sideSuper              // the single root above the critical temperature
)

// solveRho finds rho with p(T, rho) = p by Newton's method safeguarded with
// a bracket [lo, hi] (hi = 0: unbounded). A point where dp/drho <= 0 moves
// the bracket away from the unstable region (down for vapour, up for
// liquid). Returns an error wrapping ErrNoConvergence if it fails.
func (f *Fluid) solveRho(tp *tauPart, T, p float64, sd side, lo, hi, rho float64) (float64, resid, error) {
	if hi > 0 && (rho <= lo || rho >= hi) {
		rho = 0.5 * (lo + hi)
	}
	if rho <= lo {
		rho = lo*1.01 + 1e-12
	}
	RT := f.r * T
	for it := 0; it < 200; it++ {
		// Full derivatives (the tau ones cost a few multiplications per
		// term): the last evaluation is reused for the properties.
		r := f.q.residual(tp, rho/f.rhor, true)
		pc, dp := rho*RT*(1+r.D), RT*(1+2*r.D+r.DD)
		fx := pc - p
		if math.IsNaN(fx) || math.IsNaN(dp) {
			return 0, resid{}, fmt.Errorf("%s: density solve at T = %g K, p = %g Pa: non-finite pressure: %w", f.name, T, p, thermo.ErrNoConvergence)
		}
		if dp <= 0 {
			// Unstable region.
			switch sd {
			case sideVapour:
				hi = rho
			case sideLiquid:
				lo = rho
			default:
				// Above Tc p(rho) should be monotonic; treat like a
				// sign-based bracket update so bisection still works.
				if fx > 0 {
					hi = rho
				} else {
					lo = rho
				}
			}
		} else if fx > 0 {
			hi = rho
		} else {
			lo = rho
		}
		// p is computed as rho R T (1 + delta ar_d); in a liquid at low
		// pressure the bracket nearly cancels, so the attainable residual
		// scales with rho R T, not with p.
		tol := 1e-13*p + 1e-14*rho*f.r*T
		if math.Abs(fx) <= tol && dp > 0 {
			return rho, r, nil
		}
		next := math.NaN()
		if dp > 0 {
			// Halley's step with d2p/drho2 = RT (2D + 4DD + DDD)/rho;
			// Newton's when the correction is large (far from the root).
			nt := fx / dp
			c := 1 - 0.5*nt*(RT*(2*r.D+4*r.DD+r.DDD)/rho)/dp
			if c >= 0.5 && c <= 2 {
				nt /= c
			}
			next = rho - nt
		}
		if !(next > lo) || (hi > 0 && !(next < hi)) {
			if hi > 0 {
				next = 0.5 * (lo + hi)
			} else {
				next = 2 * rho
			}
		}
		if math.Abs(next-rho) <= 1e-15*rho {
			// Step below rounding: accept if the residual is small.
			if math.Abs(fx) <= 1e-9*p+1e-12*rho*f.r*T && dp > 0 {
				return rho, r, nil
			}
			if hi > 0 && hi-lo <= 4e-16*hi {
				break
			}
		}
		rho = next
		if hi == 0 && rho > 1e7 {
			break
		}
	}
	return 0, resid{}, fmt.Errorf("%s: density solve at T = %g K, p = %g Pa did not converge: %w", f.name, T, p, thermo.ErrNoConvergence)
}

// rhoMaxBracket is an upper density bound used as the high end of the
// bracket in the liquid and supercritical searches.
func (f *Fluid) rhoMaxBracket() float64 { return 4 * f.rhoLt }

// density solves p(T, rho) = p on the branch of phase ph (PhaseLiquid,
// PhaseVapour or PhaseSupercritical) and checks the root: converged,
// mechanically stable, on the expected side of the critical density and,
// when sat is given, of the saturated densities; a vapour root must be
// plausible against the ideal-gas density. guess <= 0 picks a default start.
func (f *Fluid) density(tp *tauPart, T, p float64, ph thermo.Phase, sat *satPoint, guess float64) (float64, resid, error) {
	rhoIG := p / (f.r * T)
	var rho float64
	var r resid
	var err error
	switch {
	case ph == thermo.PhaseVapour && T < f.tc:
		hi, _, _ := f.branchBounds(T, sat, false)
		g := guess
		if g <= 0 || g >= hi {
			g = min(f.virialGuess(tp, rhoIG), 0.9*hi)
		}
		rho, r, err = f.solveRho(tp, T, p, sideVapour, 0, hi, g)
		if err != nil {
			return 0, resid{}, err
		}
		Z := rhoIG / rho
		if Z < 0.05 || Z > 2 {
			return 0, resid{}, fmt.Errorf("%s: vapour root rho = %g kg/m3 at T = %g K, p = %g Pa is implausible (Z = %g): %w", f.name, rho, T, p, Z, thermo.ErrPhase)
		}
		if rho >= hi || rho >= f.rhoc {
			return 0, resid{}, fmt.Errorf("%s: vapour root rho = %g kg/m3 at T = %g K, p = %g Pa is not below the saturated-vapour density %g: %w", f.name, rho, T, p, hi, thermo.ErrPhase)
		}
	case ph == thermo.PhaseLiquid:
		_, lo, bsat := f.branchBounds(T, sat, true)
		g := guess
		if g <= lo {
			switch {
			case bsat.T > 0:
				g = bsat.rhoL
			case f.ancRL.ok && T < 0.98*f.tc && T < f.ancRL.tr:
				g = lo / (1 - f.ancTolL) // the rhoL ancillary, as widened in branchBounds
			case f.ancRL.ok && T < f.ancRL.tr:
				g = f.ancRL.eval(T)
			default:
				g = 1.5 * f.rhoc
			}
		}
		rho, r, err = f.solveRho(tp, T, p, sideLiquid, lo, f.rhoMaxBracket(), max(g, lo*1.000001))
		if err != nil {
			return 0, resid{}, err
		}
		if rho <= lo || rho <= f.rhoc {
			return 0, resid{}, fmt.Errorf("%s: liquid root rho = %g kg/m3 at T = %g K, p = %g Pa is not above the saturated-liquid density %g: %w", f.name, rho, T, p, lo, thermo.ErrPhase)
		}
	default:
		g := guess
		if g <= 0 {
			g = min(f.virialGuess(tp, rhoIG), 2*f.rhoc)
		}
		rho, r, err = f.solveRho(tp, T, p, sideSuper, 0, f.rhoMaxBracket(), g)
		if err != nil {
			return 0, resid{}, err
		}
	}
	// solveRho returns only converged roots with dp/drho > 0 (mechanically
	// stable); the branch checks are above.
	return rho, r, nil
}

// branchBounds returns the largest plausible vapour density and the
// smallest plausible liquid density at T < Tc: the Maxwell saturated
// densities when sat is given or T is within 2 % of Tc (then computed), else
// the ancillary densities widened by three times their measured deviation
// from this equation (calibrate) plus 0.5 %. For pseudo-pure air the
// ancillaries are used as they are, widened the same way.
//
// Only the bound of the requested branch (liquid or not) is evaluated.
func (f *Fluid) branchBounds(T float64, sat *satPoint, liquid bool) (rhoVmax, rhoLmin float64, sp satPoint) {
	if sat != nil {
		sp = *sat
	} else if !f.pseudoPure && T >= 0.98*f.tc {
		if s, err := f.maxwellAt(T); err == nil {
			sp = s
		}
	}
	if sp.T > 0 {
		return sp.rhoV * (1 + 1e-12), sp.rhoL * (1 - 1e-12), sp
	}
	rhoVmax, rhoLmin = f.rhoc, f.rhoc
	if T < 0.98*f.tc {
		if !liquid && f.ancRV.ok && T < f.ancRV.tr {
			rhoVmax = min(rhoVmax, f.ancRV.eval(T)*(1+f.ancTolV))
		}
		if liquid && f.ancRL.ok && T < f.ancRL.tr {
			rhoLmin = max(rhoLmin, f.ancRL.eval(T)*(1-f.ancTolL))
		}
	}
	return rhoVmax, rhoLmin, sp
}

// virialGuess solves p = rho R T (1 + B rho) with the second virial
// coefficient of the equation (tp.b2 = B rho_r): a start for the density
// iteration of a gas that is far better than the ideal-gas density.
func (f *Fluid) virialGuess(tp *tauPart, rhoIG float64) float64 {
	b2 := tp.b2
	if tp.hasN {
		b2 += f.q.b2NonAnalytic(tp.tau)
	}
	c := 4 * b2 * rhoIG / f.rhor
	if c <= -1 {
		// p lies above the largest pressure of the truncated virial
		// equation: start at the density where its root disappears.
		return 2 * rhoIG
	}
	if !(c > -1) || c > 1 {
		return rhoIG
	}
	rho := 2 * rhoIG / (1 + math.Sqrt(1+c))
	// Refine with the third virial coefficient: Newton on
	// delta (1 + B' delta + C' delta^2) = delta_IG, kept only if it stays
	// within 10 % of the two-term root.
	dIG, d := rhoIG/f.rhor, rho/f.rhor
	c3 := tp.c3
	for i := 0; i < 3; i++ {
		F := d*(1+b2*d+c3*d*d) - dIG
		dF := 1 + 2*b2*d + 3*c3*d*d
		if !(dF > 0) {
			return rho
		}
		d -= F / dF
	}
	if r3 := d * f.rhor; r3 > 0.9*rho && r3 < 1.1*rho {
		return r3
	}
	return rho
}
