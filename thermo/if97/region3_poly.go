package if97

// A small polynomial evaluator for the region-3 and supplementary
// equations of this file group (region3*, backward3*, hs*, sat3*), kept
// separate from the evaluator of the other regions so that either can
// change without the other.

// xterm is one published term n·a^I·b^J of a table (I_i, J_i, n_i).
type xterm struct {
	i, j int
	n    float64
}

// xcterm is a compiled term: exponents shifted to index the power tables
// and the coefficient premultiplied by the factors the derivatives need.
type xcterm struct {
	i, j                     int32
	n, ni, nj, nii, njj, nij float64
}

// xpoly is Σ n a^I b^J compiled for evaluation with power tables filled by
// repeated multiplication (no math.Pow).
type xpoly struct {
	t                []xcterm
	loI, nI, loJ, nJ int
}

// xMaxSpan bounds the exponent span of one variable in the tables here
// (the widest is 49: I from -12 to 36).
const xMaxSpan = 64

func xcompile(terms []xterm) *xpoly {
	q := &xpoly{t: make([]xcterm, len(terms))}
	loI, hiI, loJ, hiJ := terms[0].i, terms[0].i, terms[0].j, terms[0].j
	for _, c := range terms {
		loI, hiI = min(loI, c.i), max(hiI, c.i)
		loJ, hiJ = min(loJ, c.j), max(hiJ, c.j)
	}
	q.loI, q.nI, q.loJ, q.nJ = loI, hiI-loI+1, loJ, hiJ-loJ+1
	if q.nI > xMaxSpan || q.nJ > xMaxSpan {
		panic("if97: exponent span too large") // programming error in a table, caught by every test
	}
	for k, c := range terms {
		fi, fj := float64(c.i), float64(c.j)
		q.t[k] = xcterm{
			i: int32(c.i - loI), j: int32(c.j - loJ),
			n: c.n, ni: c.n * fi, nj: c.n * fj,
			nii: c.n * fi * (fi - 1), njj: c.n * fj * (fj - 1), nij: c.n * fi * fj,
		}
	}
	return q
}

// xfillPow sets dst[k] = x^(lo+k) by repeated multiplication.
func xfillPow(dst []float64, x float64, lo int) {
	hi := lo + len(dst) - 1
	if hi >= 0 {
		p := 1.0
		e := 0
		for ; e < lo; e++ {
			p *= x
		}
		for ; e <= hi; e++ {
			dst[e-lo] = p
			p *= x
		}
	}
	if lo < 0 {
		r := 1 / x
		p := r
		e := -1
		for ; e > hi; e-- {
			p *= r
		}
		for ; e >= lo; e-- {
			dst[e-lo] = p
			p *= r
		}
	}
}

// sum returns Σ n a^I b^J.
func (q *xpoly) sum(a, b float64) float64 {
	var pa, pb [xMaxSpan]float64
	A, B := pa[:q.nI], pb[:q.nJ]
	xfillPow(A, a, q.loI)
	xfillPow(B, b, q.loJ)
	var s0, s1 float64
	t := q.t
	k := 0
	for ; k+1 < len(t); k += 2 {
		s0 += t[k].n * A[t[k].i] * B[t[k].j]
		s1 += t[k+1].n * A[t[k+1].i] * B[t[k+1].j]
	}
	if k < len(t) {
		s0 += t[k].n * A[t[k].i] * B[t[k].j]
	}
	return s0 + s1
}
