package if97

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

var fluidW thermo.Fluid = Water{}

// logspace returns n points from a to b, evenly spaced in log.
func logspace(a, b float64, n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = a * math.Pow(b/a, float64(i)/float64(n-1))
	}
	out[n-1] = b
	return out
}

// TestRoundTripSweep: over a dense (p, T) grid through regions 1, 2, 3
// and 5, the (p,h) and (p,s) flashes return a state with h(p,T(p,h)) = h
// and s(p,T(p,s)) = s to 1e-9 relative (IAPWS R7-97 consistency required
// by issue 2; the round trip needs no external value) and give back T.
func TestRoundTripSweep(t *testing.T) {
	ps := logspace(700, 100e6, 61)
	n := 0
	for _, p := range ps {
		for T := 273.2; T <= 2273.15; T += 7.3 {
			st, err := fluidW.Flash(thermo.PT, p, T)
			if errors.Is(err, thermo.ErrOutOfRange) && p > Pmax5 && T > T25 {
				continue
			}
			if err != nil {
				t.Fatalf("PT(%g, %g): %v", p, T, err)
			}
			for _, c := range []struct {
				pair thermo.Pair
				y    float64
				get  func(thermo.State) float64
			}{
				{thermo.PH, st.H, func(s thermo.State) float64 { return s.H }},
				{thermo.PS, st.S, func(s thermo.State) float64 { return s.S }},
			} {
				b, err := fluidW.Flash(c.pair, p, c.y)
				if err != nil {
					t.Errorf("%v(%g, %g) from T=%g region %d: %v", c.pair, p, c.y, T, st.Region, err)
					continue
				}
				n++
				// 1e-9 relative, with a floor of 1e-9 of a typical
				// magnitude (1 kJ/kg, 1 J/(kg K)) where h or s pass zero
				if !relClose(c.get(b), c.y, 1e-9, 1e-6) {
					t.Errorf("%v(%g, %.10g) region %d: got %.12g", c.pair, p, c.y, st.Region, c.get(b))
				}
				if !relClose(b.T, T, 1e-9, 0) || b.Region != st.Region {
					t.Errorf("%v(%g, %.10g): T = %.12g region %d, want %g region %d", c.pair, p, c.y, b.T, b.Region, T, st.Region)
				}
			}
		}
	}
	if n < 20000 {
		t.Fatalf("only %d round trips", n)
	}
}

// TestWetRoundTrip: (p,x) and (T,x) states flash back from (p,h) and
// (p,s) to the same x, and (p,s) lands exactly on s (isentropic end states
// in the wet region).
func TestWetRoundTrip(t *testing.T) {
	for _, p := range logspace(PsatMin*1.0001, Pc*0.9999, 40) {
		for _, x := range []float64{0, 1e-6, 0.1, 0.5, 0.9, 0.999999, 1} {
			st, err := fluidW.Flash(thermo.PX, p, x)
			if err != nil {
				t.Fatalf("PX(%g, %g): %v", p, x, err)
			}
			if st.Phase != thermo.PhaseTwoPhase || st.X != x || st.Region != 4 {
				t.Errorf("PX(%g, %g): phase %v x %g region %d", p, x, st.Phase, st.X, st.Region)
			}
			stT, err := fluidW.Flash(thermo.TX, st.T, x)
			if err != nil {
				t.Fatal(err)
			}
			// Tsat(psat(T)) = T to round-off (R7-97(2012) Section 8)
			if !relClose(stT.H, st.H, 1e-9, 1e-6) || !relClose(stT.P, p, 1e-9, 0) {
				t.Errorf("TX(%g, %g): h %g p %g, PX gave h %g p %g", st.T, x, stT.H, stT.P, st.H, p)
			}
			if x == 0 || x == 1 {
				continue // on the line: (p,h) may give either side
			}
			for _, c := range []struct {
				pair thermo.Pair
				y    float64
			}{{thermo.PH, st.H}, {thermo.PS, st.S}} {
				b, err := fluidW.Flash(c.pair, p, c.y)
				if err != nil {
					t.Fatalf("%v(%g, %g): %v", c.pair, p, c.y, err)
				}
				got := b.H
				if c.pair == thermo.PS {
					got = b.S
				}
				if b.Phase != thermo.PhaseTwoPhase || !relClose(b.X, x, 1e-9, 1e-12) || !relClose(got, c.y, 1e-12, 1e-9) {
					t.Errorf("%v(%g, %g): x = %.12g (%v), want %g", c.pair, p, c.y, b.X, b.Phase, x)
				}
			}
		}
	}
}

