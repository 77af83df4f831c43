package calibrate

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

// curveFit builds a Problem fitting model f(t, x) (with its gradient df)
// to data (t, y).
func curveFit(t, y []float64, f func(t float64, x []float64) float64, df func(dst []float64, t float64, x []float64)) Problem {
	return Problem{
		M: len(t),
		Func: func(dst, x []float64) error {
			for i := range t {
				dst[i] = f(t[i], x) - y[i]
			}
			return nil
		},
		Jac: func(dst *mat.Dense, x []float64) error {
			for i := range t {
				df(dst.RawRowView(i), t[i], x)
			}
			return nil
		},
	}
}

// gonumMinimize minimizes ½‖r‖² of p with gonum's BFGS, using the
// gradient Jᵀr, as an independent reference. BFGS works on z = x/scale so
// that badly scaled problems stay well conditioned.
func gonumMinimize(t *testing.T, p Problem, x0, scale []float64) []float64 {
	t.Helper()
	n := len(x0)
	r := make([]float64, p.M)
	J := mat.NewDense(p.M, n, nil)
	x := make([]float64, n)
	unscale := func(z []float64) []float64 {
		for j := range z {
			x[j] = z[j] * scale[j]
		}
		return x
	}
	prob := optimize.Problem{
		Func: func(z []float64) float64 {
			p.Func(r, unscale(z))
			return 0.5 * floats.Dot(r, r)
		},
		Grad: func(g, z []float64) {
			p.Func(r, unscale(z))
			p.Jac(J, x)
			mat.NewVecDense(n, g).MulVec(J.T(), mat.NewVecDense(p.M, r))
			floats.Mul(g, scale)
		},
	}
	z0 := make([]float64, n)
	floats.DivTo(z0, x0, scale)
	// BFGS's line search may report failure once it can no longer improve
	// in float64; the point it stopped at is still the reference.
	res, err := optimize.Minimize(prob, z0, &optimize.Settings{GradientThreshold: 1e-10}, &optimize.BFGS{})
	if res == nil {
		t.Fatalf("gonum optimize: %v", err)
	}
	return append([]float64(nil), unscale(res.X)...)
}

// Misra1a, NIST Statistical Reference Datasets (nonlinear regression,
// lower difficulty): y = b1·(1 − exp(−b2·x)). Data and certified values
// recalled from memory of the NIST StRD page; the gonum cross-check below
// guards against a misremembered digit.
var misraX = []float64{77.6, 114.9, 141.1, 190.8, 239.9, 289.0, 332.8, 378.4, 434.8, 477.3, 536.8, 593.1, 689.1, 760.0}
var misraY = []float64{10.07, 14.73, 17.94, 23.93, 29.61, 35.18, 40.02, 44.82, 50.76, 55.05, 61.01, 66.40, 75.47, 81.78}

func misraProblem() Problem {
	return curveFit(misraX, misraY,
		func(t float64, x []float64) float64 { return x[0] * (1 - math.Exp(-x[1]*t)) },
		func(d []float64, t float64, x []float64) {
			e := math.Exp(-x[1] * t)
			d[0], d[1] = 1-e, x[0]*t*e
		})
}

