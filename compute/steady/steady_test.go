package steady

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

var t0 = time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)

// The expected R values are the published filter equations of Cao and
// Rhinehart (1995), evaluated by hand step by step with λ1 = 0.2, λ2 = λ3 =
// 0.1 (first step: dev = 0.2, v2 = 0.1·0.04 = 0.004, d2 = 0.1·0.04 = 0.004,
// R = 1.8·0.004/0.004 = 1.8; second: dev = 9.9 − 10.04 = −0.14,
// v2 = 0.1·0.0196 + 0.9·0.004 = 0.00556, d2 = 0.1·0.09 + 0.9·0.004 = 0.0126,
// R = 1.8·0.00556/0.0126 = 0.794286; the rest likewise, checked with a
// calculator).
func TestRStatisticHandComputed(t *testing.T) {
	f, err := NewFilter(Config{})
	if err != nil {
		t.Fatal(err)
	}
	xs := []float64{10.0, 10.2, 9.9, 10.1, 10.0, 11.0}
	want := []float64{0, 1.8, 0.7942857142857143, 0.6780391134289407, 0.6428959070647009, 1.5896081439112488}
	wantXf := []float64{10, 10.04, 10.012, 10.0296, 10.02368, 10.218944}
	for i, x := range xs {
		_, r, err := f.Update(t0.Add(time.Duration(i)*time.Second), x)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(r-want[i]) > 1e-12 {
			t.Errorf("sample %d: R = %.15g, want %.15g", i, r, want[i])
		}
		if math.Abs(f.S.Xf-wantXf[i]) > 1e-12 {
			t.Errorf("sample %d: Xf = %.15g, want %.15g", i, f.S.Xf, wantXf[i])
		}
	}
}

func TestNoiseIsSteadyRampIsTransient(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	f, _ := NewFilter(Config{})
	now := t0
	steadyCount := 0
	for i := 0; i < 300; i++ {
		now = now.Add(5 * time.Second)
		st, _, _ := f.Update(now, 100+0.5*rng.NormFloat64())
		if i >= 100 && st {
			steadyCount++
		}
	}
	// Gaussian noise around a constant: mostly steady (common practice:
	// the test's false-alarm rate at R_crit = 2 is a few per cent).
	if steadyCount < 170 {
		t.Fatalf("noise around a constant: steady in %d of 200 ticks, want most", steadyCount)
	}
	// A ramp of 1 unit per sample (2 noise sigmas) must be flagged within a few samples.
	detected := -1
	for i := 0; i < 30; i++ {
		now = now.Add(5 * time.Second)
		st, _, _ := f.Update(now, 100+float64(i+1)+0.5*rng.NormFloat64())
		if !st {
			detected = i
			break
		}
	}
	if detected < 0 || detected > 5 {
		t.Fatalf("ramp detected after %d samples, want within 5", detected)
	}
}

func TestDwellAndWarmup(t *testing.T) {
	f, _ := NewFilter(Config{Dwell: 30 * time.Second, Warmup: 3})
	now := t0
	var got []bool
	for i := 0; i < 10; i++ {
		now = now.Add(10 * time.Second)
		st, _, _ := f.Update(now, 5) // constant: R = 1
		got = append(got, st)
	}
	// R <= R_crit from the second sample (t=20 s); dwell of 30 s -> steady at t=50 s (index 4); warm-up 3 samples already met.
	for i, st := range got {
		if want := i >= 4; st != want {
			t.Errorf("tick %d: steady = %v, want %v", i, st, want)
		}
	}
}

func TestNotFinite(t *testing.T) {
	f, _ := NewFilter(Config{})
	f.Update(t0, 1)
	before := f.S
	if _, _, err := f.Update(t0.Add(time.Second), math.NaN()); err != ErrNotFinite {
		t.Fatalf("NaN: err = %v", err)
	}
	if f.S != before {
		t.Errorf("NaN changed the filter state")
	}
}

func TestConfigValidate(t *testing.T) {
	for _, c := range []Config{{Lambda1: 1.5}, {Lambda2: -0.1}, {RCritical: 0.5}, {Warmup: 1}, {Dwell: -time.Second}} {
		if err := c.Validate(); err == nil {
			t.Errorf("%+v: no error", c)
		}
	}
}

func TestDetectorAllKeys(t *testing.T) {
	d, err := NewDetector(Config{Warmup: 2}, []string{"flow", "p_out"})
	if err != nil {
		t.Fatal(err)
	}
	now := t0
	var v Verdict
	for i := 0; i < 5; i++ {
		now = now.Add(time.Second)
		v = d.Update(now, map[string]float64{"flow": 10, "p_out": 2})
	}
	if !v.Steady {
		t.Fatalf("constant keys not steady: %+v", v)
	}
	v = d.Update(now.Add(time.Second), map[string]float64{"flow": 10})
	if v.Steady || len(v.Transient) != 1 || v.Transient[0] != "p_out" {
		t.Errorf("missing key must make the machine not steady: %+v", v)
	}
	d.Reset()
	if v := d.Update(now.Add(2*time.Second), map[string]float64{"flow": 10, "p_out": 2}); v.Steady {
		t.Errorf("steady right after Reset: %+v", v)
	}
	// Persistence round trip.
	d2, _ := NewDetector(Config{Warmup: 2}, []string{"flow", "p_out"})
	d2.Restore(d.States())
	if d2.filters["flow"].S != d.filters["flow"].S {
		t.Errorf("restore lost state")
	}
}