// TestEntropyOfVaporisation: at 101.325 kPa, s_fg = h_fg/Tsat and s_fg is
// about 6.048 kJ/(kg K) (common practice, steam tables). The two sides
// come from regions 1 and 2; they agree to within the IF97 Gibbs-energy
// inconsistency between regions: s_fg - h_fg/Tsat = -Δg/Tsat with the
// permitted |Δg| <= 0.2 kJ/kg (IAPWS-IF97 consistency requirement, Wagner et
// al. 2000, from memory).
func TestEntropyOfVaporisation(t *testing.T) {
	p := 101325.0
	l, err := fluidW.Flash(thermo.PX, p, 0)
	if err != nil {
		t.Fatal(err)
	}
	v, err := fluidW.Flash(thermo.PX, p, 1)
	if err != nil {
		t.Fatal(err)
	}
	sfg := (v.S - l.S) / 1e3
	hfgT := (v.H - l.H) / l.T / 1e3
	if math.Abs(sfg-hfgT) > 0.2/l.T {
		t.Errorf("s_fg = %.8f, h_fg/Tsat = %.8f kJ/(kg K)", sfg, hfgT)
	}
	// common practice: s_fg at 1 atm = 6.048 kJ/(kg K) (steam tables, 4 digits)
	if math.Abs(sfg-6.048) > 0.0005 {
		t.Errorf("s_fg = %.5f kJ/(kg K), want 6.048", sfg)
	}
	// Tsat(1 atm) = 373.124 K (IF97 Eq. 31; common practice 99.97 degC)
	if math.Abs(l.T-373.124) > 0.001 {
		t.Errorf("Tsat(1 atm) = %.4f K", l.T)
	}
}

// TestBoundaryContinuity compares the basic equations on either side of the
// region boundaries. Permitted inconsistencies (IAPWS-IF97, Wagner et al.
// 2000, consistency requirements, from memory): |Δv/v| <= 0.05 %,
// |Δh| <= 0.2 kJ/kg, |Δs| <= 0.2 J/(kg K), |Δcp/cp| <= 1 %, |Δw/w| <= 1 %
// (the 1/3 and 2/3 limits; 2/5 is required to the same).
func TestBoundaryContinuity(t *testing.T) {
	check := func(what string, a, b props) {
		t.Helper()
		if d := math.Abs(a.v-b.v) / b.v; d > 5e-4 {
			t.Errorf("%s: Δv/v = %.2g", what, d)
		}
		if d := math.Abs(a.h - b.h); d > 200 {
			t.Errorf("%s: Δh = %.3g J/kg", what, d)
		}
		if d := math.Abs(a.s - b.s); d > 0.2 {
			t.Errorf("%s: Δs = %.3g J/(kg K)", what, d)
		}
		if d := math.Abs(a.cp-b.cp) / b.cp; d > 0.01 {
			t.Errorf("%s: Δcp/cp = %.3g", what, d)
		}
		if d := math.Abs(a.w-b.w) / b.w; d > 0.01 {
			t.Errorf("%s: Δw/w = %.3g", what, d)
		}
	}
	for _, p := range logspace(Ps13*1.0001, Pmax*0.99999, 30) {
		rho, err := rho3PT(p, T13)
		if err != nil {
			t.Fatalf("rho3PT(%g, 623.15): %v", p, err)
		}
		check("1/3 at 623.15 K", region1(p, T13), region3(rho, T13))
		T := b23T(p)
		p := min(b23p(T), Pmax) // on the boundary to round-off, seen from both sides
		rho, err = rho3PT(p, T)
		if err != nil {
			t.Fatalf("rho3PT(%g, %g): %v", p, T, err)
		}
		check("2/3 on B23", region2(p, T), region3(rho, T))
	}
	for _, p := range logspace(1, Pmax5, 30) {
		check("2/5 at 1073.15 K", region2(p, T25), region5(p, T25))
	}
	// region 4 against 1 and 2: the Gibbs energies of the saturated phases
	// agree (g = h - T s), |Δg| well within 0.2 kJ/kg.
	for T := Tmin; T <= T13; T += 5 {
		p := psat(T)
		l, v := region1(p, T), region2(p, T)
		if d := math.Abs((l.h - T*l.s) - (v.h - T*v.s)); d > 200 {
			t.Errorf("saturation at %g K: Δg = %.3g J/kg", T, d)
		}
	}
}

