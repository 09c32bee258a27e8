package gerg2008

import (
	"math"
	"math/big"
)

// logInv[k] is 1/c with c = 1 + (k-16)/64 (k = 0..48, c from 0.75 to 1.5)
// rounded to float64, and logTab[k] = -ln(logInv[k]) correctly rounded
// (computed once with 256-bit arithmetic): with r = m logInv[k] - 1 (one
// rounding, by FMA), ln m = logTab[k] + ln(1 + r) holds exactly whatever
// the rounding of logInv[k].
var logInv, logTab = func() (inv, tab [49]float64) {
	const prec = 256
	for k := range inv {
		inv[k] = 64 / float64(48+k)
		l := bigLog(new(big.Float).SetPrec(prec).SetFloat64(inv[k]))
		tab[k], _ = l.Neg(l).Float64()
	}
	return
}()

// bigLog returns ln x for 0.5 <= x <= 2 by the series of atanh:
// ln x = 2 atanh((x-1)/(x+1)).
func bigLog(x *big.Float) *big.Float {
	const prec = 256
	one := new(big.Float).SetPrec(prec).SetInt64(1)
	num := new(big.Float).SetPrec(prec).Sub(x, one)
	den := new(big.Float).SetPrec(prec).Add(x, one)
	y := new(big.Float).SetPrec(prec).Quo(num, den) // |y| <= 1/3
	y2 := new(big.Float).SetPrec(prec).Mul(y, y)
	sum := new(big.Float).SetPrec(prec)
	term := new(big.Float).SetPrec(prec).Set(y)
	for k := int64(1); k < 180; k += 2 { // |y|^2 <= 1/9: 90 terms are below 2^-280
		t := new(big.Float).SetPrec(prec).Quo(term, new(big.Float).SetPrec(prec).SetInt64(k))
		sum.Add(sum, t)
		term.Mul(term, y2)
	}
	return sum.Mul(sum, new(big.Float).SetPrec(prec).SetInt64(2))
}

// flog1p returns ln(1 + z) within 2 ulp for -0.75 <= z <= 3 (tested
// against math/big in fastlog_test.go). It is math.Log1p without the
// division: 1 + z = x + c exactly (c the rounding error, added back as
// c/x), x = 2^e m, 0.75 <= m < 1.5 within 1/128 of a table point
// c = 1 + j/64, ln(1 + z) = e ln 2 + ln c + ln(1 + r) + c/x with
// r = m/c - 1, ln(1 + r) from its degree-8 series (truncation below
// 2e-19); |z| < 1/128 is the series directly. Outside [-0.75, 3], or for
// NaN, it returns math.Log1p(z).
func flog1p(z float64) float64 {
	if !(z >= -0.75 && z <= 3) {
		return math.Log1p(z)
	}
	if math.Abs(z) < 1.0/128 {
		return log1pSeries(z)
	}
	x := 1 + z
	// The rounding of 1 + z, recovered exactly (Fast2Sum): 1 + z = x + c.
	var c float64
	if z <= 1 {
		c = (1 - x) + z
	} else {
		c = (z - x) + 1
	}
	b := math.Float64bits(x)
	e := int64(b>>52) - 1023                          // x > 0.25: a normal number
	m := math.Float64frombits(b&(1<<52-1) | 1023<<52) // 1 <= m < 2
	if m >= 1.5 {
		m *= 0.5 // 0.75 <= m < 1.5: e = 0 near x = 1, no cancellation there
		e++
	}
	k := int((m-1)*64 + 16.5)       // nearest (k-16)/64 to m - 1, k = 0..48
	r := math.FMA(m, logInv[k], -1) // |r| <= 1/96
	// ln(1 + z) = ln x + ln(1 + c/x), and ln(1 + c/x) = c/x far below
	// rounding (|c/x| < 2^-52); 1/x = logInv[k] 2^-e to 1 %.
	cx := c * logInv[k] * math.Float64frombits(uint64(1023-e)<<52)
	const ln2Hi, ln2Lo = 6.93147180369123816490e-01, 1.90821492927058770002e-10
	fe := float64(e)
	return fe*ln2Hi + (logTab[k] + (log1pSeries(r) + (fe*ln2Lo + cx)))
}

// log1pSeries is ln(1 + r) for |r| <= 1/96 by its series to r^8
// (truncation below 2e-19 relative).
func log1pSeries(r float64) float64 {
	const (
		c2, c3, c4 = -1.0 / 2, 1.0 / 3, -1.0 / 4
		c5, c6, c7 = 1.0 / 5, -1.0 / 6, 1.0 / 7
		c8         = -1.0 / 8
	)
	return r + r*r*(c2+r*(c3+r*(c4+r*(c5+r*(c6+r*(c7+r*c8))))))
}
