package quality

import (
	"math"
	"sort"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

var t0 = time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)

func TestHampelSpike(t *testing.T) {
	// Window 5 previous values 10, 10.1, 9.9, 10.2, 9.8: median 10, absolute
	// deviations 0, .1, .1, .2, .2 -> MAD 0.1; threshold 3*1.4826*0.1 =
	// 0.44478 (Hampel filter, common practice, computed by hand).
	c := New(Params{SpikeWindow: 5})
	for i, v := range []float64{10, 10.1, 9.9, 10.2, 9.8} {
		if use, rs := c.Check(t0.Add(time.Duration(i)*time.Second), v, ingest.Good, true); !use || rs != 0 {
			t.Fatalf("warm-up %d flagged %v", i, rs)
		}
	}
	// 10.44 is inside 10 ± 0.44478; 10.46 would be outside.
	if use, rs := c.Check(t0.Add(5*time.Second), 10.44, ingest.Good, true); !use || rs.Has(ingest.ReasonSpike) {
		t.Fatalf("10.44 flagged as spike: %v", rs)
	}
	c2 := New(Params{SpikeWindow: 5})
	for i, v := range []float64{10, 10.1, 9.9, 10.2, 9.8} {
		c2.Check(t0.Add(time.Duration(i)*time.Second), v, ingest.Good, true)
	}
	if use, rs := c2.Check(t0.Add(5*time.Second), 10.46, ingest.Good, true); use || !rs.Has(ingest.ReasonSpike) {
		t.Fatalf("10.46 not flagged as spike: %v", rs)
	}
}

func TestHampelStepBecomesNewLevel(t *testing.T) {
	// A genuine step is spiky for about half a window, then accepted
	// (behaviour of the Hampel filter on steps; common practice).
	c := New(Params{SpikeWindow: 5, SpikeFloor: 0.01})
	for i := 0; i < 5; i++ {
		c.Check(t0.Add(time.Duration(i)*time.Second), 10, ingest.Good, true)
	}
	spikes := 0
	for i := 5; i < 15; i++ {
		if use, _ := c.Check(t0.Add(time.Duration(i)*time.Second), 20, ingest.Good, true); !use {
			spikes++
		}
	}
	if spikes != 3 {
		t.Fatalf("step flagged %d times, want 3 (until 3 of 5 window values are 20)", spikes)
	}
}

func TestChecks(t *testing.T) {
	tests := []struct {
		name   string
		p      Params
		vals   []float64
		q      ingest.Quality
		dt     time.Duration
		last   ingest.Reasons
		useEnd bool
	}{
		{"bad status", Params{}, []float64{1}, ingest.Bad, time.Second, ingest.Reasons(0).Add(ingest.ReasonStatusBad), false},
		{"uncertain flagged", Params{}, []float64{1}, ingest.Uncertain, time.Second, ingest.Reasons(0).Add(ingest.ReasonStatusUncertain), true},
		{"uncertain rejected", Params{RejectUncertain: true}, []float64{1}, ingest.Uncertain, time.Second, ingest.Reasons(0).Add(ingest.ReasonStatusUncertain), false},
		{"range", Params{Min: 0, Max: 10}, []float64{11}, ingest.Good, time.Second, ingest.Reasons(0).Add(ingest.ReasonOutOfRange), false},
		// 1 -> 3 in 1 s is 2/s > limit 1.5/s.
		{"rate", Params{MaxRate: 1.5}, []float64{1, 3}, ingest.Good, time.Second, ingest.Reasons(0).Add(ingest.ReasonRateOfChange), false},
		// 1 -> 2.4 in 1 s is 1.4/s < 1.5/s.
		{"rate ok", Params{MaxRate: 1.5}, []float64{1, 2.4}, ingest.Good, time.Second, 0, true},
		// 4 samples 10 s apart within 0.05 of 5: 30 s without change >= 30 s.
		{"stuck", Params{StuckPeriod: 30 * time.Second, StuckTolerance: 0.05}, []float64{5, 5.01, 4.99, 5.02}, ingest.Good, 10 * time.Second, ingest.Reasons(0).Add(ingest.ReasonStuck), true},
		{"not stuck", Params{StuckPeriod: 30 * time.Second, StuckTolerance: 0.05}, []float64{5, 5.01, 5.2, 5.21}, ingest.Good, 10 * time.Second, 0, true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			c := New(tc.p)
			var use bool
			var rs ingest.Reasons
			for i, v := range tc.vals {
				use, rs = c.Check(t0.Add(time.Duration(i)*tc.dt), v, tc.q, true)
			}
			if use != tc.useEnd || rs != tc.last {
				t.Fatalf("got use=%v reasons=%v, want use=%v reasons=%v", use, rs, tc.useEnd, tc.last)
			}
		})
	}
}