// TestPhases spot-checks the phase and region of simple states
// (definitions in thermo.Phase; regions per R7-97(2012) Fig. 1).
func TestPhases(t *testing.T) {
	for _, c := range []struct {
		p, T   float64
		phase  thermo.Phase
		region int
	}{
		{1e5, 300, thermo.PhaseLiquid, 1},
		{1e5, 400, thermo.PhaseVapour, 2},
		{16e6, 811.15, thermo.PhaseVapour, 2},
		{25e6, 660, thermo.PhaseSupercritical, 3},
		{25e6, 700, thermo.PhaseSupercritical, 2},
		{25e6, 640, thermo.PhaseLiquid, 3},
		{30e6, 900, thermo.PhaseSupercritical, 2},
		{1e6, 1500, thermo.PhaseVapour, 5},
		{30e6, 1500, thermo.PhaseSupercritical, 5},
	} {
		st, err := fluidW.Flash(thermo.PT, c.p, c.T)
		if err != nil {
			t.Fatal(err)
		}
		if st.Phase != c.phase || st.Region != c.region || !st.HasDerivatives {
			t.Errorf("PT(%g, %g): %v region %d, want %v region %d", c.p, c.T, st.Phase, st.Region, c.phase, c.region)
		}
	}
	st, err := fluidW.Flash(thermo.PX, 1e6, 0.5)
	if err != nil {
		t.Fatal(err)
	}
	if x, ok := st.Quality(); !ok || x != 0.5 || st.HasDerivatives || st.Cp != 0 {
		t.Errorf("PX(1 MPa, 0.5): %+v", st)
	}
}

// TestErrors: out-of-range inputs name the bound, non-finite inputs and
// unknown pairs return the sentinel errors.
func TestErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	for _, c := range []struct {
		pair     thermo.Pair
		a, b     float64
		is       error
		quantity string
		limit    float64
		above    bool
	}{
		{thermo.PT, 1e5, 273.0, thermo.ErrOutOfRange, "T", Tmin, false},
		{thermo.PT, 1e5, 2300, thermo.ErrOutOfRange, "T", Tmax5, true},
		{thermo.PT, 101e6, 500, thermo.ErrOutOfRange, "p", Pmax, true},
		{thermo.PT, 60e6, 1200, thermo.ErrOutOfRange, "p", Pmax5, true},
		{thermo.PT, 0, 500, thermo.ErrOutOfRange, "p", 0, false},
		{thermo.PT, -1, 500, thermo.ErrOutOfRange, "p", 0, false},
		{thermo.PH, 1e5, -1e6, thermo.ErrOutOfRange, "h", h1(1e5, Tmin), false},
		{thermo.PH, 1e5, 1e8, thermo.ErrOutOfRange, "h", region5(1e5, Tmax5).h, true},
		{thermo.PH, 80e6, 5e6, thermo.ErrOutOfRange, "h", h2(80e6, T25), true},
		{thermo.PS, 1e5, -1e3, thermo.ErrOutOfRange, "s", s1(1e5, Tmin), false},
		{thermo.PS, 1e3, 1e5, thermo.ErrOutOfRange, "s", region5(1e3, Tmax5).s, true},
		{thermo.PX, 1e5, 1.5, thermo.ErrOutOfRange, "x", 1, true},
		{thermo.PX, 1e5, -0.1, thermo.ErrOutOfRange, "x", 0, false},
		{thermo.PX, 23e6, 0.5, thermo.ErrOutOfRange, "p", Pc, true},
		{thermo.PX, 500, 0.5, thermo.ErrOutOfRange, "p", PsatMin, false},
		{thermo.TX, 700, 0.5, thermo.ErrOutOfRange, "T", Tc, true},
		{thermo.TX, 270, 0.5, thermo.ErrOutOfRange, "T", Tmin, false},
		{thermo.PT, nan, 300, thermo.ErrNotFinite, "", 0, false},
		{thermo.PH, 1e5, inf, thermo.ErrNotFinite, "", 0, false},
		{thermo.HS, nan, 1, thermo.ErrNotFinite, "", 0, false},
		{thermo.Pair(0), 1, 1, thermo.ErrUnsupported, "", 0, false},
		{thermo.Pair(99), 1, 1, thermo.ErrUnsupported, "", 0, false},
	} {
		_, err := fluidW.Flash(c.pair, c.a, c.b)
		if !errors.Is(err, c.is) {
			t.Errorf("%v(%g, %g): err = %v, want %v", c.pair, c.a, c.b, err, c.is)
			continue
		}
		if c.quantity == "" {
			continue
		}
		var re *thermo.RangeError
		if !errors.As(err, &re) {
			t.Errorf("%v(%g, %g): %v is not a RangeError", c.pair, c.a, c.b, err)
			continue
		}
		if re.Quantity != c.quantity || re.Above != c.above || !relClose(re.Limit, c.limit, 1e-12, 0) || re.Fluid != "water" {
			t.Errorf("%v(%g, %g): %+v, want %s limit %g above %v", c.pair, c.a, c.b, *re, c.quantity, c.limit, c.above)
		}
	}
	if _, err := HPT(1e5, 200); !errors.Is(err, thermo.ErrOutOfRange) {
		t.Errorf("HPT(1e5, 200): %v", err)
	}
	if _, err := TPS(nan, 1); !errors.Is(err, thermo.ErrNotFinite) {
		t.Errorf("TPS(NaN, 1): %v", err)
	}
}

