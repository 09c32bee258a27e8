package quality

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

// diffStep is one sample of a differential stream.
type diffStep struct {
	dt      time.Duration // from the previous sample (negative: out of order)
	v       float64
	q       ingest.Quality
	inOrder bool
}

// sameVerdicts runs steps through the checker and the reference copy of
// the previous implementation (old_test.go) and fails on the first
// different verdict, reason set or evaluation-time reasons.
func sameVerdicts(t *testing.T, p Params, steps []diffStep) {
	t.Helper()
	c, o := New(p), newOld(p)
	at := t0
	for i, s := range steps {
		at = at.Add(s.dt)
		gu, gr := c.Check(at, s.v, s.q, s.inOrder)
		wu, wr := o.Check(at, s.v, s.q, s.inOrder)
		if gu != wu || gr != wr {
			t.Fatalf("params %+v step %d (%+v): got use=%v %v, want use=%v %v", p, i, s, gu, gr, wu, wr)
		}
		for _, ahead := range []time.Duration{0, p.StaleAfter, p.StuckPeriod, p.StuckPeriod + time.Second} {
			if g, w := c.AtEvaluation(at.Add(ahead)), o.AtEvaluation(at.Add(ahead)); g != w {
				t.Fatalf("params %+v step %d: at evaluation +%v got %v want %v", p, i, ahead, g, w)
			}
		}
		gl, gok := c.Last()
		wl, wok := o.Last()
		if gok != wok || !gl.Equal(wl) {
			t.Fatalf("step %d: Last %v %v, want %v %v", i, gl, gok, wl, wok)
		}
	}
}

// randomStream draws a stream with noise, spikes, steps, repeated values
// (ties in the Hampel window), flat runs, out-of-range values, bad and
// uncertain status and out-of-order samples; no NaN (the engine never
// passes one).
func randomStream(r *rand.Rand, n int) []diffStep {
	steps := make([]diffStep, n)
	level := 100.0
	grid := r.IntN(2) == 0 // values on a coarse grid: many ties
	for i := range steps {
		s := &steps[i]
		s.dt = time.Duration(r.IntN(3000)) * time.Millisecond
		s.inOrder = true
		if r.IntN(10) == 0 {
			s.dt = -time.Duration(r.IntN(2000)) * time.Millisecond
			s.inOrder = false
		}
		switch r.IntN(20) {
		case 0:
			level += r.NormFloat64() * 20 // step
		}
		v := level + r.NormFloat64()
		switch r.IntN(12) {
		case 0:
			v += (r.Float64() - 0.5) * 200 // spike
		case 1:
			v = level // flat
		case 2:
			v = -1e6 // out of range
		}
		if grid {
			v = math.Round(v)
		}
		s.v = v
		switch r.IntN(15) {
		case 0:
			s.q = ingest.Bad
		case 1:
			s.q = ingest.Uncertain
		default:
			s.q = ingest.Good
		}
	}
	return steps
}

func randomParams(r *rand.Rand) Params {
	p := Params{SpikeWindow: []int{0, 3, 4, 5, 7, 8, 15, 33, 40}[r.IntN(9)]}
	if r.IntN(2) == 0 {
		p.Min, p.Max = -1000, 1000
	}
	if r.IntN(2) == 0 {
		p.SpikeK = 2 + r.Float64()*2
	}
	if r.IntN(2) == 0 {
		p.SpikeFloor = r.Float64() * 3
	}
	if r.IntN(2) == 0 {
		p.MaxRate = 5 + r.Float64()*50
	}
	if r.IntN(2) == 0 {
		p.StuckPeriod = time.Duration(1+r.IntN(20)) * time.Second
		p.StuckTolerance = r.Float64() * 0.5
	}
	if r.IntN(2) == 0 {
		p.StaleAfter = time.Duration(1+r.IntN(10)) * time.Second
	}
	p.RejectUncertain = r.IntN(2) == 0
	return p
}

// TestCheckerMatchesPrevious: every verdict of the checker equals the
// previous implementation's (old_test.go) on random streams.
func TestCheckerMatchesPrevious(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 11))
	for k := 0; k < 400; k++ {
		sameVerdicts(t, randomParams(r), randomStream(r, 300))
	}
	// Periodic streams (the window sees the same values again and again,
	// so the kept median and MAD are reused) broken by an occasional
	// other value, spike or bad sample.
	for k := 0; k < 200; k++ {
		p := randomParams(r)
		period := 1 + r.IntN(10)
		if r.IntN(2) == 0 && p.SpikeWindow > 0 {
			period = p.SpikeWindow
		}
		base := make([]float64, period)
		for i := range base {
			base[i] = 100 + float64(r.IntN(5))
		}
		steps := randomStream(r, 300)
		for i := range steps {
			if r.IntN(30) != 0 {
				steps[i].v, steps[i].q, steps[i].inOrder = base[i%period], ingest.Good, true
				steps[i].dt = 10 * time.Millisecond
			}
		}
		sameVerdicts(t, p, steps)
	}
}

