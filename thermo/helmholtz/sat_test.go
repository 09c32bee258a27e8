package helmholtz

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

// satPressures returns pressures from just above the triple-point
// saturation pressure to the saturation pressure at 0.99 Tc (log spaced),
// where satAtPFast applies, and three closer to the critical point, where
// SatT falls back to the Maxwell march.
func satPressures(f *Fluid) (fast, nearCrit []float64) {
	lo, hi := math.Log(f.satTriple.p*1.001), math.Log(f.satRef.p*0.999)
	const n = 24
	for i := 0; i <= n; i++ {
		fast = append(fast, math.Exp(lo+(hi-lo)*float64(i)/n))
	}
	for _, x := range []float64{5e-3, 2e-3, 1e-3} {
		if p, err := f.SatP(f.tc * (1 - x)); err == nil {
			nearCrit = append(nearCrit, p)
		}
	}
	return fast, nearCrit
}

// TestSatFastMatchesMaxwellPath: the direct Newton solve of the saturation
// state at p (satAtPFast) gives the state of the Maxwell solve with an
// outer iteration on T (satAtPSlow, the path SatT took before): T to
// 1e-12 and both densities to 1e-9, relative, at 25 pressures per fluid
// between the triple point and 0.99 Tc (same equations, no external
// source; the two paths share no iteration).
func TestSatFastMatchesMaxwellPath(t *testing.T) {
	for _, name := range pureNames {
		f := mustNew(t, name)
		fast, _ := satPressures(f)
		for _, p := range fast {
			sf, ok := f.satAtPFast(p)
			if !ok {
				t.Errorf("%s p=%g: satAtPFast declined below 0.99 Tc", name, p)
				continue
			}
			ss, err := f.satAtPSlow(p)
			if err != nil {
				t.Errorf("%s p=%g: satAtPSlow: %v", name, p, err)
				continue
			}
			if relDiff(sf.T, ss.T) > 1e-12 || relDiff(sf.rhoL, ss.rhoL) > 1e-9 || relDiff(sf.rhoV, ss.rhoV) > 1e-9 {
				t.Errorf("%s p=%g: fast T %.15g rhoL %.12g rhoV %.12g, Maxwell path T %.15g rhoL %.12g rhoV %.12g",
					name, p, sf.T, sf.rhoL, sf.rhoV, ss.T, ss.rhoL, ss.rhoV)
			}
			if sf.p != p {
				t.Errorf("%s p=%g: state carries p = %g", name, p, sf.p)
			}
		}
	}
}

// TestSatTSlope: SatTSlope returns SatT's temperature, and its slope
// agrees with (a) a central difference of SatT (step 1e-5 p; 1e-6
// relative, common practice, no source) and (b) Clausius-Clapeyron
// evaluated independently from the full saturated states of Saturated(T),
// T (v” - v')/(h” - h') (1e-9 relative; an identity of the equation),
// at 25 pressures per fluid below 0.99 Tc and three closer to Tc
// (central difference there to 1e-5: the slope changes fast).
func TestSatTSlope(t *testing.T) {
	for _, name := range pureNames {
		f := mustNew(t, name)
		fast, near := satPressures(f)
		for i, p := range append(fast, near...) {
			tolFD := 1e-6
			if i >= len(fast) {
				tolFD = 1e-5
			}
			f.lastSatP.Store(nil)
			T, slope, err := f.SatTSlope(p)
			if err != nil {
				t.Errorf("%s p=%g: %v", name, p, err)
				continue
			}
			f.lastSatP.Store(nil)
			Ts, err := f.SatT(p)
			if err != nil || Ts != T {
				t.Errorf("%s p=%g: SatTSlope T = %.15g, SatT %.15g, %v", name, p, T, Ts, err)
			}
			h := 1e-5 * p
			T1, err1 := f.SatT(p + h)
			T0, err0 := f.SatT(p - h)
			if err1 != nil || err0 != nil {
				t.Errorf("%s p=%g: %v %v", name, p, err1, err0)
				continue
			}
			if fd := (T1 - T0) / (2 * h); relDiff(slope, fd) > tolFD {
				t.Errorf("%s p=%g: dT/dp = %.10g K/Pa, central difference of SatT %.10g", name, p, slope, fd)
			}
			l, v, err := f.Saturated(T)
			if err != nil {
				t.Errorf("%s T=%g: %v", name, T, err)
				continue
			}
			if cc := T * (v.V - l.V) / (v.H - l.H); relDiff(slope, cc) > 1e-9 {
				t.Errorf("%s p=%g: dT/dp = %.12g K/Pa, Clausius-Clapeyron from Saturated(T) %.12g", name, p, slope, cc)
			}
		}
	}
}

