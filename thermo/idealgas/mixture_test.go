package idealgas

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

func mustMix(t testing.TB, f map[string]float64, b Basis) *Mixture {
	t.Helper()
	m, err := NewMixture(f, b)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// naturalGas is an 11-component-style natural gas restricted to the species
// of this package (composition: common practice for a pipeline gas, no
// source).
var naturalGas = map[string]float64{"CH4": 0.895, "C2H6": 0.05, "C3H8": 0.02, "n-C4H10": 0.003, "i-C4H10": 0.002, "CO2": 0.01, "N2": 0.015, "H2": 0.005}

func TestNewMixtureErrors(t *testing.T) {
	cases := []struct {
		name string
		f    map[string]float64
		b    Basis
	}{
		{"empty", map[string]float64{}, MoleFraction},
		{"nil", nil, MoleFraction},
		{"unknown species", map[string]float64{"N2": 0.5, "Xe": 0.5}, MoleFraction},
		{"negative", map[string]float64{"N2": 1.1, "O2": -0.1}, MoleFraction},
		{"NaN", map[string]float64{"N2": math.NaN(), "O2": 1}, MoleFraction},
		{"Inf", map[string]float64{"N2": math.Inf(1)}, MassFraction},
		{"sum low", map[string]float64{"N2": 0.7, "O2": 0.2}, MoleFraction},
		{"sum high", map[string]float64{"N2": 0.8, "O2": 0.21}, MassFraction},
		{"sum just outside tolerance", map[string]float64{"N2": 0.5, "O2": 0.5 + 2e-6}, MoleFraction},
		{"all zero", map[string]float64{"N2": 0, "O2": 0}, MoleFraction},
		{"duplicate by case", map[string]float64{"Ar": 0.5, "AR": 0.5}, MoleFraction},
		{"bad basis", map[string]float64{"N2": 1}, Basis(0)},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			m, err := NewMixture(c.f, c.b)
			if err == nil {
				t.Fatalf("accepted %v: %v", c.f, m.MoleFractions())
			}
			if !errors.Is(err, ErrComposition) {
				t.Fatalf("error %v does not wrap ErrComposition", err)
			}
		})
	}
}

func TestNewMixtureNormalises(t *testing.T) {
	m := mustMix(t, map[string]float64{"n2": 0.78120049, "O2": 0.2096, "ar": 0.0092, "CO2": 0}, MoleFraction)
	sum := 0.0
	for _, v := range m.MoleFractions() {
		sum += v
	}
	if math.Abs(sum-1) > 1e-15 || len(m.Species()) != 3 {
		t.Fatalf("fractions %v sum to %v (want exactly 1 with the zero dropped)", m.MoleFractions(), sum)
	}
}

// TestMassMoleRoundTrip: a mixture given by mole fractions and the same
// mixture given by its own mass fractions are the same gas.
func TestMassMoleRoundTrip(t *testing.T) {
	a := mustMix(t, naturalGas, MoleFraction)
	b := mustMix(t, a.MassFractions(), MassFraction)
	for k, v := range a.MoleFractions() {
		if w := b.MoleFractions()[k]; math.Abs(w-v) > 1e-14 {
			t.Errorf("%s: mole fraction %v after the round trip, want %v", k, w, v)
		}
	}
	sa, _ := a.Flash(thermo.PT, 3e6, 320)
	sb, _ := b.Flash(thermo.PT, 3e6, 320)
	if math.Abs(sa.H-sb.H) > 1e-9*math.Abs(sa.H) || math.Abs(sa.S-sb.S) > 1e-9*math.Abs(sa.S) {
		t.Errorf("states differ: %+v vs %+v", sa, sb)
	}
	// Molar mass by definition sum x_i M_i (GRI-Mech molar masses).
	want := 0.0
	for k, x := range a.MoleFractions() {
		want += x * mustSpecies(t, k).MolarMass
	}
	if math.Abs(a.MolarMass()-want) > 1e-15 {
		t.Errorf("molar mass %v, want %v", a.MolarMass(), want)
	}
}

