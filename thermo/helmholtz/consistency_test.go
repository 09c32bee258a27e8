package helmholtz

import (
	"errors"
	"math"
	"sync"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

var pureNames = []string{"ammonia", "ammonia-1993", "r134a", "co2", "nitrogen", "methane", "water-iapws95"}

// TestDerivativesFiniteDifference checks every analytic derivative of both
// parts against central differences (common practice, no source: an
// identity of the evaluator). Covers power, Gaussian, Gao association
// (ammonia), non-analytic (water near its critical point, co2) and the
// generalized Planck-Einstein term (air).
func TestDerivativesFiniteDifference(t *testing.T) {
	cases := []struct {
		fluid      string
		tau, delta float64
	}{
		{"ammonia", 1.3, 2.5}, {"ammonia", 0.9, 0.3}, {"ammonia-1993", 1.1, 1.7},
		{"r134a", 1.2, 2.2}, {"co2", 1.02, 0.9}, {"co2", 0.97, 1.08}, {"nitrogen", 1.5, 2.4},
		{"methane", 1.1, 0.8}, {"air-helmholtz", 1.4, 2.6}, {"air-helmholtz", 0.3, 0.05},
		{"water-iapws95", 1.05, 1.1}, {"water-iapws95", 0.995, 0.93}, {"water-iapws95", 2.2, 3.1},
	}
	for _, c := range cases {
		f := mustNew(t, c.fluid)
		i0, r0, err := f.Parts(c.tau, c.delta)
		if err != nil {
			t.Fatal(err)
		}
		h := 1e-5
		ip, rp, _ := f.Parts(c.tau, c.delta*(1+h))
		im, rm, _ := f.Parts(c.tau, c.delta*(1-h))
		dd := 2 * h * c.delta
		it, rt, _ := f.Parts(c.tau*(1+h), c.delta)
		iu, ru, _ := f.Parts(c.tau*(1-h), c.delta)
		dt := 2 * h * c.tau
		check := func(name string, got, want float64) {
			if math.Abs(got-want) > 2e-6*math.Max(1, math.Abs(want)) {
				t.Errorf("%s tau=%g delta=%g %s: analytic %.10g, numerical %.10g", c.fluid, c.tau, c.delta, name, got, want)
			}
		}
		check("phir_delta", r0.PhiDelta, (rp.Phi-rm.Phi)/dd)
		check("phir_deltadelta", r0.PhiDeltaDelta, (rp.PhiDelta-rm.PhiDelta)/dd)
		check("phir_tau", r0.PhiTau, (rt.Phi-ru.Phi)/dt)
		check("phir_tautau", r0.PhiTauTau, (rt.PhiTau-ru.PhiTau)/dt)
		check("phir_deltatau", r0.PhiDeltaTau, (rt.PhiDelta-ru.PhiDelta)/dt)
		check("phi0_delta", i0.PhiDelta, (ip.Phi-im.Phi)/dd)
		check("phi0_tau", i0.PhiTau, (it.Phi-iu.Phi)/dt)
		check("phi0_tautau", i0.PhiTauTau, (it.PhiTau-iu.PhiTau)/dt)
	}
}

// TestSecondVirial: the delta -> 0 limit of ar_d used for the gas-density
// start (tauPart.b2) equals ar_d at delta = 1e-9 (identity, no source).
func TestSecondVirial(t *testing.T) {
	for _, name := range append(pureNames, "air-helmholtz") {
		f := mustNew(t, name)
		for _, tau := range []float64{0.4, 1, 1.8} {
			var tp tauPart
			f.q.tauPart(tau, &tp)
			const d = 1e-9
			r := f.q.residual(&tp, d, false)
			b2 := tp.b2 + f.q.b2NonAnalytic(tau)
			if relDiff(r.D/d, b2) > 1e-6 {
				t.Errorf("%s tau=%g: b2 %.10g, ar_d(1e-9) %.10g", name, tau, b2, r.D/d)
			}
		}
	}
}

// satTemps returns test temperatures from the triple point to within
// 1e-5 Tc of the critical point.
func satTemps(f *Fluid) []float64 {
	var out []float64
	for _, x := range []float64{0, 0.2, 0.5, 0.8, 0.95} {
		out = append(out, f.tmin+x*(0.99*f.tc-f.tmin))
	}
	for _, x := range []float64{1e-2, 5e-3, 1e-3, 1e-4, 1e-5} {
		out = append(out, f.tc*(1-x))
	}
	return out
}

// TestSaturationConsistency: at each temperature the Maxwell solution has
// equal pressure and equal Gibbs energy in both phases (1e-9 relative to p
// and to RT; the pressure of the liquid is a small difference of large
// terms, so its tolerance adds 1e-12 rho_L R T), SatT inverts SatP, and the
// Clausius-Clapeyron relation holds against a numerical dp/dT (identities,
// no source).
func TestSaturationConsistency(t *testing.T) {
	for _, name := range pureNames {
		f := mustNew(t, name)
		for _, T := range satTemps(f) {
			l, v, err := f.Saturated(T)
			if err != nil {
				t.Errorf("%s T=%g: %v", name, T, err)
				continue
			}
			pl := l.Rho * f.r * T // rho R T scale
			var tp tauPart
			f.q.tauPart(f.tr/T, &tp)
			pL, _ := f.pOf(&tp, T, l.Rho)
			pV, _ := f.pOf(&tp, T, v.Rho)
			if math.Abs(pL-pV) > 1e-9*pV+1e-12*pl {
				t.Errorf("%s T=%g: p_L %.12g, p_V %.12g", name, T, pL, pV)
			}
			gL, gV := l.H-T*l.S, v.H-T*v.S
			if math.Abs(gL-gV) > 1e-9*f.r*T {
				t.Errorf("%s T=%g: g_L - g_V = %g J/kg (RT = %g)", name, T, gL-gV, f.r*T)
			}
			if !(l.Rho > v.Rho) || l.Phase != thermo.PhaseLiquid || v.Phase != thermo.PhaseVapour {
				t.Errorf("%s T=%g: rho_L %g rho_V %g", name, T, l.Rho, v.Rho)
			}
			Ts, err := f.SatT(l.P)
			if err != nil || relDiff(Ts, T) > 1e-10 {
				t.Errorf("%s: SatT(SatP(%g)) = %.12g, %v", name, T, Ts, err)
			}
			// Clapeyron: dp/dT = (h_V - h_L)/(T (v_V - v_L)).
			if T < 0.99*f.tc && T > f.tmin {
				dT := 1e-4 * T
				p1, err1 := f.SatP(T + dT)
				p0, err0 := f.SatP(T - dT)
				if err1 != nil || err0 != nil {
					t.Fatal(err1, err0)
				}
				num := (p1 - p0) / (2 * dT)
				cl := (v.H - l.H) / (T * (v.V - l.V))
				if relDiff(num, cl) > 1e-6 {
					t.Errorf("%s T=%g: Clapeyron %.10g vs numerical %.10g", name, T, cl, num)
				}
			}
		}
	}
}

// TestLatentHeatIdentity: along the saturation line h_fg = T s_fg, which is
// the Gibbs-energy equality rewritten (identity, no source); and the
// two-phase states from PX and TX and PH/PS agree with each other.
func TestLatentHeatIdentity(t *testing.T) {
	for _, name := range pureNames {
		f := mustNew(t, name)
		for _, T := range []float64{f.tmin + 1, 0.6 * f.tc, 0.8 * f.tc, 0.95 * f.tc} {
			if T < f.tmin {
				continue
			}
			l, err := f.Flash(thermo.TX, T, 0)
			if err != nil {
				t.Fatal(err)
			}
			v, err := f.Flash(thermo.TX, T, 1)
			if err != nil {
				t.Fatal(err)
			}
			hfg, sfg := v.H-l.H, v.S-l.S
			if relDiff(hfg, T*sfg) > 1e-9 {
				t.Errorf("%s T=%g: h_fg %.12g, T s_fg %.12g", name, T, hfg, T*sfg)
			}
			m, err := f.Flash(thermo.TX, T, 0.3)
			if err != nil {
				t.Fatal(err)
			}
			for _, pr := range []struct {
				pair thermo.Pair
				b    float64
			}{{thermo.PX, 0.3}, {thermo.PH, m.H}, {thermo.PS, m.S}} {
				s, err := f.Flash(pr.pair, m.P, pr.b)
				if err != nil {
					t.Fatalf("%s %v: %v", name, pr.pair, err)
				}
				if s.Phase != thermo.PhaseTwoPhase || math.Abs(s.X-0.3) > 1e-9 || relDiff(s.T, T) > 1e-10 || relDiff(s.H, m.H) > 1e-9 {
					t.Errorf("%s %v at T=%g: x=%.12g T=%.12g phase %v", name, pr.pair, T, s.X, s.T, s.Phase)
				}
			}
			if m.HasDerivatives || m.Cp != 0 {
				t.Errorf("two-phase state has derivatives")
			}
		}
	}
}

// TestFlashRoundTrip: (p,h) and (p,s) flashes return the (p,T) state's T to
// 1e-9 relative (the brief; they converge to about 1e-12) in liquid,
// vapour, supercritical and near-saturation states of every fluid, and the
// isentropic end state satisfies s(p2, T2s) = s1 to 1e-9.
func TestFlashRoundTrip(t *testing.T) {
	for _, name := range append(pureNames, "air-helmholtz") {
		f := mustNew(t, name)
		var states [][2]float64 // p, T
		for _, Tf := range []float64{0.55, 0.8, 0.97, 1.05, 1.5, 2.5} {
			T := Tf * f.tc
			if T < f.tmin || T > f.tmax {
				continue
			}
			for _, pf := range []float64{0.01, 0.3, 0.9, 0.999, 1.001, 1.2, 5} {
				states = append(states, [2]float64{pf * f.pc, T})
			}
		}
		for _, st := range states {
			p, T := st[0], st[1]
			s, err := f.Flash(thermo.PT, p, T)
			if err != nil {
				if f.pseudoPure && errors.Is(err, thermo.ErrPhase) {
					continue
				}
				t.Errorf("%s PT %g %g: %v", name, p, T, err)
				continue
			}
			for _, pr := range []struct {
				pair thermo.Pair
				b    float64
			}{{thermo.PH, s.H}, {thermo.PS, s.S}} {
				r, err := f.Flash(pr.pair, p, pr.b)
				if err != nil {
					t.Errorf("%s %v p=%g (T=%g %v): %v", name, pr.pair, p, T, s.Phase, err)
					continue
				}
				if relDiff(r.T, T) > 1e-9 || relDiff(r.Rho, s.Rho) > 1e-8 || r.Phase != s.Phase {
					t.Errorf("%s %v p=%g: T %.12g want %.12g, rho %.10g want %.10g, phase %v want %v", name, pr.pair, p, r.T, T, r.Rho, s.Rho, r.Phase, s.Phase)
				}
			}
			// Isentropic expansion to p/3 and compression to 3p.
			for _, p2 := range []float64{p / 3, 3 * p} {
				if p2 > f.pmax {
					continue
				}
				e, err := f.Flash(thermo.PS, p2, s.S)
				if err != nil {
					if errors.Is(err, thermo.ErrOutOfRange) || (f.pseudoPure && errors.Is(err, thermo.ErrPhase)) {
						continue
					}
					t.Errorf("%s PS p2=%g s1=%g: %v", name, p2, s.S, err)
					continue
				}
				if e.Phase == thermo.PhaseTwoPhase {
					continue
				}
				chk, err := f.Flash(thermo.PT, p2, e.T)
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(chk.S-s.S) > 1e-9*math.Max(math.Abs(s.S), f.r) {
					t.Errorf("%s: s(p2=%g, T2s=%.12g) = %.12g, s1 = %.12g", name, p2, e.T, chk.S, s.S)
				}
			}
		}
	}
}

// TestPhaseAndSpuriousRoots: (p,T) states where a wrong root exists must
// come out on the stable branch (checked against the saturation state).
func TestPhaseAndSpuriousRoots(t *testing.T) {
	cases := []struct {
		fluid string
		p, T  float64
		phase thermo.Phase
		why   string
	}{
		// Water at 300 K, 10 kPa: above p_sat (3.54 kPa), so liquid, although a
		// metastable vapour root exists (ideal-gas start would find it).
		{"water-iapws95", 10e3, 300, thermo.PhaseLiquid, "metastable vapour root"},
		{"water-iapws95", 3e3, 300, thermo.PhaseVapour, "superheated vapour"},
		// Just either side of the saturation pressure (inside the ancillary
		// band, so the Maxwell solution decides).
		{"ammonia", 0, 273.15, thermo.PhaseLiquid, "p_sat (1 + 1e-6)"},
		{"ammonia", 0, 273.15, thermo.PhaseVapour, "p_sat (1 - 1e-6)"},
		{"r134a", 0, 0.995 * 374.21, thermo.PhaseLiquid, "near critical, p_sat (1 + 1e-5)"},
		{"r134a", 0, 0.995 * 374.21, thermo.PhaseVapour, "near critical, p_sat (1 - 1e-5)"},
		{"co2", 10e6, 300, thermo.PhaseLiquid, "above pc, below Tc"},
		{"co2", 10e6, 310, thermo.PhaseSupercritical, "above pc and Tc"},
		{"co2", 5e6, 310, thermo.PhaseVapour, "above Tc, below pc"},
	}
	for _, c := range cases {
		f := mustNew(t, c.fluid)
		p := c.p
		var sat satPoint
		if p == 0 {
			var err error
			sat, err = f.maxwell(c.T, 0, 0)
			if err != nil {
				t.Fatal(err)
			}
			eps := 1e-6
			if c.T > 0.99*f.tc {
				eps = 1e-5
			}
			if c.phase == thermo.PhaseLiquid {
				p = sat.p * (1 + eps)
			} else {
				p = sat.p * (1 - eps)
			}
		}
		s, err := f.Flash(thermo.PT, p, c.T)
		if err != nil {
			t.Errorf("%s p=%g T=%g (%s): %v", c.fluid, p, c.T, c.why, err)
			continue
		}
		if s.Phase != c.phase {
			t.Errorf("%s p=%g T=%g (%s): phase %v, want %v", c.fluid, p, c.T, c.why, s.Phase, c.phase)
		}
		if sat.p > 0 {
			if c.phase == thermo.PhaseLiquid && !(s.Rho >= sat.rhoL) || c.phase == thermo.PhaseVapour && !(s.Rho <= sat.rhoV) {
				t.Errorf("%s p=%g T=%g: rho %g outside the branch (rhoL %g, rhoV %g)", c.fluid, p, c.T, s.Rho, sat.rhoL, sat.rhoV)
			}
		}
		if c.fluid == "water-iapws95" && c.phase == thermo.PhaseLiquid && s.Rho < 990 {
			t.Errorf("water at 300 K, 10 kPa: rho %g, want about 996.5 kg/m3 (IAPWS-95 Table 7 neighbourhood)", s.Rho)
		}
	}
	// A root on the wrong side is an error, never a number: asking the
	// density solver for the vapour branch above the vapour spinodal.
	f := mustNew(t, "water-iapws95")
	var tp tauPart
	f.q.tauPart(f.tr/300, &tp)
	if _, _, err := f.density(&tp, 300, 1e6, thermo.PhaseVapour, nil, 0); !errors.Is(err, thermo.ErrPhase) && !errors.Is(err, thermo.ErrNoConvergence) {
		t.Errorf("vapour root of water at 300 K, 1 MPa: err = %v, want ErrPhase or ErrNoConvergence", err)
	}
}

// TestErrors: bad input gives typed errors, never a panic or NaN.
func TestErrors(t *testing.T) {
	f := mustNew(t, "ammonia")
	air := mustNew(t, "air-helmholtz")
	cases := []struct {
		name string
		fl   *Fluid
		pair thermo.Pair
		a, b float64
		want error
	}{
		{"NaN", f, thermo.PT, math.NaN(), 300, thermo.ErrNotFinite},
		{"Inf", f, thermo.PH, 1e5, math.Inf(1), thermo.ErrNotFinite},
		{"T below triple", f, thermo.PT, 1e5, 150, thermo.ErrOutOfRange},
		{"T above max", f, thermo.PT, 1e5, 800, thermo.ErrOutOfRange},
		{"p above max", f, thermo.PT, 2e9, 300, thermo.ErrOutOfRange},
		{"p zero", f, thermo.PT, 0, 300, thermo.ErrOutOfRange},
		{"p negative", f, thermo.PS, -1, 300, thermo.ErrOutOfRange},
		{"x above 1", f, thermo.TX, 250, 1.5, thermo.ErrOutOfRange},
		{"TX above Tc", f, thermo.TX, 420, 0.5, thermo.ErrOutOfRange},
		{"PX above pc", f, thermo.PX, 12e6, 0.5, thermo.ErrOutOfRange},
		{"PX below triple", f, thermo.PX, 100, 0.5, thermo.ErrOutOfRange},
		{"h far too low", f, thermo.PH, 1e6, -1e7, thermo.ErrOutOfRange},
		{"h far too high", f, thermo.PH, 1e6, 1e8, thermo.ErrOutOfRange},
		{"s far too high", f, thermo.PS, 1e6, 1e6, thermo.ErrOutOfRange},
		{"HS s too high", f, thermo.HS, 1.5e6, 5e4, thermo.ErrOutOfRange},
		{"HS h too low", f, thermo.HS, -1e7, 1000, thermo.ErrOutOfRange},
		{"bad pair", f, thermo.Pair(99), 1, 1, thermo.ErrUnsupported},
		{"air PX", air, thermo.PX, 1e6, 0.5, thermo.ErrUnsupported},
		{"air between dew and bubble", air, thermo.PT, 1.15e6, 109.4, thermo.ErrPhase},
		{"air PH between dew and bubble", air, thermo.PH, 1.15e6, 0, thermo.ErrPhase},
		{"saturation point", f, thermo.PT, mustSatP(t, f, 250), 250, thermo.ErrPhase},
	}
	for _, c := range cases {
		s, err := c.fl.Flash(c.pair, c.a, c.b)
		if !errors.Is(err, c.want) {
			t.Errorf("%s: err = %v, want %v (state %+v)", c.name, err, c.want, s)
		}
		if errors.Is(c.want, thermo.ErrOutOfRange) {
			var re *thermo.RangeError
			if !errors.As(err, &re) {
				t.Errorf("%s: %v is not a *thermo.RangeError", c.name, err)
			}
		}
	}
	if _, err := air.SatP(100); !errors.Is(err, thermo.ErrUnsupported) {
		t.Errorf("air SatP: %v", err)
	}
	if _, err := New("unobtainium"); err == nil {
		t.Error("unknown fluid accepted")
	}
	if _, _, err := f.Parts(-1, 1); err == nil {
		t.Error("negative tau accepted")
	}
}

func mustSatP(t *testing.T, f *Fluid, T float64) float64 {
	p, err := f.SatP(T)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// TestConcurrent runs flashes from several goroutines (run with -race).
func TestConcurrent(t *testing.T) {
	f := mustNew(t, "ammonia")
	want, err := f.Flash(thermo.PS, 1e6, 5500)
	if err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	for g := 0; g < 4; g++ {
		wg.Add(1)
		go func(g int) {
			defer wg.Done()
			for i := 0; i < 50; i++ {
				p := 1e6 * (1 + float64(i%3))
				s, err := f.Flash(thermo.PS, p, 5500)
				if err != nil {
					t.Error(err)
					return
				}
				if p == 1e6 && s.T != want.T {
					t.Errorf("goroutine %d: T %v want %v", g, s.T, want.T)
				}
			}
		}(g)
	}
	wg.Wait()
}

// FuzzFlash: any float input gives an error or a finite state, never a panic.
func FuzzFlash(f *testing.F) {
	f.Add(uint8(1), 1e5, 300.0, uint8(0))
	f.Add(uint8(2), 1e6, 1.5e6, uint8(0))
	f.Add(uint8(3), 5e6, 5000.0, uint8(6))
	f.Add(uint8(4), 2e5, 0.5, uint8(3))
	f.Add(uint8(5), 280.0, 0.1, uint8(6))
	f.Add(uint8(1), 22.064e6, 647.096, uint8(6))
	f.Add(uint8(1), 7.3773e6, 304.1282, uint8(3))
	f.Add(uint8(2), 1e-300, -1e300, uint8(1))
	f.Add(uint8(3), 1e9, 1e-3, uint8(5))
	f.Add(uint8(6), 1e6, 2e3, uint8(2))
	names := append(pureNames, "air-helmholtz")
	f.Fuzz(func(t *testing.T, pair uint8, a, b float64, fluid uint8) {
		fl := mustNew(t, names[int(fluid)%len(names)])
		s, err := fl.Flash(thermo.Pair(pair%8), a, b)
		if err == nil && !s.Finite() {
			t.Fatalf("non-finite state without error: %+v", s)
		}
		if err == nil && (s.Rho <= 0 || s.T <= 0 || s.P <= 0) {
			t.Fatalf("non-physical state: %+v", s)
		}
	})
}

// TestAirTwoPhaseBand: pseudo-pure air has no two-phase model; an enthalpy
// between the bubble-point liquid and the dew-point vapour at one pressure
// (bubble and dew temperatures from CoolProp's ancillaries in air.json) is
// an ErrPhase error, while values just outside give single-phase states.
func TestAirTwoPhaseBand(t *testing.T) {
	f := mustNew(t, "air-helmholtz")
	p := 1.15e6
	Tb, okb := f.ancInvert(&f.ancPL, p)
	Td, okd := f.ancInvert(&f.ancPV, p)
	if !okb || !okd || !(Tb < Td) {
		t.Fatalf("bubble %g K, dew %g K", Tb, Td)
	}
	l, err := f.Flash(thermo.PT, p, Tb*(1-1e-9))
	if err != nil || l.Phase != thermo.PhaseLiquid {
		t.Fatalf("bubble state: %v %v", l.Phase, err)
	}
	v, err := f.Flash(thermo.PT, p, Td*(1+1e-9))
	if err != nil || v.Phase != thermo.PhaseVapour {
		t.Fatalf("dew state: %v %v", v.Phase, err)
	}
	if _, err := f.Flash(thermo.PH, p, 0.5*(l.H+v.H)); !errors.Is(err, thermo.ErrPhase) {
		t.Errorf("mid-band h: %v, want ErrPhase", err)
	}
	for _, c := range []struct {
		h     float64
		phase thermo.Phase
	}{{l.H - 1000, thermo.PhaseLiquid}, {v.H + 1000, thermo.PhaseVapour}} {
		s, err := f.Flash(thermo.PH, p, c.h)
		if err != nil || s.Phase != c.phase || relDiff(s.H, c.h) > 1e-9 {
			t.Errorf("h = %g: %v %v (h %g)", c.h, s.Phase, err, s.H)
		}
	}
}

// TestFlashSweep: over a (p,T) grid covering each equation's range (to
// 3 Tc and 200 MPa), every (p,T) flash succeeds (air: or reports its
// two-phase band as ErrPhase) and the (p,h) and (p,s) flashes return T to
// 1e-9 relative (identity of the flashes, no source).
func TestFlashSweep(t *testing.T) {
	const n = 24
	for _, name := range append(pureNames, "air-helmholtz") {
		f := mustNew(t, name)
		p0 := 0.5 * f.satTriple.p
		if f.pseudoPure {
			p0 = 1000
		}
		for i := 0; i <= n; i++ {
			T := f.tmin + (min(f.tmax, 3*f.tc)-f.tmin)*math.Pow(float64(i)/n, 1.5)
			for j := 0; j <= n; j++ {
				p := p0 * math.Pow(min(f.pmax, 200e6)/p0, float64(j)/n)
				s, err := f.Flash(thermo.PT, p, T)
				if err != nil {
					if !(f.pseudoPure && errors.Is(err, thermo.ErrPhase)) {
						t.Errorf("%s PT p=%g T=%g: %v", name, p, T, err)
					}
					continue
				}
				for _, pr := range []thermo.Pair{thermo.PH, thermo.PS} {
					b := s.H
					if pr == thermo.PS {
						b = s.S
					}
					r, err := f.Flash(pr, p, b)
					if err != nil || relDiff(r.T, T) > 1e-9 {
						t.Errorf("%s %v p=%g T=%g (%v): T %.12g, %v", name, pr, p, T, s.Phase, r.T, err)
					}
				}
			}
		}
	}
}

// TestNearSaturation: (p,T) just above and below the equation's own
// saturation pressure (relative offsets 1e-2 down to 1e-10, temperatures
// from the triple point to 1e-5 below Tc) gives liquid and vapour
// respectively, and the (p,h), (p,s) flashes invert them to 1e-9.
func TestNearSaturation(t *testing.T) {
	for _, name := range pureNames {
		f := mustNew(t, name)
		for i := 0; i <= 30; i++ {
			T := f.tmin + (f.tc-f.tmin)*float64(i)/30
			if i == 30 {
				T = f.tc * (1 - 1e-5)
			}
			ps, err := f.SatP(T)
			if err != nil {
				t.Errorf("%s SatP(%g): %v", name, T, err)
				continue
			}
			for _, e := range []float64{-1e-2, -1e-5, -1e-10, 1e-10, 1e-5, 1e-2} {
				p := ps * (1 + e)
				want := thermo.PhaseLiquid
				if e < 0 {
					want = thermo.PhaseVapour
				}
				s, err := f.Flash(thermo.PT, p, T)
				if err != nil || s.Phase != want {
					t.Errorf("%s T=%g p=psat(1%+g): %v, %v", name, T, e, s.Phase, err)
					continue
				}
				for _, pr := range []thermo.Pair{thermo.PH, thermo.PS} {
					b := s.H
					if pr == thermo.PS {
						b = s.S
					}
					r, err := f.Flash(pr, p, b)
					if err != nil || relDiff(r.T, T) > 1e-9 || r.Phase != want {
						t.Errorf("%s %v T=%g p=psat(1%+g): T %.12g %v, %v", name, pr, T, e, r.T, r.Phase, err)
					}
				}
			}
		}
	}
}

// TestFlashHS: (h,s) flashes return the (p,T) or (T,x) state they came from
// (identity of the flashes, no source): p and T to 1e-9 relative, quality to
// 1e-9.
func TestFlashHS(t *testing.T) {
	cases := []struct {
		fluid string
		pair  thermo.Pair
		a, b  float64
	}{
		{"ammonia", thermo.PT, 1.2e6, 370},      // superheated vapour
		{"ammonia", thermo.PT, 1.5e6, 290},      // compressed liquid
		{"ammonia", thermo.TX, 260, 0.3},        // wet
		{"water-iapws95", thermo.PT, 10e6, 800}, // steam
		{"water-iapws95", thermo.TX, 320, 0.9},  // wet steam
		{"water-iapws95", thermo.PT, 30e6, 700}, // supercritical
		{"co2", thermo.PT, 10e6, 300},           // liquid above pc
		{"air-helmholtz", thermo.PT, 2e6, 300},
		{"methane", thermo.PT, 5e6, 250},
	}
	for _, c := range cases {
		f := mustNew(t, c.fluid)
		s0, err := f.Flash(c.pair, c.a, c.b)
		if err != nil {
			t.Fatal(err)
		}
		s, err := f.Flash(thermo.HS, s0.H, s0.S)
		if err != nil {
			t.Errorf("%s HS from %v(%g, %g): %v", c.fluid, c.pair, c.a, c.b, err)
			continue
		}
		if relDiff(s.P, s0.P) > 1e-9 || relDiff(s.T, s0.T) > 1e-9 || math.Abs(s.X-s0.X) > 1e-9 || s.Phase != s0.Phase {
			t.Errorf("%s HS: p %.12g T %.12g x %.10g %v; want p %.12g T %.12g x %.10g %v", c.fluid, s.P, s.T, s.X, s.Phase, s0.P, s0.T, s0.X, s0.Phase)
		}
	}
}

// TestFlashHSSweep: (h,s) flashes over the interior of the (p,T) grid of
// TestFlashSweep return T to 1e-8 and p to 1e-6 relative. p is
// ill-conditioned from (h,s) in compressed liquid, where (ds/dp)_h = -v/T is
// tiny: a 1e-11 relative T tolerance of the inner (p,h) flash moves p by up
// to about 1e-6 relative there (identity of the flashes, no source).
func TestFlashHSSweep(t *testing.T) {
	const n = 10
	for _, name := range append(pureNames, "air-helmholtz") {
		f := mustNew(t, name)
		p0 := 0.5 * f.satTriple.p
		if f.pseudoPure {
			p0 = 1000
		}
		for i := 1; i < n; i++ {
			T := f.tmin + (min(f.tmax, 3*f.tc)-f.tmin)*math.Pow(float64(i)/n, 1.5)
			for j := 0; j <= n; j++ {
				p := p0 * math.Pow(min(f.pmax, 200e6)/p0, float64(j)/n)
				s, err := f.Flash(thermo.PT, p, T)
				if err != nil {
					continue
				}
				r, err := f.Flash(thermo.HS, s.H, s.S)
				if err != nil || relDiff(r.T, T) > 1e-8 || relDiff(r.P, p) > 1e-6 {
					t.Errorf("%s HS from p=%g T=%g (%v): p %.12g T %.12g, %v", name, p, T, s.Phase, r.P, r.T, err)
				}
			}
		}
	}
}

// TestSatNearCritical: SatT inverts SatP to 1e-9 at 60 temperatures from
// 1e-2 to 1e-5 (relative) below the critical temperature, where the Maxwell
// solve has to march in from 0.99 Tc (identity, no source). Closer than
// about 1e-5 Tc the solve may report ErrNoConvergence (documented).
func TestSatNearCritical(t *testing.T) {
	for _, name := range pureNames {
		f := mustNew(t, name)
		for i := 0; i <= 60; i++ {
			x := math.Pow(10, -2-3*float64(i)/60)
			T := f.tc * (1 - x)
			p, err := f.SatP(T)
			if err != nil {
				t.Errorf("%s SatP(Tc(1-%.3g)): %v", name, x, err)
				continue
			}
			f.lastSatP.Store(nil) // no cache hit
			Ts, err := f.SatT(p)
			if err != nil || relDiff(Ts, T) > 1e-9 {
				t.Errorf("%s SatT(SatP(Tc(1-%.3g))) = %.12g, want %.12g: %v", name, x, Ts, T, err)
			}
		}
	}
}

// TestConcurrentSaturationCaches: the saturation caches (by pressure and by
// temperature) shared by goroutines give what a lone goroutine computes:
// SatT, SatTSlope and (p,T) flashes of CO2 close to its critical
// temperature (where the phase check solves Maxwell's criterion), with
// inputs cycling through more values than the caches hold (run with -race).
func TestConcurrentSaturationCaches(t *testing.T) {
	f := mustNew(t, "co2")
	ps := []float64{1e6, 2e6, 3e6, 4e6, 5e6, 6e6}
	Ts := []float64{299, 300, 301, 302, 303}
	type satRef struct{ T, dTdp float64 }
	wantSat := map[float64]satRef{}
	wantPT := map[float64]thermo.State{}
	ref := mustNew(t, "co2")
	for _, p := range ps {
		T, d, err := ref.SatTSlope(p)
		if err != nil {
			t.Fatal(err)
		}
		wantSat[p] = satRef{T, d}
	}
	for _, T := range Ts {
		s, err := ref.Flash(thermo.PT, 3e6, T)
		if err != nil {
			t.Fatal(err)
		}
		wantPT[T] = s
	}
	var wg sync.WaitGroup
	for g := 0; g < 4; g++ {
		wg.Add(1)
		go func(g int) {
			defer wg.Done()
			for i := 0; i < 60; i++ {
				p := ps[(i+g)%len(ps)]
				T, d, err := f.SatTSlope(p)
				if err != nil || T != wantSat[p].T || d != wantSat[p].dTdp {
					t.Errorf("goroutine %d: SatTSlope(%g) = %v, %v, %v; want %v", g, p, T, d, err, wantSat[p])
					return
				}
				if T2, err := f.SatT(p); err != nil || T2 != wantSat[p].T {
					t.Errorf("goroutine %d: SatT(%g) = %v, %v; want %v", g, p, T2, err, wantSat[p].T)
					return
				}
				Tt := Ts[(i*3+g)%len(Ts)]
				s, err := f.Flash(thermo.PT, 3e6, Tt)
				if err != nil || s != wantPT[Tt] {
					t.Errorf("goroutine %d: Flash(PT, 3 MPa, %v) = %+v, %v; want %+v", g, Tt, s, err, wantPT[Tt])
					return
				}
			}
		}(g)
	}
	wg.Wait()
}
