// Package fastmath holds the elementary functions the property models call
// in their innermost loops (thermo/helmholtz, thermo/gerg2008).
package fastmath

import (
	"math"
	"math/big"
)

// expTab[j] is 2^(j/64) correctly rounded to float64 (computed once with
// 256-bit arithmetic).
var expTab = func() (t [64]float64) {
	const prec = 256
	r := new(big.Float).SetPrec(prec).SetInt64(2)
	for i := 0; i < 6; i++ {
		r.Sqrt(r) // 2^(1/64)
	}
	v := new(big.Float).SetPrec(prec).SetInt64(1)
	for j := range t {
		t[j], _ = v.Float64()
		v.Mul(v, r)
	}
	return
}()

// Exp returns e^x with an error below one unit in the last place for
// |x| <= 700 (tested against math.Exp and math/big in fastexp_test.go),
// and math.Exp(x) outside that range or for NaN. It is math.Exp without
// the call: x = (64 m + j) ln2/64 + r with |r| <= ln2/128, e^x =
// 2^m 2^(j/64) e^r, e^r from its degree-6 Taylor polynomial (truncation
// below 1e-19 relative).
func Exp(x float64) float64 {
	if !(x >= -700 && x <= 700) {
		return math.Exp(x)
	}
	const (
		shift  = 0x1.8p52
		invL   = 64 / math.Ln2
		ln2Hi  = 6.93147180369123816490e-01 / 64 // 32 significant bits: k ln2Hi is exact
		ln2Lo  = 1.90821492927058770002e-10 / 64
		c2, c3 = 1.0 / 2, 1.0 / 6
		c4, c5 = 1.0 / 24, 1.0 / 120
		c6     = 1.0 / 720
	)
	t := x*invL + shift
	k := t - shift                   // nearest integer to x 64/ln2
	ki := int64(math.Float64bits(t)) // low bits hold k (two's complement)
	r := (x - k*ln2Hi) - k*ln2Lo
	p := r + r*r*(c2+r*(c3+r*(c4+r*(c5+r*c6))))
	tj := expTab[ki&63]
	v := tj + tj*p
	return math.Float64frombits(math.Float64bits(v) + uint64((ki>>6)<<52))
}
