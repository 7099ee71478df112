package analysis

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"
)

// line is a straight line a + b·x.
func line(x float64, p, grad []float64) float64 {
	grad[0], grad[1] = 1, x
	return p[0] + p[1]*x
}

// TestLevenbergMarquardtStraightLine checks the fitter against the closed-form weighted straight-line fit:
// Δ = Sw·Sxx − Sx², a = (Sxx·Sy − Sx·Sxy)/Δ, b = (Sw·Sxy − Sx·Sy)/Δ, σa² = Sxx/Δ, σb² = Sw/Δ
// (Bevington & Robinson, Data Reduction and Error Analysis, 3rd ed., ch. 6).
func TestLevenbergMarquardtStraightLine(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	n := 40
	x, y, sig := make([]float64, n), make([]float64, n), make([]float64, n)
	var sw, sx, sy, sxx, sxy float64
	for i := range n {
		x[i] = float64(i) * 0.25
		sig[i] = 0.5 + 0.1*float64(i%5)
		y[i] = 3 - 0.7*x[i] + sig[i]*rng.NormFloat64()
		w := 1 / (sig[i] * sig[i])
		sw, sx, sy, sxx, sxy = sw+w, sx+w*x[i], sy+w*y[i], sxx+w*x[i]*x[i], sxy+w*x[i]*y[i]
	}
	det := sw*sxx - sx*sx
	wantA, wantB := (sxx*sy-sx*sxy)/det, (sw*sxy-sx*sy)/det
	wantEa, wantEb := math.Sqrt(sxx/det), math.Sqrt(sw/det)
	fit, err := LevenbergMarquardt(Problem{X: x, Y: y, Sigma: sig, Model: line}, []float64{0, 0})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name      string
		got, want float64
	}{{"a", fit.P[0], wantA}, {"b", fit.P[1], wantB}, {"σa", fit.Err[0], wantEa}, {"σb", fit.Err[1], wantEb}} {
		if math.Abs(c.got-c.want) > 1e-9*math.Max(1, math.Abs(c.want)) {
			t.Errorf("%s = %.12g, closed form %.12g", c.name, c.got, c.want)
		}
	}
	if fit.DoF != n-2 {
		t.Errorf("DoF = %d, want %d", fit.DoF, n-2)
	}
}

// TestLevenbergMarquardtAgainstGonum fits a Gaussian on a sloping background and checks, with gonum's finite
// differences (code that shares nothing with ours), that the χ² gradient vanishes at our minimum, that the
// Hessian there is positive definite, and that our covariance is the inverse of half that Hessian.
func TestLevenbergMarquardtAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 9))
	truth := []float64{50, -2, 22.5, 0.08, 40}
	model := groupModel(Gaussian, 1, 22.5)
	n := 81
	x, y, sig := make([]float64, n), make([]float64, n), make([]float64, n)
	g := make([]float64, len(truth))
	for i := range n {
		x[i] = 22.3 + 0.005*float64(i)
		mu := model(x[i], truth, g)
		y[i] = poisson(rng, mu)
		sig[i] = math.Sqrt(math.Max(y[i], 1))
	}
	start := []float64{45, 0, 22.51, 0.1, 30}
	fit, err := LevenbergMarquardt(Problem{X: x, Y: y, Sigma: sig, Model: model}, start)
	if err != nil {
		t.Fatal(err)
	}
	chi2 := func(p []float64) float64 {
		var s float64
		gg := make([]float64, len(p))
		for i := range x {
			r := (y[i] - model(x[i], p, gg)) / sig[i]
			s += r * r
		}
		return s
	}
	grad := fd.Gradient(nil, chi2, fit.P, &fd.Settings{Formula: fd.Central})
	for k := range truth {
		// At a minimum the change of χ² over one standard error of a parameter is far below 1.
		if d := math.Abs(grad[k] * fit.Err[k]); d > 1e-4 {
			t.Errorf("∂χ²/∂p%d · σ = %.3g at our minimum, want ≈ 0", k, d)
		}
	}
	var h mat.SymDense
	fd.Hessian(&h, chi2, fit.P, &fd.Settings{Formula: fd.Central})
	h.ScaleSym(0.5, &h)
	var chol mat.Cholesky
	if !chol.Factorize(&h) {
		t.Fatal("finite-difference Hessian is not positive definite: not a minimum")
	}
	var cov mat.SymDense
	if err := chol.InverseTo(&cov); err != nil {
		t.Fatal(err)
	}
	for k := range truth {
		want := math.Sqrt(cov.At(k, k))
		// The Gauss–Newton covariance leaves out the residual-weighted second derivatives of the model, which
		// average out over the points: agreement to a few per cent.
		if math.Abs(fit.Err[k]-want) > 0.05*want {
			t.Errorf("σ of parameter %d: ours %.6g, from gonum's Hessian %.6g", k, fit.Err[k], want)
		}
	}
}