// TestMixtureEqualsSpeciesSum checks the precomputed mixture polynomials
// against the definition summed species by species (per unit mass:
// sum_i w_i R/M_i (cp_i/R, T h_i/(RT), s_i/R) - Rs ln(p/P0) - Rs sum x ln x).
// Above the interval boundary the mixture's integration constants carry
// the continuity shift, bounded by joinJump (< 1e-6 relative).
func TestMixtureEqualsSpeciesSum(t *testing.T) {
	for _, f := range []map[string]float64{naturalGas, {"N2": 0.7, "CO2": 0.1, "H2O": 0.15, "O2": 0.05}} {
		m := mustMix(t, f, MoleFraction)
		if m.joinJump > 1e-6 {
			t.Errorf("continuity shift %.2e relative > 1e-6", m.joinJump)
		}
		for _, T := range []float64{300, 449, 451, 999, 1001, 1500, 2500} {
			if T > m.tmax {
				continue
			}
			const p = 2.5e6
			var cp, h, s, mix float64
			for k, n := range m.names {
				sp := mustSpecies(t, n)
				rw := m.w[k] * R / sp.MolarMass
				cp += rw * sp.CpR(T)
				h += rw * T * sp.HRT(T)
				s += rw * sp.SR(T)
				mix -= m.x[k] * math.Log(m.x[k])
			}
			s += -m.rs*math.Log(p/P0) + m.rs*mix
			st, err := m.Flash(thermo.PT, p, T)
			if err != nil {
				t.Fatal(err)
			}
			tol := 1e-12
			if T >= m.segs[0].thi {
				tol = 1e-12 + 1.01*m.joinJump // jump measured relative to h at the boundary
			}
			if math.Abs(st.Cp-cp) > 1e-12*cp {
				t.Errorf("T %v: cp %v, species sum %v", T, st.Cp, cp)
			}
			if math.Abs(st.H-h) > tol*math.Max(math.Abs(h), cp*T) {
				t.Errorf("T %v: h %v, species sum %v", T, st.H, h)
			}
			if math.Abs(st.S-s) > tol*math.Abs(s) {
				t.Errorf("T %v: s %v, species sum %v", T, st.S, s)
			}
		}
	}
}

// TestStateIdentities: the ideal-gas relations between the fields of a
// state hold (definitions).
func TestStateIdentities(t *testing.T) {
	m := DryAir()
	for _, T := range []float64{200, 288.15, 700, 1400, 3500} {
		st, err := m.Flash(thermo.PT, 1.7e6, T)
		if err != nil {
			t.Fatal(err)
		}
		rs := m.GasConstant()
		checks := []struct {
			name      string
			got, want float64
		}{
			{"p v = Rs T", st.P * st.V, rs * T},
			{"rho v = 1", st.Rho * st.V, 1},
			{"u = h - p v", st.U, st.H - st.P*st.V},
			{"cv = cp - Rs", st.Cv, st.Cp - rs},
			{"w^2 = cp/cv Rs T", st.W * st.W, st.Cp / st.Cv * rs * T},
		}
		for _, c := range checks {
			if math.Abs(c.got-c.want) > 1e-12*math.Max(math.Abs(c.want), 1) {
				t.Errorf("T %v: %s: %v vs %v", T, c.name, c.got, c.want)
			}
		}
		if st.Phase != thermo.PhaseGas || !st.HasDerivatives || st.Region != 0 {
			t.Errorf("T %v: phase %v, derivatives %v, region %d", T, st.Phase, st.HasDerivatives, st.Region)
		}
	}
	// Rs of dry air from its composition: R / (0.7812 M_N2 + 0.2096 M_O2 +
	// 0.0092 M_Ar) with the GRI-Mech molar masses = 287.11 J/(kg K).
	if rs := m.GasConstant(); math.Abs(rs-R/28.95853816e-3) > 1e-9 {
		t.Errorf("dry air Rs = %v J/(kg K)", rs)
	}
}

func TestFlashRoundTrips(t *testing.T) {
	fl := mustMix(t, map[string]float64{"N2": 0.74, "O2": 0.12, "CO2": 0.04, "H2O": 0.09, "Ar": 0.01}, MoleFraction)
	fluids := []*Mixture{DryAir(), mustMix(t, naturalGas, MoleFraction), fl}
	for _, m := range fluids {
		tmin, tmax := m.TRange()
		for _, T := range []float64{tmin, tmin + 1e-9, 288.15, 449.999999, 450, 999.999999, 1000, 1000.000001, 1873, tmax - 1e-9, tmax} {
			if T > tmax {
				continue
			}
			for _, p := range []float64{MinPressure, 5e3, 101325, 2e6, DefaultMaxPressure} {
				ref, err := m.Flash(thermo.PT, p, T)
				if err != nil {
					t.Fatalf("PT(%v, %v): %v", p, T, err)
				}
				for _, c := range []struct {
					pair thermo.Pair
					a, b float64
				}{{thermo.PH, p, ref.H}, {thermo.PS, p, ref.S}, {thermo.HS, ref.H, ref.S}} {
					st, err := m.Flash(c.pair, c.a, c.b)
					if err != nil {
						t.Errorf("%v(%v, %v) from p %v T %v: %v", c.pair, c.a, c.b, p, T, err)
						continue
					}
					if math.Abs(st.T-T) > 1e-10*T || math.Abs(st.P-p) > 1e-9*p {
						t.Errorf("%v at p %v T %v: got p %v T %v", c.pair, p, T, st.P, st.T)
					}
					if math.Abs(st.S-ref.S) > 1e-9*math.Abs(ref.S) || math.Abs(st.H-ref.H) > 1e-9*math.Max(math.Abs(ref.H), ref.Cp*T) {
						t.Errorf("%v at p %v T %v: h %v s %v, want %v %v", c.pair, p, T, st.H, st.S, ref.H, ref.S)
					}
				}
			}
		}
	}
}

