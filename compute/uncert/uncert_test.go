package uncert

import (
	"errors"
	"math"
	"testing"
)

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

func TestPropagateClosedForms(t *testing.T) {
	tests := []struct {
		name  string
		f     Func
		x, u  []float64
		corr  []Correlation
		wantY float64
		wantU float64 // closed form, source beside each case
		tol   float64
	}{
		{
			// GUM JCGM 100:2008 eq. 10 for a linear model: u^2 = 9*0.01 + 4*0.04 = 0.25.
			name: "linear uncorrelated",
			f:    func(x, y []float64) error { y[0] = 3*x[0] - 2*x[1]; return nil },
			x:    []float64{1, 2}, u: []float64{0.1, 0.2},
			wantY: -1, wantU: 0.5, tol: 1e-12,
		},
		{
			// GUM eq. 16 with r = 1: y = x1 - x2, equal u -> the errors cancel, u = 0
			// (two matched sensors read the same offset).
			name: "difference fully correlated",
			f:    func(x, y []float64) error { y[0] = x[0] - x[1]; return nil },
			x:    []float64{300, 301}, u: []float64{0.5, 0.5},
			corr:  []Correlation{{0, 1, 1}},
			wantY: -1, wantU: 0, tol: 1e-9,
		},
		{
			// GUM eq. 16 with r = 0.5: u^2 = 0.25 + 0.25 - 2*0.5*0.25 = 0.25.
			name: "difference half correlated",
			f:    func(x, y []float64) error { y[0] = x[0] - x[1]; return nil },
			x:    []float64{300, 301}, u: []float64{0.5, 0.5},
			corr:  []Correlation{{1, 0, 0.5}},
			wantY: -1, wantU: 0.5, tol: 1e-9,
		},
		{
			// GUM eq. 12 (product/quotient): (u_y/y)^2 = (u1/x1)^2 + (u2/x2)^2 = 0.01^2 + 0.02^2.
			name: "quotient relative",
			f:    func(x, y []float64) error { y[0] = x[0] / x[1]; return nil },
			x:    []float64{10, 4}, u: []float64{0.1, 0.08},
			wantY: 2.5, wantU: 2.5 * math.Sqrt(0.01*0.01+0.02*0.02), tol: 1e-6,
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r, err := Propagate(tc.f, 1, tc.x, tc.u, tc.corr)
			if err != nil {
				t.Fatal(err)
			}
			if !near(r.Y[0], tc.wantY, 1e-12) {
				t.Errorf("y = %v, want %v", r.Y[0], tc.wantY)
			}
			if !r.OK[0] || !near(r.U[0], tc.wantU, tc.tol) {
				t.Errorf("u = %v (ok %v), want %v", r.U[0], r.OK[0], tc.wantU)
			}
			u95, ok := r.U95(0)
			if !ok || !near(u95, K95*tc.wantU, 2*tc.tol) {
				t.Errorf("U95 = %v, want %v", u95, K95*tc.wantU)
			}
		})
	}
}

