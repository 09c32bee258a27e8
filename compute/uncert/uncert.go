// Package uncert propagates measurement uncertainty through a calculation
// to first order, in the manner of the GUM (JCGM 100:2008, "Evaluation of
// measurement data — Guide to the expression of uncertainty in
// measurement", clause 5, law of propagation of uncertainty, eq. 13 with
// correlated inputs) and ASME PTC 19.1-2018 ("Test Uncertainty", section 7,
// Taylor-series method). Sensitivity coefficients are found by central
// differences on the same calculation that produced the result, so no
// separate derivative code can drift from the model.
//
// It also turns instrument tolerance classes (IEC 60751 platinum resistance
// thermometers, IEC 60584-1 thermocouples) into standard uncertainties; see
// instruments.go.
//
// Units: whatever the model uses; every quantity here is in the unit of its
// input or output (SI throughout exergywatch).
package uncert

import (
	"errors"
	"fmt"
	"math"
)

// K95 is the coverage factor for an expanded uncertainty with a coverage
// probability of about 95 %, assuming a normal output distribution with many
// effective degrees of freedom (GUM JCGM 100:2008 §6.3.3; ASME PTC 19.1-2018
// §7-5 uses the same large-sample value t95 = 2).
const K95 = 2.0

// DefaultStepFraction is the central-difference step as a fraction of the
// input's standard uncertainty: h_i = DefaultStepFraction * u_i. A step of a
// tenth of u keeps the truncation error of the central difference (of order
// h^2 f”'/6) far below the propagated uncertainty while staying far above
// the rounding noise of property models converged to 1e-9 relative (common
// practice, no source).
const DefaultStepFraction = 0.1

// Errors callers branch on.
var (
	// ErrInput: the problem is malformed (lengths differ, negative or
	// non-finite uncertainty, correlation outside [-1, 1]).
	ErrInput = errors.New("uncert: invalid propagation problem")
	// ErrModel: the model failed at the nominal inputs.
	ErrModel = errors.New("uncert: model failed at the nominal inputs")
)

// Func is a model y = f(x). It writes len(y) outputs for the inputs x and
// must not retain x or y. An output it cannot compute is NaN; a returned
// error means no output could be computed at these inputs.
type Func func(x, y []float64) error

// Correlation is the correlation coefficient R (-1..1) between the errors of
// inputs I and J, e.g. two matched temperature sensors calibrated together
// (GUM §5.2.2, r(x_i, x_j)).
type Correlation struct {
	I, J int
	R    float64
}

// Result is the outcome of a propagation.
type Result struct {
	// Y are the model outputs at the nominal inputs.
	Y []float64
	// U is the combined standard uncertainty u_c(y_k) (k = 1) of each output
	// in the output's unit; valid only where OK[k].
	U []float64
	// OK[k] is false when some sensitivity of output k could not be found
	// (the model failed on both sides of a nominal input, or the output was
	// NaN there) or when output k itself is NaN.
	OK []bool
	// Sens[k*nIn+i] is the sensitivity coefficient c_ki = dy_k/dx_i; 0 for
	// inputs with zero uncertainty (not evaluated).
	Sens []float64
	// Var[k*nIn+i] is the contribution (c_ki u_i)^2 of input i to the
	// variance of output k, without the correlation terms.
	Var []float64
	nIn int
}

// U95 returns the expanded uncertainty K95*U[k] of output k, and false when
// it could not be evaluated.
func (r *Result) U95(k int) (float64, bool) {
	if k < 0 || k >= len(r.U) || !r.OK[k] {
		return 0, false
	}
	return K95 * r.U[k], true
}

// Sensitivity returns dy_k/dx_i.
func (r *Result) Sensitivity(k, i int) float64 { return r.Sens[k*r.nIn+i] }

// Dominant returns the input contributing most to the variance of output k,
// or -1 if none contributes.
func (r *Result) Dominant(k int) int {
	best, bi := 0.0, -1
	for i := 0; i < r.nIn; i++ {
		if v := r.Var[k*r.nIn+i]; v > best {
			best, bi = v, i
		}
	}
	return bi
}

