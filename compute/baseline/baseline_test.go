package baseline

import (
	"math"
	"testing"
)

// Hand computations from the definitions in the package doc.
func TestDegradationPower(t *testing.T) {
	cases := []struct {
		name                   string
		exp                    Expansion
		eta, uEta, p, uP, base float64
		wantDP, wantU          float64
	}{
		// Compressor at 0.80 against 0.84 drawing 10 MW: ΔP = 10 (1 − 0.80/0.84) = 0.47619 MW;
		// U95 = hypot(10/0.84 · 0.004, 0.047619 · 0.1) MW = hypot(0.047619, 0.0047619) = 0.047856 MW.
		{"compressor", false, 0.80, 0.004, 10e6, 0.1e6, 0.84, 476190.4761904762, 47856.3},
		// Turbine at 0.83 against 0.86 giving 85 MW: ΔP = 85 (0.86/0.83 − 1) = 3.0723 MW.
		{"turbine", true, 0.83, 0, 85e6, 0, 0.86, 3072289.156626506, 0},
		// At the baseline nothing is lost.
		{"at baseline", false, 0.84, 0.01, 5e6, 0, 0.84, 0, 5e6 / 0.84 * 0.01},
		// Better than baseline: negative cost (a saving).
		{"better", true, 0.88, 0, 100e6, 0, 0.86, -2272727.2727272725, 0},
	}
	for _, c := range cases {
		dp, u, err := DegradationPower(c.exp, c.eta, c.uEta, c.p, c.uP, c.base)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if math.Abs(dp-c.wantDP) > 1e-6*math.Max(1, math.Abs(c.wantDP)) || math.Abs(u-c.wantU) > 1e-4*math.Max(1, c.wantU) {
			t.Errorf("%s: ΔP = %.10g ± %.6g, want %.10g ± %.6g", c.name, dp, u, c.wantDP, c.wantU)
		}
	}
	for _, bad := range [][5]float64{{0, 0, 1, 0, 0.8}, {0.8, 0, -1, 0, 0.8}, {math.NaN(), 0, 1, 0, 0.8}, {0.8, 0, 1, 0, 2}} {
		if _, _, err := DegradationPower(false, bad[0], bad[1], bad[2], bad[3], bad[4]); err == nil {
			t.Errorf("%v accepted", bad)
		}
	}
}
