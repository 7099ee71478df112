package analysis

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Model evaluates a fit function at x for parameters p and writes the partial derivatives ∂f/∂p into grad
// (len(grad) == len(p)).
type Model func(x float64, p, grad []float64) float64

// Problem is a weighted nonlinear least-squares problem: minimise χ² = Σ ((Y − f(X))/Sigma)².
type Problem struct {
	X, Y, Sigma []float64
	Model       Model
	// Lower and Upper bound the parameters (nil: unbounded; ±Inf entries: unbounded on that side).
	Lower, Upper []float64
	// Fixed holds parameters at their starting values (nil: all free).
	Fixed []bool
}

// Fit is the outcome of a least-squares fit.
type Fit struct {
	// P are the best-fit parameters, Err their standard errors from the covariance matrix (zero for fixed
	// parameters). Err is not scaled by the reduced χ²; see ScaledErr.
	P, Err []float64
	// Cov is the covariance matrix of all parameters, row-major len(P)×len(P) (zero rows for fixed ones).
	Cov        []float64
	Chi2       float64
	DoF        int
	Iterations int
}

// ReducedChi2 is χ²/DoF.
func (f Fit) ReducedChi2() float64 {
	if f.DoF <= 0 {
		return 0
	}
	return f.Chi2 / float64(f.DoF)
}

// ScaledErr returns the standard error of parameter k, scaled by √χ²_ν when χ²_ν > 1 (the data scatter more
// than their stated errors: common practice, e.g. Bevington & Robinson, Data Reduction and Error Analysis).
func (f Fit) ScaledErr(k int) float64 {
	if r := f.ReducedChi2(); r > 1 {
		return f.Err[k] * math.Sqrt(r)
	}
	return f.Err[k]
}

// Errors of the fitter.
var (
	ErrFitInput    = errors.New("fit input")
	ErrFitSingular = errors.New("fit: parameters not determined by the data (singular normal matrix)")
)

// lm holds the work arrays of one fit.
type lm struct {
	pr       Problem
	free     []int
	grad     []float64
	a        []float64 // normal matrix JᵀWJ over free parameters
	g        []float64 // JᵀW r
	trial, p []float64
}

// LevenbergMarquardt minimises χ² from the start p0 by Marquardt's damped Gauss–Newton method with the
// damping scaled by the diagonal of the normal matrix (Marquardt, J. SIAM 11, 431, 1963). Parameters are
// clamped to their bounds after each step. The covariance is the inverse of the undamped normal matrix at
// the minimum.
func LevenbergMarquardt(pr Problem, p0 []float64) (Fit, error) {
	m, np := len(pr.X), len(p0)
	if len(pr.Y) != m || len(pr.Sigma) != m || pr.Model == nil || (pr.Lower != nil && len(pr.Lower) != np) ||
		(pr.Upper != nil && len(pr.Upper) != np) || (pr.Fixed != nil && len(pr.Fixed) != np) {
		return Fit{}, fmt.Errorf("%w: mismatched lengths", ErrFitInput)
	}
	w := &lm{pr: pr, grad: make([]float64, np), p: append([]float64(nil), p0...), trial: make([]float64, np)}
	for k := range np {
		if pr.Fixed == nil || !pr.Fixed[k] {
			w.free = append(w.free, k)
		}
	}
	nf := len(w.free)
	if nf == 0 || m-nf < 1 {
		return Fit{}, fmt.Errorf("%w: %d points cannot determine %d parameters", ErrFitInput, m, nf)
	}
	for i, s := range pr.Sigma {
		if !(s > 0) || math.IsInf(s, 0) || math.IsNaN(pr.Y[i]) || math.IsNaN(pr.X[i]) {
			return Fit{}, fmt.Errorf("%w: point %d has no finite value and positive error", ErrFitInput, i)
		}
	}
	w.clamp(w.p)
	w.a, w.g = make([]float64, nf*nf), make([]float64, nf)
	chi2 := w.normal(w.p)
	if math.IsNaN(chi2) || math.IsInf(chi2, 0) {
		return Fit{}, fmt.Errorf("%w: the model is not finite at the starting parameters", ErrFitInput)
	}
	lambda, small, iter := 1e-3, 0, 0
	damped := make([]float64, nf*nf)
	delta := make([]float64, nf)
	for iter = 1; iter <= 500 && small < 2; iter++ {
		copy(damped, w.a)
		for k := range nf {
			d := w.a[k*nf+k]
			if d <= 0 {
				d = 1e-300
			}
			damped[k*nf+k] += lambda * d
		}
		if !solveSPD(damped, w.g, delta, nf) {
			lambda *= 10
			if lambda > 1e16 {
				break
			}
			continue
		}
		copy(w.trial, w.p)
		for j, k := range w.free {
			w.trial[k] += delta[j]
		}
		w.clamp(w.trial)
		c := w.chi2(w.trial)
		if c < chi2 {
			if chi2-c <= 1e-10*chi2+1e-300 {
				small++
			} else {
				small = 0
			}
			copy(w.p, w.trial)
			chi2 = w.normal(w.p)
			lambda = math.Max(lambda/10, 1e-12)
			continue
		}
		lambda *= 10
		if lambda > 1e16 {
			break // no direction lowers χ² any more: at the minimum to rounding
		}
	}
	fit := Fit{P: w.p, Err: make([]float64, np), Cov: make([]float64, np*np), Chi2: chi2, DoF: m - nf, Iterations: iter}
	inv := make([]float64, nf*nf)
	if !invertSPD(w.a, inv, nf) {
		return fit, ErrFitSingular
	}
	for i, ki := range w.free {
		for j, kj := range w.free {
			fit.Cov[ki*np+kj] = inv[i*nf+j]
		}
		fit.Err[ki] = math.Sqrt(inv[i*nf+i])
	}
	return fit, nil
}