// Propagate evaluates f at the nominal inputs x and, for every input with a
// non-zero standard uncertainty u[i], at x_i ± h_i with h_i =
// DefaultStepFraction*u[i] (central difference; if the model fails on one
// side, the one-sided difference on the other side is used). It returns the
// outputs, their sensitivities and their combined standard uncertainties
//
//	u_c^2(y) = Σ_i c_i^2 u_i^2 + 2 Σ_{i<j} c_i c_j r_ij u_i u_j   (GUM eq. 16)
//
// nOut is the number of outputs of f. x is not modified.
func Propagate(f Func, nOut int, x, u []float64, corr []Correlation) (*Result, error) {
	return propagate(f, nOut, nil, x, u, corr)
}

// PropagateFrom is Propagate for a caller that has already evaluated the
// model at the nominal inputs: y0 = f(x), len(y0) outputs. It saves one
// model evaluation; y0 is copied, not retained.
func PropagateFrom(f Func, y0, x, u []float64, corr []Correlation) (*Result, error) {
	return propagate(f, len(y0), y0, x, u, corr)
}

func propagate(f Func, nOut int, y0, x, u []float64, corr []Correlation) (*Result, error) {
	n := len(x)
	if len(u) != n {
		return nil, fmt.Errorf("%w: %d inputs but %d uncertainties", ErrInput, n, len(u))
	}
	if nOut <= 0 {
		return nil, fmt.Errorf("%w: %d outputs", ErrInput, nOut)
	}
	for i := range n {
		if !finite(x[i]) {
			return nil, fmt.Errorf("%w: input %d = %v is not finite", ErrInput, i, x[i])
		}
		if !finite(u[i]) || u[i] < 0 {
			return nil, fmt.Errorf("%w: uncertainty of input %d = %v must be finite and >= 0", ErrInput, i, u[i])
		}
	}
	for _, c := range corr {
		if c.I < 0 || c.I >= n || c.J < 0 || c.J >= n || c.I == c.J {
			return nil, fmt.Errorf("%w: correlation between inputs %d and %d (have %d inputs)", ErrInput, c.I, c.J, n)
		}
		if !finite(c.R) || c.R < -1 || c.R > 1 {
			return nil, fmt.Errorf("%w: correlation coefficient %v outside [-1, 1]", ErrInput, c.R)
		}
	}
	// One backing array for all slices: few allocations per call.
	buf := make([]float64, 4*nOut+2*nOut*n+n)
	r := &Result{nIn: n}
	r.Y, buf = buf[:nOut], buf[nOut:]
	r.U, buf = buf[:nOut], buf[nOut:]
	r.Sens, buf = buf[:nOut*n], buf[nOut*n:]
	r.Var, buf = buf[:nOut*n], buf[nOut*n:]
	yp, buf := buf[:nOut], buf[nOut:]
	ym, buf := buf[:nOut], buf[nOut:]
	xs := buf[:n]
	r.OK = make([]bool, nOut)

	copy(xs, x)
	if y0 != nil {
		copy(r.Y, y0)
	} else if err := f(xs, r.Y); err != nil {
		return nil, fmt.Errorf("%w: %w", ErrModel, err)
	}
	for k := range nOut {
		r.OK[k] = finite(r.Y[k])
	}
	for i := range n {
		if u[i] == 0 {
			continue
		}
		h := DefaultStepFraction * u[i]
		copy(xs, x)
		xs[i] = x[i] + h
		errP := f(xs, yp)
		xs[i] = x[i] - h
		errM := f(xs, ym)
		for k := range nOut {
			var c float64
			okP := errP == nil && finite(yp[k])
			okM := errM == nil && finite(ym[k])
			switch {
			case okP && okM:
				c = (yp[k] - ym[k]) / (2 * h)
			case okP:
				c = (yp[k] - r.Y[k]) / h
			case okM:
				c = (r.Y[k] - ym[k]) / h
			default:
				r.OK[k] = false
				c = math.NaN()
			}
			r.Sens[k*n+i] = c
			if finite(c) {
				r.Var[k*n+i] = (c * u[i]) * (c * u[i])
			}
		}
	}
	for k := range nOut {
		if !r.OK[k] {
			r.U[k] = math.NaN()
			continue
		}
		v := 0.0
		for i := range n {
			v += r.Var[k*n+i]
		}
		for _, c := range corr {
			v += 2 * r.Sens[k*n+c.I] * r.Sens[k*n+c.J] * c.R * u[c.I] * u[c.J]
		}
		if v < 0 { // rounding with r close to 1 and equal, opposite terms
			v = 0
		}
		r.U[k] = math.Sqrt(v)
	}
	return r, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