// TestSatTSlopeErrors: the errors of SatT (no source needed: API contract).
func TestSatTSlopeErrors(t *testing.T) {
	f := mustNew(t, "ammonia")
	for _, c := range []struct {
		p    float64
		want error
	}{
		{math.NaN(), thermo.ErrNotFinite},
		{math.Inf(1), thermo.ErrNotFinite},
		{-1, thermo.ErrOutOfRange},
		{0, thermo.ErrOutOfRange},
		{f.pc * 1.01, thermo.ErrOutOfRange},
		{f.satTriple.p * 0.5, thermo.ErrOutOfRange},
	} {
		if _, _, err := f.SatTSlope(c.p); !errors.Is(err, c.want) {
			t.Errorf("SatTSlope(%g): %v, want %v", c.p, err, c.want)
		}
	}
	air := mustNew(t, "air-helmholtz")
	if _, _, err := air.SatTSlope(1e5); !errors.Is(err, thermo.ErrUnsupported) {
		t.Errorf("air SatTSlope: %v, want ErrUnsupported", err)
	}
}

// clearCaches empties the saturation and phase-boundary caches of f.
func clearCaches(f *Fluid) {
	f.lastSatP.Store(nil)
	f.lastEdges.Store(nil)
	for i := range f.prevSatP.s {
		f.prevSatP.s[i].Store(nil)
		f.prevEdges.s[i].Store(nil)
		f.byT.s[i].Store(nil)
	}
}

// TestMaxwellCacheHitsAreExact: (p,T) flashes of CO2 within 2 % of its
// critical temperature (where the phase checks take the Maxwell solution
// at T, cached by T) and SatP, Saturated and TX at repeated temperatures
// give exactly what they give with empty caches; identity, no source.
func TestMaxwellCacheHitsAreExact(t *testing.T) {
	f := mustNew(t, "co2")
	clearCaches(f)
	type call struct {
		pair thermo.Pair
		a, b float64
	}
	T1, T2 := 300.0, 302.5 // 0.986 and 0.995 Tc
	seq := []call{{thermo.PT, 3e6, T1}, {thermo.PT, 3.003e6, T1}, {thermo.PT, 2.997e6, T1}, {thermo.PT, 7.5e6, T2},
		{thermo.TX, T2, 0.3}, {thermo.PT, 3e6, T1 + 0.01}, {thermo.PT, 3e6, T1}, {thermo.PT, 7.4e6, T2}, {thermo.TX, T1, 1}}
	var cached []thermo.State
	for _, c := range seq {
		st, err := f.Flash(c.pair, c.a, c.b)
		if err != nil {
			t.Fatalf("%v %g %g: %v", c.pair, c.a, c.b, err)
		}
		cached = append(cached, st)
	}
	pc, errc := f.SatP(T2)
	lc, vc, errs := f.Saturated(T2)
	for i, c := range seq {
		clearCaches(f)
		st, err := f.Flash(c.pair, c.a, c.b)
		if err != nil || st != cached[i] {
			t.Errorf("%v %g %g: cached %+v, fresh %+v, %v", c.pair, c.a, c.b, cached[i], st, err)
		}
	}
	clearCaches(f)
	p, err := f.SatP(T2)
	if err != nil || errc != nil || p != pc {
		t.Errorf("SatP(%g): cached %v (%v), fresh %v (%v)", T2, pc, errc, p, err)
	}
	clearCaches(f)
	l, v, err := f.Saturated(T2)
	if err != nil || errs != nil || l != lc || v != vc {
		t.Errorf("Saturated(%g) differs between cached and fresh: %v %v", T2, errs, err)
	}
}

// TestSatCacheHitsAreExact: the saturation and phase-boundary caches
// (the last four pressures) return exactly what a solve with empty caches
// returns, for a sequence that revisits pressures as an uncertainty
// propagation does (p, p+dp, p-dp, p, ...); identity, no source.
func TestSatCacheHitsAreExact(t *testing.T) {
	f := mustNew(t, "ammonia")
	clearCaches(f)
	p0, dp := 1.2e6, 1.2
	seq := []float64{p0, p0 + dp, p0 - dp, p0, 0.3e6, p0 + dp, 0.3e6 + dp, p0 - dp, p0, 2e6, 0.3e6}
	type res struct {
		T, slope float64
		st       thermo.State
	}
	var cached []res
	for _, p := range seq {
		T, sl, err := f.SatTSlope(p)
		if err != nil {
			t.Fatal(err)
		}
		st, err := f.Flash(thermo.PS, p, 5500)
		if err != nil {
			t.Fatal(err)
		}
		cached = append(cached, res{T, sl, st})
	}
	for i, p := range seq {
		clearCaches(f)
		T, sl, err := f.SatTSlope(p)
		if err != nil {
			t.Fatal(err)
		}
		clearCaches(f)
		st, err := f.Flash(thermo.PS, p, 5500)
		if err != nil {
			t.Fatal(err)
		}
		if c := cached[i]; c.T != T || c.slope != sl || c.st != st {
			t.Errorf("p=%g (call %d): cached T %v slope %v state %+v, fresh %v %v %+v", p, i, c.T, c.slope, c.st, T, sl, st)
		}
	}
}
