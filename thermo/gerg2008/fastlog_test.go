package gerg2008

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"
)

// bigLog1p is ln(1 + z) to 256 bits (reference for flog1p; common
// practice, no source): ln(1 + z) = k ln 2 + ln((1 + z)/2^k) with the
// argument of bigLog in [0.5, 2].
func bigLog1p(z float64) *big.Float {
	const prec = 256
	x := new(big.Float).SetPrec(prec).SetFloat64(z)
	x.Add(x, new(big.Float).SetPrec(prec).SetInt64(1))
	k := 0
	for x.Cmp(big.NewFloat(2)) > 0 {
		x.Quo(x, big.NewFloat(2))
		k++
	}
	for x.Cmp(big.NewFloat(0.5)) < 0 {
		x.Mul(x, big.NewFloat(2))
		k--
	}
	l := bigLog(x)
	ln2 := new(big.Float).SetPrec(prec).Set(bigLn2)
	return l.Add(l, ln2.Mul(ln2, new(big.Float).SetPrec(prec).SetInt64(int64(k))))
}

var bigLn2 = bigLog(new(big.Float).SetPrec(256).SetInt64(2))

// TestFlog1p checks flog1p against a 256-bit reference, within 2 ulp, on
// the range the ideal-gas part uses (z = -exp(-2u) and +exp(-2u), u >= 0.1)
// and beyond. The tolerance is this package's requirement, no source.
func TestFlog1p(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	worstAbs, worstUlp := 0.0, 0.0
	for i := 0; i < 3000; i++ {
		var z float64
		switch i % 4 {
		case 0:
			z = -math.Exp(-2 * (0.1 + 40*rng.Float64()))
		case 1:
			z = math.Exp(-2 * (0.1 + 40*rng.Float64()))
		case 2:
			z = -0.75 + 3.75*rng.Float64()
		default:
			z = (rng.Float64()*2 - 1) / 128
		}
		ref, _ := bigLog1p(z).Float64()
		got := flog1p(z)
		abs := math.Abs(got - ref)
		ulp := abs / math.Abs(math.Nextafter(ref, math.Inf(1))-ref)
		worstAbs = max(worstAbs, abs)
		worstUlp = max(worstUlp, ulp)
		if ulp > 2 {
			t.Fatalf("flog1p(%v) = %v, reference %v: %g ulp", z, got, ref, ulp)
		}
	}
	t.Logf("worst absolute error %g, worst %g ulp", worstAbs, worstUlp)
	for _, z := range []float64{0, 1e-300, -0.8, 3.5, -1, math.Inf(1)} {
		if got, want := flog1p(z), math.Log1p(z); got != want && math.Abs(got-want) > 2e-16*math.Abs(want) {
			t.Errorf("flog1p(%v) = %v, want %v", z, got, want)
		}
	}
	if !math.IsNaN(flog1p(math.NaN())) || !math.IsNaN(flog1p(-2)) {
		t.Error("flog1p of NaN or below -1 is not NaN")
	}
}

var sinkLog float64

func BenchmarkFlog1p(b *testing.B) {
	x := 0.0
	for i := 0; i < b.N; i++ {
		x += flog1p(-0.01234 - float64(i&7)*0.031)
	}
	sinkLog = x
}

func BenchmarkMathLog1p(b *testing.B) {
	x := 0.0
	for i := 0; i < b.N; i++ {
		x += math.Log1p(-0.01234 - float64(i&7)*0.031)
	}
	sinkLog = x
}
