package helmholtz

import (
	"math"
	"testing"
)

// TestResidualThirdDelta checks the third delta derivative steering the
// Halley step of the density iteration against a central difference of the
// analytic second derivative (expected values computed here; common
// practice, no source). DDD leaves out the non-analytic terms by design
// (it only steers the iteration), so water and co2 are skipped.
func TestResidualThirdDelta(t *testing.T) {
	for _, n := range Names() {
		f := mustNew(t, n)
		if len(f.q.nN) > 0 {
			continue
		}
		for _, c := range [][2]float64{{1.3, 0.05}, {1.1, 0.8}, {0.9, 2.2}, {1.05, 1.5}} {
			var tp tauPart
			f.q.tauPart(c[0], &tp)
			d := c[1]
			r := f.q.residual(&tp, d, true)
			h := 1e-5 * d
			rp := f.q.residual(&tp, d+h, false)
			rm := f.q.residual(&tp, d-h, false)
			// DD = d^2 ar_dd, so d dDD/dd = 2 DD + DDD.
			num := d*(rp.DD-rm.DD)/(2*h) - 2*r.DD
			if math.Abs(num-r.DDD) > 1e-6*(math.Abs(r.DDD)+1) {
				t.Errorf("%s tau %g delta %g: DDD %g, central difference %g", n, c[0], d, r.DDD, num)
			}
		}
	}
}