func TestLeastSquaresTextbook(t *testing.T) {
	// Rosenbrock as least squares, r = (10(x₂ − x₁²), 1 − x₁): minimum at
	// (1, 1) (Moré, Garbow and Hillstrom 1981, problem 1). With the bound
	// x₁ ≤ 0.5 the minimum moves to (0.5, 0.25) on the bound (KKT: there
	// the loss still falls with growing x₁, and x₂ = x₁² zeroes r₁).
	rosen := Problem{
		M: 2,
		Func: func(dst, x []float64) error {
			dst[0], dst[1] = 10*(x[1]-x[0]*x[0]), 1-x[0]
			return nil
		},
		Jac: func(dst *mat.Dense, x []float64) error {
			dst.Set(0, 0, -20*x[0])
			dst.Set(0, 1, 10)
			dst.Set(1, 0, -1)
			dst.Set(1, 1, 0)
			return nil
		},
	}
	bounded := rosen
	bounded.Upper = []float64{0.5, math.Inf(1)}
	misraStart := []float64{500, 1e-4} // NIST start 1
	tests := []struct {
		name string
		p    Problem
		x0   []float64
		want []float64
		tol  float64
	}{
		{"rosenbrock", rosen, []float64{-1.2, 1}, []float64{1, 1}, 1e-8},
		{"rosenbrock bounded", bounded, []float64{-1.2, 1}, []float64{0.5, 0.25}, 1e-8},
		// NIST certified values: b1 = 2.3894212918E+02, b2 = 5.5015643181E-04.
		{"misra1a", misraProblem(), misraStart, []float64{2.3894212918e+02, 5.5015643181e-04}, 1e-6},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			res, err := LeastSquares(tc.p, tc.x0, nil)
			if err != nil {
				t.Fatal(err)
			}
			if !res.Status.Converged() {
				t.Errorf("status %v after %d iterations", res.Status, res.Iterations)
			}
			for j := range tc.want {
				if math.Abs(res.X[j]-tc.want[j]) > tc.tol*math.Max(1, math.Abs(tc.want[j])) {
					t.Errorf("x[%d] = %.12g, want %.12g", j, res.X[j], tc.want[j])
				}
			}
		})
	}
	// Reference library: gonum/optimize (BFGS) minimizing the same sum of
	// squares from the same start must reach the same point.
	res, _ := LeastSquares(misraProblem(), misraStart, nil)
	ref := gonumMinimize(t, misraProblem(), misraStart, []float64{100, 1e-4})
	for j := range ref {
		if math.Abs(res.X[j]-ref[j]) > 1e-5*math.Abs(ref[j]) {
			t.Errorf("misra1a x[%d]: LM %.10g, gonum BFGS %.10g", j, res.X[j], ref[j])
		}
	}
	// NIST certified residual sum of squares 1.2455138894E-01 and standard
	// deviations 2.7070075241E+00, 7.2668688436E-06 (σ²(JᵀJ)⁻¹ with
	// σ² = RSS/(n − p)).
	if rss := 2 * res.Loss; math.Abs(rss-1.2455138894e-01) > 1e-8 {
		t.Errorf("misra1a RSS %.10g, want 1.2455138894e-01", rss)
	}
	u, err := EstimateUncertainty(res.Jacobian, res.Residuals, len(misraX), res.X, nil)
	if err != nil {
		t.Fatal(err)
	}
	for j, want := range []float64{2.7070075241e+00, 7.2668688436e-06} {
		if math.Abs(u.StdErr[j]-want) > 1e-6*want {
			t.Errorf("misra1a standard error %d = %.10g, want %.10g", j, u.StdErr[j], want)
		}
	}
}

// expDecay is y = a·exp(−b t), a textbook exponential decay.
func expDecay(t float64, x []float64) float64 { return x[0] * math.Exp(-x[1]*t) }
func expDecayGrad(d []float64, t float64, x []float64) {
	e := math.Exp(-x[1] * t)
	d[0], d[1] = e, -x[0]*t*e
}

func TestLeastSquaresExpDecayAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	var ts, ys []float64
	for i := range 40 {
		ti := 0.1 * float64(i)
		ts = append(ts, ti)
		ys = append(ys, expDecay(ti, []float64{3, 0.7})+0.05*rng.NormFloat64())
	}
	p := curveFit(ts, ys, expDecay, expDecayGrad)
	res, err := LeastSquares(p, []float64{1, 3}, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Reference: gonum/optimize BFGS on the same sum of squares.
	ref := gonumMinimize(t, p, []float64{1, 3}, []float64{1, 1})
	for j := range ref {
		if math.Abs(res.X[j]-ref[j]) > 1e-6*math.Abs(ref[j]) {
			t.Errorf("x[%d]: LM %.10g, gonum BFGS %.10g", j, res.X[j], ref[j])
		}
	}
}

