package fastmath

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"
)

// bigExp is e^x to 200 bits by argument halving and the Taylor series
// (reference for Exp; common practice, no source).
func bigExp(x float64) *big.Float {
	const prec = 200
	// e^x = (e^(x/2^s))^(2^s)
	s := 20
	y := new(big.Float).SetPrec(prec).SetFloat64(x)
	y.SetMantExp(y, -s)
	sum := new(big.Float).SetPrec(prec).SetInt64(1)
	term := new(big.Float).SetPrec(prec).SetInt64(1)
	for n := 1; n < 40; n++ {
		term.Mul(term, y)
		term.Quo(term, new(big.Float).SetPrec(prec).SetInt64(int64(n)))
		sum.Add(sum, term)
	}
	for i := 0; i < s; i++ {
		sum.Mul(sum, sum)
	}
	return sum
}

// TestFexp checks Exp against a 200-bit reference: within one ulp, and
// never worse than math.Exp by more than one ulp.
func TestFexp(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	worst := 0.0
	for i := 0; i < 4000; i++ {
		var x float64
		switch i % 3 {
		case 0:
			x = (rng.Float64()*2 - 1) * 1
		case 1:
			x = (rng.Float64()*2 - 1) * 50
		default:
			x = (rng.Float64()*2 - 1) * 700
		}
		ref, _ := bigExp(x).Float64()
		got := Exp(x)
		ulp := math.Abs(got-ref) / (math.Nextafter(ref, math.Inf(1)) - ref)
		worst = max(worst, ulp)
		if ulp > 1 {
			t.Fatalf("Exp(%v) = %v, reference %v: %g ulp", x, got, ref, ulp)
		}
	}
	t.Logf("worst error %g ulp", worst)
	for _, x := range []float64{0, -0.0, 1, -1, 700, -700, 701, -746, 710, math.Inf(1), math.Inf(-1)} {
		if got, want := Exp(x), math.Exp(x); got != want {
			t.Errorf("Exp(%v) = %v, want %v", x, got, want)
		}
	}
	if !math.IsNaN(Exp(math.NaN())) {
		t.Error("Exp(NaN) is not NaN")
	}
}

var sinkExp float64

func BenchmarkFexp(b *testing.B) {
	x := 0.0
	for i := 0; i < b.N; i++ {
		x += Exp(-1.2345 - float64(i&7)*0.01)
	}
	sinkExp = x
}

func BenchmarkMathExp(b *testing.B) {
	x := 0.0
	for i := 0; i < b.N; i++ {
		x += math.Exp(-1.2345 - float64(i&7)*0.01)
	}
	sinkExp = x
}