func TestFlashErrors(t *testing.T) {
	m := DryAir()
	tmin, tmax := m.TRange()
	hmin, _ := m.H(tmin)
	hmax, _ := m.H(tmax)
	smax, _ := m.S(tmax, 1e5)
	smin, _ := m.S(tmin, 1e5)
	cases := []struct {
		pair thermo.Pair
		a, b float64
		want error
	}{
		{thermo.PT, 1e5, tmin - 0.01, thermo.ErrOutOfRange},
		{thermo.PT, 1e5, tmax + 0.01, thermo.ErrOutOfRange},
		{thermo.PT, 0, 300, thermo.ErrOutOfRange},
		{thermo.PT, -1e5, 300, thermo.ErrOutOfRange},
		{thermo.PT, DefaultMaxPressure * 1.0001, 300, thermo.ErrOutOfRange},
		{thermo.PT, math.NaN(), 300, thermo.ErrNotFinite},
		{thermo.PT, 1e5, math.Inf(1), thermo.ErrNotFinite},
		{thermo.PH, 1e5, hmin - 1, thermo.ErrOutOfRange},
		{thermo.PH, 1e5, hmax + 1, thermo.ErrOutOfRange},
		{thermo.PH, 1e5, math.NaN(), thermo.ErrNotFinite},
		{thermo.PS, 1e5, smax + 1e-3, thermo.ErrOutOfRange},
		{thermo.PS, 1e5, smin - 1e-3, thermo.ErrOutOfRange},
		{thermo.PS, math.Inf(-1), 7000, thermo.ErrNotFinite},
		{thermo.HS, hmin + 1000, 1e6, thermo.ErrOutOfRange},  // implied p below MinPressure
		{thermo.HS, hmin + 1000, -1e6, thermo.ErrOutOfRange}, // implied p above the ceiling
		{thermo.HS, math.NaN(), 7000, thermo.ErrNotFinite},
		{thermo.PX, 1e5, 0.5, thermo.ErrUnsupported},
		{thermo.TX, 300, 0.5, thermo.ErrUnsupported},
		{thermo.Pair(0), 1e5, 300, thermo.ErrUnsupported},
		{thermo.Pair(42), 1e5, 300, thermo.ErrUnsupported},
	}
	for _, c := range cases {
		st, err := m.Flash(c.pair, c.a, c.b)
		if !errors.Is(err, c.want) {
			t.Errorf("%v(%v, %v): err %v, want %v (state %+v)", c.pair, c.a, c.b, err, c.want, st)
		}
		var re *thermo.RangeError
		if c.want == thermo.ErrOutOfRange && !errors.As(err, &re) {
			t.Errorf("%v(%v, %v): %v is not a *thermo.RangeError", c.pair, c.a, c.b, err)
		}
	}
	// The ceiling is the caller's choice.
	m2, err := m.WithMaxPressure(50e6)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := m2.Flash(thermo.PT, 40e6, 300); err != nil {
		t.Errorf("raised ceiling: %v", err)
	}
	if _, err := m.WithMaxPressure(math.NaN()); err == nil {
		t.Error("NaN ceiling accepted")
	}
	if m2.Name() != "air" || m.Named("x").Name() != "x" || m.Name() != "air" {
		t.Error("names not kept/copied")
	}
}