// TestExportedShortcuts: HPT, SPT, TPH, TPS agree with Flash.
func TestExportedShortcuts(t *testing.T) {
	for _, c := range [][2]float64{{3e6, 300}, {1e5, 500}, {25e6, 650}, {5e6, 1500}, {16e6, 811.15}} {
		st, err := fluidW.Flash(thermo.PT, c[0], c[1])
		if err != nil {
			t.Fatal(err)
		}
		h, err1 := HPT(c[0], c[1])
		s, err2 := SPT(c[0], c[1])
		T1, err3 := TPH(c[0], st.H)
		T2, err4 := TPS(c[0], st.S)
		if err := errors.Join(err1, err2, err3, err4); err != nil {
			t.Fatal(err)
		}
		if !relClose(h, st.H, 1e-12, 0) || !relClose(s, st.S, 1e-12, 0) || !relClose(T1, c[1], 1e-9, 0) || !relClose(T2, c[1], 1e-9, 0) {
			t.Errorf("(%g, %g): HPT %g SPT %g TPH %g TPS %g; Flash h %g s %g", c[0], c[1], h, s, T1, T2, st.H, st.S)
		}
	}
}

// FuzzFlash: for any pair and any float inputs Flash does not panic and
// returns either an error or a finite state; a successful state flashes
// back from (p, h) and (p, s) to itself.
func FuzzFlash(f *testing.F) {
	for _, s := range []struct {
		pair int
		a, b float64
	}{
		{1, 16e6, 811.15}, {1, 1e5, 300}, {1, 25e6, 650}, {1, 5e6, 1500}, {1, 0, 0},
		{2, 1e5, 2e6}, {2, 20e6, 2e6}, {2, 1e5, -1}, {2, 50e6, 5e6}, {2, 1e-300, 1e6},
		{3, 4e6, 6500}, {3, 18e6, 4000}, {3, 100e6, 1e4}, {3, 611.2, 9155},
		{4, 1e5, 0.5}, {4, 22e6, 1}, {4, Pc, 0.3},
		{5, 400, 0.2}, {5, Tc, 0}, {5, 640, 1},
		{6, 2.8e6, 6.5e3}, {6, 1e6, 1e3}, {0, 1, 1}, {7, 1, 1},
		{1, math.NaN(), 300}, {2, 1e5, math.Inf(-1)}, {1, math.MaxFloat64, math.SmallestNonzeroFloat64},
	} {
		f.Add(s.pair, s.a, s.b)
	}
	f.Fuzz(func(t *testing.T, pair int, a, b float64) {
		st, err := fluidW.Flash(thermo.Pair(pair), a, b)
		if err != nil {
			if !errors.Is(err, thermo.ErrOutOfRange) && !errors.Is(err, thermo.ErrNotFinite) &&
				!errors.Is(err, thermo.ErrUnsupported) && !errors.Is(err, thermo.ErrNoConvergence) {
				t.Fatalf("%v(%g, %g): untyped error %v", thermo.Pair(pair), a, b, err)
			}
			return
		}
		if !st.Finite() {
			t.Fatalf("%v(%g, %g): non-finite state %+v", thermo.Pair(pair), a, b, st)
		}
		for _, c := range []struct {
			pair thermo.Pair
			y    float64
		}{{thermo.PH, st.H}, {thermo.PS, st.S}} {
			b2, err := fluidW.Flash(c.pair, st.P, c.y)
			if err != nil {
				// a state exactly on a range bound may round outside it
				if errors.Is(err, thermo.ErrOutOfRange) {
					continue
				}
				t.Fatalf("%v(%g, %g) -> %+v -> %v(%g, %g): %v", thermo.Pair(pair), a, b, st, c.pair, st.P, c.y, err)
			}
			if !relClose(b2.T, st.T, 1e-8, 0) || !relClose(b2.H, st.H, 1e-8, 1e-6) {
				t.Fatalf("%v(%g, %g) -> T %g h %g -> %v: T %g h %g", thermo.Pair(pair), a, b, st.T, st.H, c.pair, b2.T, b2.H)
			}
		}
	})
}