func TestPropagateSensitivityAndDominant(t *testing.T) {
	// y = x0^2 + 5 x1: dy/dx0 = 2 x0 = 6 exactly for a central difference of a quadratic.
	f := func(x, y []float64) error { y[0] = x[0]*x[0] + 5*x[1]; y[1] = x[1]; return nil }
	r, err := Propagate(f, 2, []float64{3, 1}, []float64{0.01, 1}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if c := r.Sensitivity(0, 0); !near(c, 6, 1e-9) {
		t.Errorf("dy/dx0 = %v, want 6", c)
	}
	if c := r.Sensitivity(0, 1); !near(c, 5, 1e-9) {
		t.Errorf("dy/dx1 = %v, want 5", c)
	}
	if d := r.Dominant(0); d != 1 {
		t.Errorf("dominant input = %d, want 1", d)
	}
}

func TestPropagateOneSidedAndFailure(t *testing.T) {
	// The model is undefined below x = 1: at x = 1 the minus side fails and
	// the one-sided difference is used (slope 2).
	f := func(x, y []float64) error {
		if x[0] < 1 {
			return errors.New("below 1")
		}
		y[0] = 2 * x[0]
		y[1] = math.NaN()
		return nil
	}
	r, err := Propagate(f, 2, []float64{1}, []float64{0.1}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !r.OK[0] || !near(r.U[0], 0.2, 1e-9) {
		t.Errorf("u = %v ok %v, want 0.2 from the one-sided difference", r.U[0], r.OK[0])
	}
	if r.OK[1] {
		t.Errorf("NaN output reported OK")
	}
	if _, ok := r.U95(1); ok {
		t.Errorf("U95 of a NaN output reported")
	}
	if _, err := Propagate(f, 1, []float64{0.5}, []float64{0.1}, nil); !errors.Is(err, ErrModel) {
		t.Errorf("nominal failure: err = %v, want ErrModel", err)
	}
}

func TestPropagateBadProblems(t *testing.T) {
	f := func(x, y []float64) error { y[0] = x[0]; return nil }
	bad := []struct {
		name string
		x, u []float64
		corr []Correlation
	}{
		{"length", []float64{1, 2}, []float64{1}, nil},
		{"negative u", []float64{1}, []float64{-1}, nil},
		{"nan u", []float64{1}, []float64{math.NaN()}, nil},
		{"inf x", []float64{math.Inf(1)}, []float64{1}, nil},
		{"corr range", []float64{1, 2}, []float64{1, 1}, []Correlation{{0, 1, 1.5}}},
		{"corr self", []float64{1, 2}, []float64{1, 1}, []Correlation{{1, 1, 0.5}}},
		{"corr index", []float64{1, 2}, []float64{1, 1}, []Correlation{{0, 2, 0.5}}},
	}
	for _, tc := range bad {
		if _, err := Propagate(f, 1, tc.x, tc.u, tc.corr); !errors.Is(err, ErrInput) {
			t.Errorf("%s: err = %v, want ErrInput", tc.name, err)
		}
	}
}

func TestTempClassTolerances(t *testing.T) {
	tests := []struct {
		class string
		T     float64 // K
		tol   float64 // K
		src   string
	}{
		{"rtd-A", 373.15, 0.35, "IEC 60751 class A: 0.15 + 0.002*100 (from memory)"},
		{"rtd-B", 273.15, 0.3, "IEC 60751 class B at 0 degC (from memory)"},
		{"rtd-B", 460, 0.3 + 0.005*186.85, "IEC 60751 class B: 0.3 + 0.005|t| (from memory)"},
		{"rtd-AA", 223.15, 0.1 + 0.0017*50, "IEC 60751 class AA (from memory)"},
		{"rtd-C", 573.15, 0.6 + 0.01*300, "IEC 60751 class C (from memory)"},
		{"tc-K-1", 773.15, 2.0, "IEC 60584-1 type K class 1: 0.004*500 > 1.5 (from memory)"},
		{"tc-K-1", 373.15, 1.5, "IEC 60584-1 type K class 1 below 375 degC (from memory)"},
		{"tc-K-2", 473.15, 2.5, "IEC 60584-1 type K class 2 below 333 degC (from memory)"},
		{"tc-N-2", 1073.15, 6.0, "IEC 60584-1 type N class 2: 0.0075*800 (from memory)"},
		{"tc-T-1", 323.15, 0.5, "IEC 60584-1 type T class 1 (from memory)"},
		{"tc-S-1", 1573.15, 1.6, "IEC 60584-1 type S class 1 above 1100 degC at 1300 degC: 1 + 0.003*200 (from memory)"},
		{"TC-j-1", 873.15, 2.4, "IEC 60584-1 type J class 1: 0.004*600 (from memory)"},
	}
	for _, tc := range tests {
		c, err := ParseTempClass(tc.class)
		if err != nil {
			t.Fatalf("%s: %v", tc.class, err)
		}
		tol, err := c.Tolerance(tc.T)
		if err != nil {
			t.Fatalf("%s at %v K: %v", tc.class, tc.T, err)
		}
		if !near(tol, tc.tol, 1e-9) {
			t.Errorf("%s at %v K: tol %v, want %v (%s)", tc.class, tc.T, tol, tc.tol, tc.src)
		}
		u, _ := c.StdUncertainty(tc.T)
		// GUM §4.3.7: rectangular half-width a -> u = a/sqrt(3).
		if !near(u, tc.tol/math.Sqrt(3), 1e-9) {
			t.Errorf("%s: u = %v, want tol/sqrt(3)", tc.class, u)
		}
	}
}

func TestTempClassErrors(t *testing.T) {
	for _, s := range []string{"", "rtd", "rtd-D", "tc-K", "tc-K-3", "tc-X-1", "pt100-A"} {
		if _, err := ParseTempClass(s); !errors.Is(err, ErrClass) {
			t.Errorf("ParseTempClass(%q) err = %v, want ErrClass", s, err)
		}
	}
	a, _ := ParseTempClass("rtd-A")
	for _, T := range []float64{273.15 + 500, 273.15 - 150, math.NaN()} {
		if _, err := a.Tolerance(T); !errors.Is(err, ErrClass) {
			t.Errorf("rtd-A at %v K: err = %v, want out-of-range ErrClass", T, err)
		}
	}
	if _, err := (TempClass{}).Tolerance(300); !errors.Is(err, ErrClass) {
		t.Errorf("zero class: err = %v", err)
	}
}

func TestPropagateFromMatchesPropagate(t *testing.T) {
	calls := 0
	f := func(x, y []float64) error { calls++; y[0] = x[0] * x[1]; return nil }
	x, u := []float64{2, 3}, []float64{0.1, 0.2}
	a, err := Propagate(f, 1, x, u, nil)
	if err != nil {
		t.Fatal(err)
	}
	n1 := calls
	b, err := PropagateFrom(f, []float64{6}, x, u, nil)
	if err != nil {
		t.Fatal(err)
	}
	if calls-n1 != n1-1 {
		t.Errorf("PropagateFrom made %d calls, Propagate %d; want one fewer", calls-n1, n1)
	}
	// GUM eq. 10: u^2 = (3*0.1)^2 + (2*0.2)^2 = 0.25.
	if !near(a.U[0], 0.5, 1e-12) || !near(b.U[0], a.U[0], 1e-15) {
		t.Errorf("u = %v, %v; want 0.5", a.U[0], b.U[0])
	}
}