// FuzzCheckerMatchesPrevious: the same comparison on fuzzed streams (7
// bytes per sample: time step, value, status, order).
func FuzzCheckerMatchesPrevious(f *testing.F) {
	f.Add(uint8(7), int64(1), []byte("\x10\x00\x64\x00\x00\x01\x00\x10\x00\x64\x01\x00\x01\x00\x10\x00\xff\x00\x00\x01\x00\x10\x00\x64\x00\x00\x01\x00\x10\x00\x64\x00\x00\x01\x00"))
	f.Add(uint8(3), int64(2), []byte("\x01\x00\x01\x00\x00\x01\x00\x01\x00\x01\x00\x00\x01\x00\x01\x00\x02\x00\x02\x00\x00\x01\x00\x01\x00\x01\x00\x00"))
	f.Fuzz(func(t *testing.T, w uint8, seed int64, data []byte) {
		r := rand.New(rand.NewPCG(uint64(seed), 3))
		p := randomParams(r)
		p.SpikeWindow = int(w % 41)
		var steps []diffStep
		for len(data) >= 7 {
			s := diffStep{dt: time.Duration(int16(uint16(data[0])|uint16(data[1])<<8)) * time.Millisecond,
				v: float64(int16(uint16(data[2])|uint16(data[3])<<8)) / 8, q: ingest.Quality(data[4] % 3), inOrder: data[5]&1 == 1}
			if s.dt < 0 {
				s.inOrder = false
			}
			steps = append(steps, s)
			data = data[7:]
		}
		sameVerdicts(t, p, steps)
	})
}

// TestMedianMADMatchesMerge: the branch-free MAD equals the merge of the
// previous implementation (the median bit for bit, the MAD as a number:
// +0 and -0 may differ, which no threshold test can tell apart), on
// sorted windows of 1..40 values with many ties, negative values and zero
// spread.
func TestMedianMADMatchesMerge(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	for k := 0; k < 20000; k++ {
		n := 1 + r.IntN(40)
		s := make([]float64, n)
		scale := []float64{0, 0.5, 1, 1e-9, 1e9}[r.IntN(5)]
		for i := range s {
			s[i] = float64(r.IntN(9)-4)*scale + 3
			if r.IntN(3) == 0 {
				s[i] = r.NormFloat64() * scale
			}
		}
		sortFloats(s)
		o := &oldChecker{sorted: s}
		wm, wd := o.oldMedianMAD()
		gm, gd := medianMAD(s)
		if math.Float64bits(gm) != math.Float64bits(wm) || gd != wd || math.Float64bits(madMerge(s, gm)) != math.Float64bits(wd) {
			t.Fatalf("%v: got %v %v, want %v %v", s, gm, gd, wm, wd)
		}
	}
}

func sortFloats(s []float64) {
	for i := 1; i < len(s); i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
}

// TestRateExceededMatchesQuotient: the multiplied comparison decides like
// the quotient dv/d.Seconds() > maxRate, also at the limit itself and one
// unit in the last place either side, for durations from 1 ns to years.
func TestRateExceededMatchesQuotient(t *testing.T) {
	r := rand.New(rand.NewPCG(8, 9))
	for k := 0; k < 200000; k++ {
		d := time.Duration(r.Int64N(int64(1) << uint(1+r.IntN(62))))
		if d <= 0 {
			d = 1
		}
		maxRate := math.Exp(r.NormFloat64() * 10)
		dv := maxRate * d.Seconds()
		switch r.IntN(4) {
		case 0:
			dv = math.Nextafter(dv, math.Inf(1))
		case 1:
			dv = math.Nextafter(dv, 0)
		case 2:
			dv *= math.Exp(r.NormFloat64())
		}
		if r.IntN(50) == 0 {
			dv = []float64{0, math.Inf(1), math.NaN()}[r.IntN(3)]
		}
		if got, want := rateExceeded(dv, d, maxRate), dv/d.Seconds() > maxRate; got != want {
			t.Fatalf("dv %v d %v maxRate %v: got %v want %v", dv, d, maxRate, got, want)
		}
	}
}