// unit maps any float to [0, 1].
func unit(u float64) float64 {
	if u-u != 0 {
		return 0.5
	}
	u = math.Abs(u)
	return u - math.Floor(u)
}

// FuzzFlashInRange maps the fuzz inputs onto the IF97 range (p from 611 Pa
// to 100 MPa on a log scale, T, h, s, x across and slightly beyond their
// ranges) so that the fuzzer explores the region logic: every pair must
// either give a state that flashes back from (p,h) and (p,s), or a range
// error; a convergence failure inside the range is a bug.
func FuzzFlashInRange(f *testing.F) {
	for i := range 6 {
		f.Add(uint8(i), 0.5, 0.5)
		f.Add(uint8(i), 0.1, 0.9)
		f.Add(uint8(i), 0.95, 0.3)
	}
	f.Fuzz(func(t *testing.T, pair uint8, u, v float64) {
		u, v = unit(u), unit(v)
		p := 600 * math.Pow(100.5e6/600, u)
		var a, b float64
		pr := thermo.Pair(pair%6 + 1)
		switch pr {
		case thermo.PT:
			a, b = p, 270+v*2010
		case thermo.PH:
			a, b = p, -2e4+v*7.5e6
		case thermo.PS:
			a, b = p, -100+v*1.4e4
		case thermo.PX:
			a, b = min(p, 23e6), v*1.02-0.01
		case thermo.TX:
			a, b = 272+u*380, v
		case thermo.HS:
			a, b = -2e4+u*7.5e6, -100+v*1.4e4
		}
		st, err := fluidW.Flash(pr, a, b)
		if err != nil {
			if !errors.Is(err, thermo.ErrOutOfRange) {
				t.Fatalf("%v(%.17g, %.17g): %v", pr, a, b, err)
			}
			return
		}
		if !st.Finite() {
			t.Fatalf("%v(%g, %g): non-finite %+v", pr, a, b, st)
		}
		for _, c := range []struct {
			pair thermo.Pair
			y    float64
		}{{thermo.PH, st.H}, {thermo.PS, st.S}} {
			b2, err := fluidW.Flash(c.pair, st.P, c.y)
			if errors.Is(err, thermo.ErrOutOfRange) {
				continue // a state on a range bound may round outside it
			}
			if err != nil {
				t.Fatalf("%v(%.17g, %.17g) -> %v(%.17g, %.17g): %v", pr, a, b, c.pair, st.P, c.y, err)
			}
			if !relClose(b2.T, st.T, 1e-8, 0) || !relClose(b2.H, st.H, 1e-8, 1e-3) || !relClose(b2.S, st.S, 1e-8, 1e-6) {
				t.Fatalf("%v(%.17g, %.17g) -> T %.12g h %.12g s %.12g x %g -> %v: T %.12g h %.12g s %.12g x %g",
					pr, a, b, st.T, st.H, st.S, st.X, c.pair, b2.T, b2.H, b2.S, b2.X)
			}
		}
	})
}