// TestIsentropicT: T2s solves s(p2, T2s) = s(p1, T1) to 1e-9 relative
// (the definition), and agrees with the closed constant-cp form
// T2s = T1 (p2/p1)^(Rs/cp), cp at the mean temperature, where cp barely
// changes (pressure ratio 1.01: the two differ by O(dT^3)).
func TestIsentropicT(t *testing.T) {
	for _, m := range []*Mixture{DryAir(), mustMix(t, naturalGas, MoleFraction)} {
		for _, c := range []struct{ p1, T1, p2 float64 }{
			{1e5, 288.15, 1.7e6}, {1e5, 300, 3e6}, {2e6, 1500, 1.1e5}, {1.01e5, 300, 1e5}, {5e4, 999.9, 2e5}, {3e6, 700, 3e6},
		} {
			if c.T1 > 700 && m.tmax < 1500 {
				continue
			}
			T2, err := m.IsentropicT(c.p1, c.T1, c.p2)
			if err != nil {
				t.Fatal(err)
			}
			s1, _ := m.S(c.T1, c.p1)
			s2, _ := m.S(T2, c.p2)
			if math.Abs(s2-s1) > 1e-9*math.Abs(s1) {
				t.Errorf("%+v: s(p2, T2s) - s1 = %v (relative %.2e)", c, s2-s1, (s2-s1)/s1)
			}
		}
		// Narrow range against the closed form.
		p1, T1, p2 := 1e5, 400.0, 1.01e5
		T2, _ := m.IsentropicT(p1, T1, p2)
		Tc := T1
		for i := 0; i < 5; i++ {
			cp, _ := m.Cp(0.5 * (T1 + Tc))
			Tc = T1 * math.Pow(p2/p1, m.GasConstant()/cp)
		}
		if math.Abs(T2-Tc) > 1e-6*(T2-T1) {
			t.Errorf("%s: T2s %v, constant-cp form %v (dT %v)", m.Name(), T2, Tc, T2-T1)
		}
	}
	if _, err := DryAir().IsentropicT(1e5, 300, 1e9); !errors.Is(err, thermo.ErrOutOfRange) {
		t.Errorf("p2 above ceiling: %v", err)
	}
	if _, err := DryAir().IsentropicT(1e5, 3000, 1e7); !errors.Is(err, thermo.ErrOutOfRange) {
		t.Errorf("T2s above the range: %v", err)
	}
}

// FuzzFlash: any pair and any float inputs give an error or a finite
// state; a state satisfies its own inputs.
func FuzzFlash(f *testing.F) {
	f.Add(1, 1e5, 300.0)
	f.Add(2, 1e5, 1e5)
	f.Add(3, 1e5, 6800.0)
	f.Add(6, 4e5, 6900.0)
	f.Add(4, 1e5, 0.5)
	f.Add(3, 1.0, -1e308)
	f.Add(6, -1e308, 1e308)
	f.Add(1, 1e7, 3500.0)
	f.Add(2, 5e-324, 1e300)
	f.Fuzz(func(t *testing.T, pair int, a, b float64) {
		m := DryAir()
		st, err := m.Flash(thermo.Pair(pair), a, b)
		if err != nil {
			return
		}
		if !st.Finite() {
			t.Fatalf("non-finite state %+v", st)
		}
		var in float64
		switch thermo.Pair(pair) {
		case thermo.PT:
			in = st.T - b
		case thermo.PH:
			in = (st.H - b) / math.Max(math.Abs(b), st.Cp*st.T)
		case thermo.PS:
			in = (st.S - b) / math.Abs(b)
		case thermo.HS:
			in = (st.S - b) / math.Abs(b)
		}
		if math.Abs(in) > 1e-9 {
			t.Fatalf("%v(%v, %v): state %+v misses its input by %v", thermo.Pair(pair), a, b, st, in)
		}
	})
}

// TestConcurrentUse: a Mixture is shared by goroutines (run with -race).
func TestConcurrentUse(t *testing.T) {
	m := DryAir()
	done := make(chan error, 4)
	for g := 0; g < 4; g++ {
		go func(g int) {
			for i := 0; i < 200; i++ {
				T := 250 + float64(g*200+i)
				st, err := m.Flash(thermo.PT, 1e5+float64(i)*1e3, T)
				if err == nil {
					var back thermo.State
					back, err = m.Flash(thermo.PS, st.P, st.S)
					if err == nil && math.Abs(back.T-T) > 1e-9*T {
						err = errors.New("p,s round trip drifted")
					}
				}
				if err != nil {
					done <- err
					return
				}
			}
			done <- nil
		}(g)
	}
	for g := 0; g < 4; g++ {
		if err := <-done; err != nil {
			t.Error(err)
		}
	}
}