func TestAtEvaluation(t *testing.T) {
	c := New(Params{StaleAfter: 5 * time.Second, StuckPeriod: time.Minute, StuckTolerance: 0.1})
	if !c.AtEvaluation(t0).Has(ingest.ReasonStale) {
		t.Fatal("no data must be stale")
	}
	c.Check(t0, 1, ingest.Good, true)
	if rs := c.AtEvaluation(t0.Add(5 * time.Second)); rs != 0 {
		t.Fatalf("5 s old sample flagged %v", rs)
	}
	rs := c.AtEvaluation(t0.Add(61 * time.Second))
	if !rs.Has(ingest.ReasonStale) || !rs.Has(ingest.ReasonStuck) {
		t.Fatalf("61 s without change: %v, want stale and stuck", rs)
	}
	if math.Abs(HampelScale-1/0.6744897501960817) > 1e-4 {
		// 1/Φ⁻¹(0.75), Φ⁻¹(0.75) = 0.6744897501960817 (standard normal quantile, from memory).
		t.Fatal("Hampel scale")
	}
}

// FuzzMedianMAD checks the incremental median/MAD against sorting (the
// definition) for arbitrary windows.
func FuzzMedianMAD(f *testing.F) {
	f.Add(5, 1.0, 2.0, 3.0, 10.0, -4.0, 0.5)
	f.Add(4, 0.0, 0.0, 0.0, 1.0, 1.0, 1.0)
	f.Fuzz(func(t *testing.T, w int, a, b, c, d, e, g float64) {
		w = 3 + (w%6+6)%6
		ch := New(Params{SpikeWindow: w})
		vals := []float64{a, b, c, d, e, g, a + 1, b * 2}
		for i, v := range vals {
			if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > 1e150 {
				return
			}
			ch.Check(t0.Add(time.Duration(i)*time.Second), v, ingest.Good, true)
		}
		win := append([]float64(nil), ch.buf[:ch.histN]...)
		sort.Float64s(win)
		med := win[len(win)/2]
		if len(win)%2 == 0 {
			med = (win[len(win)/2-1] + win[len(win)/2]) / 2
		}
		dev := make([]float64, len(win))
		for i := range win {
			dev[i] = math.Abs(win[i] - med)
		}
		sort.Float64s(dev)
		mad := dev[len(dev)/2]
		if len(dev)%2 == 0 {
			mad = (dev[len(dev)/2-1] + dev[len(dev)/2]) / 2
		}
		gm, gd := medianMAD(ch.buf[w : w+int(ch.histN)])
		if gm != med || math.Abs(gd-mad) > 1e-12*math.Max(1, mad) {
			t.Fatalf("window %v: got median %v MAD %v, want %v %v", win, gm, gd, med, mad)
		}
	})
}

// TestSearchSortedAgreesWithSort: the linear search used for short Hampel
// windows must return what sort.SearchFloat64s returns (also for values
// equal to members, outside the range, NaN, and long windows).
func TestSearchSortedAgreesWithSort(t *testing.T) {
	for _, n := range []int{0, 1, 2, 3, 7, 32, 33, 100} {
		s := make([]float64, n)
		for i := range s {
			s[i] = float64(i/2) * 0.5 // with repeats
		}
		for _, v := range []float64{-1, 0, 0.25, 0.5, 3, float64(n), math.NaN(), math.Inf(1), math.Inf(-1)} {
			if got, want := searchSorted(s, v), sort.SearchFloat64s(s, v); got != want {
				t.Errorf("n=%d v=%v: got %d want %d", n, v, got, want)
			}
		}
	}
}

// TestReplaceSortedAgreesWithRemoveInsert: the one-pass replacement in
// place must leave the same sorted window as removing the old value and
// inserting the new one (the reference functions of old_test.go; repeats,
// ends, equal values); a value not held leaves the window as it is.
func TestReplaceSortedAgreesWithRemoveInsert(t *testing.T) {
	vals := []float64{-2, 0, 0, 1, 1.5, 3, 3, 3, 7}
	for n := 1; n <= 7; n++ {
		for start := 0; start+n <= len(vals); start++ {
			win := append([]float64(nil), vals[start:start+n]...)
			sort.Float64s(win)
			for _, old := range append(append([]float64(nil), win...), 99) {
				for _, v := range vals {
					want := oldInsertSorted(oldRemoveSorted(append([]float64(nil), win...), old), v)
					if old == 99 {
						want = win
					}
					got := append([]float64(nil), win...)
					replaceSorted(got, old, v)
					if len(got) != len(want) {
						t.Fatalf("%v - %v + %v: got %v want %v", win, old, v, got, want)
					}
					for i := range got {
						if got[i] != want[i] {
							t.Fatalf("%v - %v + %v: got %v want %v", win, old, v, got, want)
						}
					}
				}
			}
		}
	}
}
