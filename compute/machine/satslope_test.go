package machine

import (
	"errors"
	"math"
	"testing"

	"github.com/exergywatch/exergywatch/compute/uncert"
	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

// noSlope hides a fluid's SatTSlope, so satCheck takes its fallback path
// (two SatT calls and a forward difference).
type noSlope struct {
	thermo.Fluid
	sat thermo.Saturation
}

func (n noSlope) SatT(p float64) (float64, error) { return n.sat.SatT(p) }
func (n noSlope) SatP(T float64) (float64, error) { return n.sat.SatP(T) }

// The saturation check gives the same verdict whether Tsat and dTsat/dp
// come from one SatTSlope call or from two SatT calls: at 0.1 % inside and
// outside the refusal band |T - Tsat| <= K95 * hypot(u_T, dTsat/dp * u_p)
// (here dominated by a 2 % pressure uncertainty, so a wrong slope would
// move the band by far more than 0.1 %). Band values: this model's own
// saturation line, no outside source.
func TestSatCheckSlopePathsAgree(t *testing.T) {
	for _, c := range []struct {
		fluid  string
		kind   Kind
		p1, T1 float64 // Pa, K
		p2     float64 // Pa; the outlet is read near Tsat(p2)
	}{
		{"water", Turbine, 0.8e6, 600, 20e3},
		{"ammonia", Compressor, 2e5, 280, 1.2e6},
	} {
		fl, err := fluids.New(c.fluid, nil)
		if err != nil {
			t.Fatal(err)
		}
		ss, ok := fl.(thermo.SaturationSlope)
		if !ok {
			t.Fatalf("%s: no SatTSlope", c.fluid)
		}
		ts, dTdp, err := ss.SatTSlope(c.p2)
		if err != nil {
			t.Fatal(err)
		}
		const uT, relP = 0.05, 0.02
		band := uncert.K95 * math.Hypot(uT, dTdp*relP*c.p2)
		if band < 5*minFixBand {
			t.Fatalf("%s: band %.3f K too narrow to test the slope", c.fluid, band)
		}
		u := Uncertainty{T2: Std{Abs: uT}, P2: Std{Rel: relP}}
		for _, f := range []thermo.Fluid{fl, noSlope{Fluid: fl, sat: fl.(thermo.Saturation)}} {
			spec := &Spec{Kind: c.kind, Fluid: f, Inlet: ByPT, Outlet: ByPT, Uncertainty: u}
			for _, d := range []struct {
				off     float64
				refused bool
			}{{0.999 * band, true}, {1.001 * band, false}} {
				_, err := Evaluate(spec, &Inputs{P1: c.p1, T1: c.T1, P2: c.p2, T2: ts + d.off})
				if got := errors.Is(err, ErrStateNotFixed); got != d.refused {
					t.Errorf("%s (%T): outlet %.4f K above Tsat, band %.4f K: refused = %v (%v), want %v",
						c.fluid, f, d.off, band, got, err, d.refused)
				}
			}
		}
	}
}