func TestCovarianceLinearRegression(t *testing.T) {
	// Ordinary least squares y = β₀ + β₁x + β₂x²: the covariance of β̂ is
	// σ̂²(XᵀX)⁻¹ with σ̂² = RSS/(n − p) (any regression textbook), computed
	// here independently with gonum's Cholesky.
	rng := rand.New(rand.NewPCG(3, 4))
	n, p := 30, 3
	X := mat.NewDense(n, p, nil)
	y := make([]float64, n)
	for i := range n {
		x := float64(i) / 10
		X.SetRow(i, []float64{1, x, x * x})
		y[i] = 1 + 2*x - 0.3*x*x + 0.2*rng.NormFloat64()
	}
	prob := Problem{
		M: n,
		Func: func(dst, b []float64) error {
			mat.NewVecDense(n, dst).MulVec(X, mat.NewVecDense(p, b))
			floats.Sub(dst, y)
			return nil
		},
		Jac: func(dst *mat.Dense, b []float64) error { dst.Copy(X); return nil },
	}
	res, err := LeastSquares(prob, make([]float64, p), nil)
	if err != nil {
		t.Fatal(err)
	}
	u, err := EstimateUncertainty(res.Jacobian, res.Residuals, n, res.X, nil)
	if err != nil {
		t.Fatal(err)
	}
	var xtx mat.SymDense
	xtx.SymOuterK(1, X.T())
	var ch mat.Cholesky
	if !ch.Factorize(&xtx) {
		t.Fatal("XᵀX not positive definite")
	}
	var inv mat.SymDense
	ch.InverseTo(&inv)
	s2 := 2 * res.Loss / float64(n-p)
	for j := range p {
		for k := range p {
			want := s2 * inv.At(j, k)
			if got := u.Cov.At(j, k); math.Abs(got-want) > 1e-9*math.Sqrt(s2*inv.At(j, j)*s2*inv.At(k, k)) {
				t.Errorf("cov[%d][%d] = %g, want σ²(XᵀX)⁻¹ = %g", j, k, got, want)
			}
		}
	}
	// The estimate itself is the normal-equations solution.
	var xty mat.VecDense
	xty.MulVec(X.T(), mat.NewVecDense(n, y))
	var beta mat.VecDense
	ch.SolveVecTo(&beta, &xty)
	for j := range p {
		if math.Abs(res.X[j]-beta.AtVec(j)) > 1e-9 {
			t.Errorf("β[%d] = %g, normal equations give %g", j, res.X[j], beta.AtVec(j))
		}
	}
}

func TestIntervalCoverage(t *testing.T) {
	// Nonlinear least-squares theory (asymptotic normality): 95 %
	// intervals cover the true value in about 95 % of repeated noisy fits.
	// 50 replicates of an exponential decay, two parameters each.
	truth := []float64{2, 1.5}
	rng := rand.New(rand.NewPCG(5, 6))
	covered, total := 0, 0
	for range 50 {
		var ts, ys []float64
		for i := range 25 {
			ti := 0.12 * float64(i)
			ts = append(ts, ti)
			ys = append(ys, expDecay(ti, truth)+0.05*rng.NormFloat64())
		}
		p := curveFit(ts, ys, expDecay, expDecayGrad)
		res, err := LeastSquares(p, []float64{1, 1}, nil)
		if err != nil {
			t.Fatal(err)
		}
		u, err := EstimateUncertainty(res.Jacobian, res.Residuals, len(ts), res.X, nil)
		if err != nil {
			t.Fatal(err)
		}
		for j := range truth {
			total++
			if u.Lower95[j] <= truth[j] && truth[j] <= u.Upper95[j] {
				covered++
			}
		}
	}
	frac := float64(covered) / float64(total)
	t.Logf("95 %% intervals covered the truth in %d of %d fits (%.0f %%)", covered, total, 100*frac)
	if frac < 0.88 || frac > 0.99 {
		t.Errorf("coverage %.2f, want 0.88–0.99", frac)
	}
}

func TestIdentifiabilityClasses(t *testing.T) {
	// y = (a·b)·t: only the product is determined, so a and b are
	// confounded; c multiplies nothing, so it is not identified; d is an
	// ordinary offset and identified.
	ts := []float64{0, 1, 2, 3, 4, 5, 6, 7}
	rng := rand.New(rand.NewPCG(7, 8))
	ys := make([]float64, len(ts))
	for i, ti := range ts {
		ys[i] = 6*ti + 1 + 0.01*rng.NormFloat64()
	}
	p := curveFit(ts, ys,
		func(t float64, x []float64) float64 { return x[0]*x[1]*t + x[3] + 0*x[2] },
		func(d []float64, t float64, x []float64) { d[0], d[1], d[2], d[3] = x[1]*t, x[0]*t, 0, 1 })
	res, err := LeastSquares(p, []float64{2, 2, 1, 0}, nil)
	if err != nil {
		t.Fatal(err)
	}
	u, err := EstimateUncertainty(res.Jacobian, res.Residuals, len(ts), res.X, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := []Identifiability{Confounded, Confounded, Unidentified, Identified}
	for j := range want {
		if u.Class[j] != want[j] {
			t.Errorf("parameter %d: %v, want %v (relative error %g, partners %v)", j, u.Class[j], want[j], u.DataRelErr[j], u.Partners[j])
		}
	}
	if !math.IsInf(u.StdErr[2], 1) {
		t.Errorf("standard error of an unidentifiable parameter = %g, want +Inf", u.StdErr[2])
	}
}
