package payload

// pow10 holds the powers of ten that float64 represents exactly.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// fastDecimal parses the common plain decimal forms "-?digits(.digits)?"
// without going through strconv, when the result is exact: the digits
// without the point form an integer m below 2^53 and there are at most 22
// decimals, so m and 10^k are both exact float64 values and the one IEEE
// division m / 10^k is correctly rounded, the same result strconv.ParseFloat
// returns (its own exact fast path, after Clinger 1990). Anything else
// (exponents, '+', a leading or trailing point, more digits, other bytes)
// reports false and the caller uses strconv.
func fastDecimal(b []byte) (float64, bool) {
	i := 0
	neg := false
	if len(b) > 0 && b[0] == '-' {
		neg = true
		i++
	}
	var m uint64
	intDigits := 0
	for i < len(b) && b[i] >= '0' && b[i] <= '9' {
		m = m*10 + uint64(b[i]-'0') // m <= 2^53 before: no overflow
		if m > 1<<53 {
			return 0, false
		}
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
			m = m*10 + uint64(b[i]-'0')
			frac++
			if m > 1<<53 || frac >= len(pow10) {
				return 0, false
			}
			i++
		}
		if frac == 0 {
			return 0, false
		}
	}
	if i != len(b) {
		return 0, false
	}
	f := float64(m) / pow10[frac]
	if neg {
		f = -f
	}
	return f, true
}