func (w *lm) clamp(p []float64) {
	for k := range p {
		if w.pr.Lower != nil && p[k] < w.pr.Lower[k] {
			p[k] = w.pr.Lower[k]
		}
		if w.pr.Upper != nil && p[k] > w.pr.Upper[k] {
			p[k] = w.pr.Upper[k]
		}
	}
}

// chi2 evaluates χ² only.
func (w *lm) chi2(p []float64) float64 {
	var s float64
	for i, x := range w.pr.X {
		r := (w.pr.Y[i] - w.pr.Model(x, p, w.grad)) / w.pr.Sigma[i]
		s += r * r
	}
	if math.IsNaN(s) {
		return math.Inf(1)
	}
	return s
}

// normal evaluates χ² and fills the normal matrix and gradient at p.
func (w *lm) normal(p []float64) float64 {
	nf := len(w.free)
	clear(w.a)
	clear(w.g)
	var s float64
	for i, x := range w.pr.X {
		inv := 1 / w.pr.Sigma[i]
		r := (w.pr.Y[i] - w.pr.Model(x, p, w.grad)) * inv
		s += r * r
		for j, kj := range w.free {
			gj := w.grad[kj] * inv
			w.g[j] += gj * r
			row := w.a[j*nf:]
			for l := 0; l <= j; l++ {
				row[l] += gj * w.grad[w.free[l]] * inv
			}
		}
	}
	for j := range nf {
		for l := 0; l < j; l++ {
			w.a[l*nf+j] = w.a[j*nf+l]
		}
	}
	if math.IsNaN(s) {
		return math.Inf(1)
	}
	return s
}

// solveSPD solves A x = b for a symmetric positive definite A (row-major n×n) by Cholesky after scaling A to
// unit diagonal, so that parameters of very different magnitudes do not spoil the factorisation; false when A
// is not positive definite.
func solveSPD(a, b, x []float64, n int) bool {
	chol, d, ok := scaledCholesky(a, n)
	if !ok {
		return false
	}
	rhs := mat.NewVecDense(n, nil)
	for i := range n {
		rhs.SetVec(i, b[i]*d[i])
	}
	var v mat.VecDense
	if err := chol.SolveVecTo(&v, rhs); err != nil {
		return false
	}
	for i := range n {
		x[i] = v.AtVec(i) * d[i]
	}
	return true
}

// invertSPD writes the inverse of the symmetric positive definite A into inv; false when A is singular.
func invertSPD(a, inv []float64, n int) bool {
	chol, d, ok := scaledCholesky(a, n)
	if !ok {
		return false
	}
	var s mat.SymDense
	if err := chol.InverseTo(&s); err != nil {
		return false
	}
	for i := range n {
		for j := range n {
			inv[i*n+j] = s.At(i, j) * d[i] * d[j]
		}
		if !(inv[i*n+i] > 0) || math.IsInf(inv[i*n+i], 0) {
			return false
		}
	}
	return true
}

// scaledCholesky factorises D A D with D = diag(A)^−½.
func scaledCholesky(a []float64, n int) (*mat.Cholesky, []float64, bool) {
	d := make([]float64, n)
	for i := range n {
		if !(a[i*n+i] > 0) {
			return nil, nil, false
		}
		d[i] = 1 / math.Sqrt(a[i*n+i])
	}
	sc := make([]float64, n*n)
	for i := range n {
		for j := range n {
			sc[i*n+j] = a[i*n+j] * d[i] * d[j]
		}
	}
	var chol mat.Cholesky
	if !chol.Factorize(mat.NewSymDense(n, sc)) {
		return nil, nil, false
	}
	return &chol, d, true
}
