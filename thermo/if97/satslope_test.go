package if97

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/thermo"
)

// TestSatTSlope: Water.SatTSlope returns SatT's temperature and a slope
// that agrees with (a) a central difference of SatT (step 1e-5 p, 1e-6
// relative; common practice, no source) and (b) Clausius-Clapeyron,
// T (v” - v')/(h” - h'), from the saturated states of Flash(PX, p, 0) and
// Flash(PX, p, 1), within the consistency of IF97's separately fitted
// region-4 equation and basic equations (3e-4 relative up to Ps13, where
// both phases lie in regions 1 and 2; 2e-3 in region 3; measured here,
// no published bound).
func TestSatTSlope(t *testing.T) {
	var w Water
	var ps []float64
	for lp := math.Log(PsatMin * 1.01); lp < math.Log(Pc*0.9999); lp += 0.25 {
		ps = append(ps, math.Exp(lp))
	}
	ps = append(ps, Ps13*0.999, Ps13*1.001, 21e6, 22e6)
	for _, p := range ps {
		T, slope, err := w.SatTSlope(p)
		if err != nil {
			t.Errorf("p=%g: %v", p, err)
			continue
		}
		if Ts, _ := SatT(p); Ts != T {
			t.Errorf("p=%g: T = %.15g, SatT %.15g", p, T, Ts)
		}
		h := 1e-5 * p
		T1, _ := SatT(p + h)
		T0, _ := SatT(p - h)
		if fd := (T1 - T0) / (2 * h); math.Abs(slope-fd) > 1e-6*math.Abs(fd) {
			t.Errorf("p=%g: dT/dp = %.10g K/Pa, central difference of SatT %.10g", p, slope, fd)
		}
		l, err1 := w.Flash(thermo.PX, p, 0)
		v, err2 := w.Flash(thermo.PX, p, 1)
		if err1 != nil || err2 != nil {
			t.Errorf("p=%g: %v %v", p, err1, err2)
			continue
		}
		tol := 3e-4
		if p > Ps13 {
			tol = 2e-3
		}
		if cc := T * (v.V - l.V) / (v.H - l.H); math.Abs(slope-cc) > tol*cc {
			t.Errorf("p=%g: dT/dp = %.10g K/Pa, Clausius-Clapeyron %.10g (rel. %.2g > %.0g)", p, slope, cc, slope/cc-1, tol)
		} else {
			t.Logf("p=%.4g Pa: slope vs Clausius-Clapeyron %.2g", p, slope/cc-1)
		}
	}
	for _, c := range []struct {
		p    float64
		want error
	}{{math.NaN(), thermo.ErrNotFinite}, {100, thermo.ErrOutOfRange}, {Pc * 1.01, thermo.ErrOutOfRange}} {
		if _, _, err := w.SatTSlope(c.p); !errors.Is(err, c.want) {
			t.Errorf("SatTSlope(%g): %v, want %v", c.p, err, c.want)
		}
	}
}
