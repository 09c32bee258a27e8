package quality

import (
	"math/rand/v2"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

// benchValues is a noisy level with 1 % spikes, on a grid of 0.01 (ties).
func benchValues(n int) []float64 {
	r := rand.New(rand.NewPCG(1, 2))
	v := make([]float64, n)
	for i := range v {
		v[i] = 100 + float64(int(r.NormFloat64()*100))/100
		if r.IntN(100) == 0 {
			v[i] += 20
		}
	}
	return v
}

// BenchmarkCheck is one check of a sample with a Hampel window of 7, a
// range, a rate limit and a stuck check (ns/op per sample); Previous is
// the implementation before (old_test.go), in the same run.
func BenchmarkCheck(b *testing.B) {
	p := Params{Min: 0, Max: 1000, SpikeWindow: 7, MaxRate: 1e6, StuckPeriod: time.Minute, StuckTolerance: 0.001}
	vals := benchValues(4096)
	t0ns := t0.UnixNano()
	b.Run("current", func(b *testing.B) {
		c := New(p)
		spikes := 0
		for i := 0; i < b.N; i++ {
			if _, rs := c.CheckNs(t0ns+int64(i)*int64(time.Millisecond), vals[i&4095], ingest.Good, true); rs.Has(ingest.ReasonSpike) {
				spikes++
			}
		}
		sinkInt = spikes
	})
	b.Run("previous", func(b *testing.B) {
		c := newOld(p)
		spikes := 0
		for i := 0; i < b.N; i++ {
			if _, rs := c.Check(t0.Add(time.Duration(i)*time.Millisecond), vals[i&4095], ingest.Good, true); rs.Has(ingest.ReasonSpike) {
				spikes++
			}
		}
		sinkInt = spikes
	})
}

var sinkInt int