func TestLevenbergMarquardtBoundsAndFixed(t *testing.T) {
	x := []float64{0, 1, 2, 3, 4, 5}
	y := []float64{1, 3, 5, 7, 9, 11}
	sig := []float64{1, 1, 1, 1, 1, 1}
	fit, err := LevenbergMarquardt(Problem{X: x, Y: y, Sigma: sig, Model: line, Fixed: []bool{true, false}}, []float64{0, 1})
	if err != nil {
		t.Fatal(err)
	}
	if fit.P[0] != 0 || fit.Err[0] != 0 || fit.DoF != 5 {
		t.Errorf("fixed intercept moved or got an error: %+v", fit)
	}
	// Through the origin the least-squares slope is Σxy/Σx² = 125/55.
	if math.Abs(fit.P[1]-125.0/55) > 1e-9 {
		t.Errorf("slope %.12g, want %.12g", fit.P[1], 125.0/55)
	}
	fit, err = LevenbergMarquardt(Problem{X: x, Y: y, Sigma: sig, Model: line, Upper: []float64{math.Inf(1), 1.5},
		Lower: []float64{math.Inf(-1), 0}}, []float64{0, 1})
	if err != nil {
		t.Fatal(err)
	}
	if fit.P[1] > 1.5 {
		t.Errorf("slope %g beyond its upper bound 1.5", fit.P[1])
	}
}

func TestLevenbergMarquardtRefusesBadInput(t *testing.T) {
	good := []float64{0, 1, 2, 3}
	for _, c := range []struct {
		name string
		pr   Problem
		p0   []float64
	}{
		{"lengths", Problem{X: good, Y: good[:3], Sigma: good, Model: line}, []float64{0, 0}},
		{"zero sigma", Problem{X: good, Y: good, Sigma: []float64{1, 0, 1, 1}, Model: line}, []float64{0, 0}},
		{"NaN value", Problem{X: good, Y: []float64{0, math.NaN(), 1, 2}, Sigma: []float64{1, 1, 1, 1}, Model: line}, []float64{0, 0}},
		{"too few points", Problem{X: good[:2], Y: good[:2], Sigma: good[1:3], Model: line}, []float64{0, 0}},
		{"no model", Problem{X: good, Y: good, Sigma: []float64{1, 1, 1, 1}}, []float64{0, 0}},
	} {
		if _, err := LevenbergMarquardt(c.pr, c.p0); !errors.Is(err, ErrFitInput) {
			t.Errorf("%s: err = %v, want ErrFitInput", c.name, err)
		}
	}
	flat := Problem{X: good, Y: good, Sigma: []float64{1, 1, 1, 1}, Model: func(x float64, p, g []float64) float64 {
		g[0], g[1] = 1, 1 // two parameters the data cannot tell apart
		return p[0] + p[1]
	}}
	if _, err := LevenbergMarquardt(flat, []float64{0, 0}); !errors.Is(err, ErrFitSingular) {
		t.Errorf("degenerate parameters: err = %v, want ErrFitSingular", err)
	}
}
