package payload

import (
	"math"
	"math/bits"
)

// pow10 holds the powers of ten that float64 represents exactly.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// pow10u holds the powers of ten below 2^64.
var pow10u = [...]uint64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19}

// fastDecimal parses the common plain decimal forms "-?digits(.digits)?"
// without going through strconv, giving the correctly rounded result that
// strconv.ParseFloat gives:
//
//   - when the digits without the point form an integer m up to 2^53 and
//     there are at most 22 decimals, m and 10^k are both exact float64
//     values and the one IEEE division m / 10^k is correctly rounded
//     (strconv's own exact fast path, after Clinger 1990);
//   - otherwise, when m fits in 64 bits and there are at most 19 decimals
//     (shortest round-trip output of a float64 has at most 17 significant
//     digits), m / 10^k is divided exactly in 128-bit integers and rounded
//     once, to nearest even (divRound).
//
// Anything else (exponents, '+', a leading or trailing point, more digits,
// other bytes) reports false and the caller uses strconv.
func fastDecimal(b []byte) (float64, bool) {
	i := 0
	neg := false
	if len(b) > 0 && b[0] == '-' {
		neg = true
		i++
	}
	const maxM = (math.MaxUint64 - 9) / 10 // m*10+9 cannot overflow below this
	var m uint64
	intDigits := 0
	for i < len(b) && b[i] >= '0' && b[i] <= '9' {
		if m > maxM {
			return 0, false
		}
		m = m*10 + uint64(b[i]-'0')
		i++
		intDigits++
	}
	if intDigits == 0 {
		return 0, false
	}
	frac := 0
	if i < len(b) && b[i] == '.' {
		i++
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			if m > maxM || frac >= len(pow10)-1 {
				return 0, false
			}
			m = m*10 + uint64(b[i]-'0')
			frac++
			i++
		}
		if frac == 0 {
			return 0, false
		}
	}
	if i != len(b) {
		return 0, false
	}
	var f float64
	switch {
	case m <= 1<<53:
		f = float64(m) / pow10[frac]
	case frac < len(pow10u):
		f = divRound(m, pow10u[frac])
	default:
		return 0, false
	}
	if neg {
		f = -f
	}
	return f, true
}

// divRound returns m / d rounded to the nearest float64 (ties to even),
// for m > 0 and d >= 1: the quotient is computed exactly to 63 or 64
// significant bits with a sticky remainder, then rounded once.
func divRound(m, d uint64) float64 {
	// Shift m left by s so that hi < d (Div64's precondition) and the
	// quotient has 63 or 64 bits: m<<s has 63+len(d) bits.
	s := 63 + bits.Len64(d) - bits.Len64(m) // 0 <= s <= 126
	var hi, lo uint64
	switch {
	case s >= 64:
		hi, lo = m<<(s-64), 0
	case s == 0:
		hi, lo = 0, m
	default:
		hi, lo = m>>(64-s), m<<s
	}
	q, r := bits.Div64(hi, lo, d)
	shift := bits.Len64(q) - 53 // 10 or 11 bits below the 53-bit mantissa
	mant := q >> shift
	rest := q & (1<<shift - 1)
	half := uint64(1) << (shift - 1)
	if rest > half || (rest == half && (r != 0 || mant&1 == 1)) {
		mant++ // 2^53 at most: still exact as a float64
	}
	return math.Ldexp(float64(mant), shift-s)
}
