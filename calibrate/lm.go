package calibrate

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
)

// Problem is a bounded nonlinear least-squares problem: minimize ½‖r(x)‖²
// subject to Lower ≤ x ≤ Upper.
type Problem struct {
	// M is the number of residuals.
	M int
	// Func writes the residuals r(x) into dst (length M). An error at a
	// trial point rejects that step (a simulation that fails there counts
	// as infinitely bad); an error at the starting point ends the
	// minimization.
	Func func(dst, x []float64) error
	// Jac writes the Jacobian ∂r/∂x (M × len(x)) into dst.
	Jac func(dst *mat.Dense, x []float64) error
	// Lower and Upper bound x componentwise; nil means unbounded, and
	// ±Inf entries leave that side open.
	Lower, Upper []float64
}

// Status says why LeastSquares stopped.
type Status int

// The statuses. The first three are convergence.
const (
	NotTerminated     Status = iota
	GradientConverged        // every free column of J is nearly orthogonal to r
	StepConverged            // the step is negligible relative to x
	FunctionConverged        // the loss no longer decreases appreciably
	NoDescent                // no step reduces the loss, even very short ones
	IterationLimit
	Stopped // the recorder asked to stop
	Failure
)

var statusNames = [...]string{"not terminated", "gradient converged", "step converged",
	"loss converged", "no descent", "iteration limit", "stopped", "failure"}

func (s Status) String() string {
	if s < 0 || int(s) >= len(statusNames) {
		return fmt.Sprintf("Status(%d)", int(s))
	}
	return statusNames[s]
}

// Converged reports whether the status is one of the convergence criteria.
func (s Status) Converged() bool {
	return s == GradientConverged || s == StepConverged || s == FunctionConverged
}

// Settings control LeastSquares. The zero value selects the defaults
// documented on each field.
type Settings struct {
	// MaxIterations bounds the accepted steps (default 100).
	MaxIterations int
	// GradientTolerance: stop when max_j |J_jᵀr|/(‖J_j‖‖r‖) over the free
	// columns is below it (default 1e-10).
	GradientTolerance float64
	// StepTolerance: stop when every |Δx_j| ≤ tol·(|x_j| + tol) (default
	// 1e-8).
	StepTolerance float64
	// FunctionTolerance: stop when an accepted step reduced the loss, and
	// the model predicted it would, by less than this fraction (default
	// 1e-10).
	FunctionTolerance float64
	// InitialLambda is the starting damping relative to diag(JᵀJ)
	// (default 1e-3).
	InitialLambda float64
	// Recorder, if not nil, is called with the starting point (Iter 0)
	// and after every accepted step. An error stops the minimization with
	// status Stopped and is returned.
	Recorder func(*Iteration) error
}

func (s *Settings) withDefaults() Settings {
	var c Settings
	if s != nil {
		c = *s
	}
	if c.MaxIterations == 0 {
		c.MaxIterations = 100
	}
	if c.GradientTolerance == 0 {
		c.GradientTolerance = 1e-10
	}
	if c.StepTolerance == 0 {
		c.StepTolerance = 1e-8
	}
	if c.FunctionTolerance == 0 {
		c.FunctionTolerance = 1e-10
	}
	if c.InitialLambda == 0 {
		c.InitialLambda = 1e-3
	}
	return c
}

// Iteration is the state after an accepted step.
type Iteration struct {
	Iter int
	// X is the point reached; Loss is ½‖r(X)‖² there.
	X    []float64
	Loss float64
	// Lambda is the damping for the next step; Step is the relative
	// length of the step just taken (max_j |Δx_j|/|x_j|).
	Lambda float64
	Step   float64
	// Evaluations of Func so far.
	Evaluations int
}

// Result is the outcome of LeastSquares.
type Result struct {
	X         []float64
	Loss      float64   // ½‖r(X)‖²
	Residuals []float64 // r(X)
	Jacobian  *mat.Dense
	Status    Status
	// Iterations counts accepted steps; Evaluations counts calls of Func
	// and JacEvaluations calls of Jac.
	Iterations     int
	Evaluations    int
	JacEvaluations int
	// Lambda is the damping the next step would have used, so that a
	// resumed minimization continues where this one stopped.
	Lambda  float64
	History []Iteration
}

// LeastSquares minimizes ½‖r(x)‖² within bounds from x0 by a
// Levenberg–Marquardt method: each step solves
// (JᵀJ + λ·D) δ = −Jᵀr on the parameters not held at a bound (D the
// running maximum of diag(JᵀJ), Marquardt's scaling), projects x + δ onto
// the bounds, and accepts it if the loss falls, updating λ by Nielsen's
// rule from the ratio of actual to predicted reduction. x0 is clamped to
// the bounds.
//
// The Result is returned even with an error, holding the best point found.
func LeastSquares(p Problem, x0 []float64, settings *Settings) (*Result, error) {
	set := settings.withDefaults()
	n, m := len(x0), p.M
	if n == 0 {
		return nil, errors.New("calibrate: no free parameters")
	}
	if m < 1 || p.Func == nil || p.Jac == nil {
		return nil, errors.New("calibrate: a Problem needs M > 0, Func and Jac")
	}
	lo, hi := p.Lower, p.Upper
	if lo == nil {
		lo = filled(n, math.Inf(-1))
	}
	if hi == nil {
		hi = filled(n, math.Inf(1))
	}
	if len(lo) != n || len(hi) != n {
		return nil, fmt.Errorf("calibrate: bounds have lengths %d and %d, want %d", len(lo), len(hi), n)
	}
	for j := range n {
		if !(lo[j] <= hi[j]) {
			return nil, fmt.Errorf("calibrate: parameter %d: lower bound %v above upper bound %v", j, lo[j], hi[j])
		}
	}
	x := make([]float64, n)
	for j := range x {
		x[j] = clamp(x0[j], lo[j], hi[j])
	}
	res := &Result{X: x, Residuals: make([]float64, m), Jacobian: mat.NewDense(m, n, nil)}
	r, J := res.Residuals, res.Jacobian
	if err := p.Func(r, x); err != nil {
		res.Status = Failure
		return res, fmt.Errorf("at the starting point: %w", err)
	}
	res.Evaluations++
	if err := finite(r); err != nil {
		res.Status = Failure
		return res, fmt.Errorf("at the starting point: %w", err)
	}
	loss := 0.5 * floats.Dot(r, r)
	if err := p.Jac(J, x); err != nil {
		res.Status = Failure
		return res, fmt.Errorf("Jacobian at the starting point: %w", err)
	}
	res.JacEvaluations++
	lambda, nu := set.InitialLambda, 2.0
	record := func(step float64) error {
		it := Iteration{Iter: res.Iterations, X: append([]float64(nil), x...), Loss: loss, Lambda: lambda, Step: step, Evaluations: res.Evaluations}
		res.History = append(res.History, it)
		if set.Recorder != nil {
			return set.Recorder(&it)
		}
		return nil
	}
	finish := func(s Status, err error) (*Result, error) {
		res.Loss, res.Status, res.Lambda = loss, s, lambda
		return res, err
	}
	if err := record(0); err != nil {
		return finish(Stopped, err)
	}

	var (
		A     mat.SymDense
		g     = make([]float64, n)
		D     = make([]float64, n)
		xt    = make([]float64, n)
		rt    = make([]float64, m)
		s     = make([]float64, n)
		free  = make([]int, 0, n)
		chol  mat.Cholesky
		colSq = make([]float64, n)
	)
	A.SymOuterK(1, J.T())
	for {
		// Gradient g = Jᵀr and the Marquardt scaling.
		gv := mat.NewVecDense(n, g)
		gv.MulVec(J.T(), mat.NewVecDense(m, r))
		maxA := 0.0
		for j := range n {
			colSq[j] = A.At(j, j)
			D[j] = math.Max(D[j], colSq[j])
			maxA = math.Max(maxA, colSq[j])
		}
		floor := 1e-12 * math.Max(maxA, 1e-300)
		free = free[:0]
		for j := range n {
			atLo := x[j] <= lo[j] && g[j] > 0
			atHi := x[j] >= hi[j] && g[j] < 0
			if !atLo && !atHi {
				free = append(free, j)
			}
		}
		// MINPACK's scale-free gradient test on the free columns.
		rn := math.Sqrt(2 * loss)
		cosMax := 0.0
		for _, j := range free {
			if c := math.Sqrt(colSq[j]) * rn; c > 0 {
				cosMax = math.Max(cosMax, math.Abs(g[j])/c)
			}
		}
		if len(free) == 0 || cosMax <= set.GradientTolerance || loss == 0 {
			return finish(GradientConverged, nil)
		}
		if res.Iterations >= set.MaxIterations {
			return finish(IterationLimit, nil)
		}
		accepted := false
		for !accepted {
			nf := len(free)
			H := mat.NewSymDense(nf, nil)
			rhs := mat.NewVecDense(nf, nil)
			for a, j := range free {
				for b, k := range free[:a+1] {
					H.SetSym(a, b, A.At(j, k))
				}
				H.SetSym(a, a, A.At(j, j)+lambda*math.Max(D[j], floor))
				rhs.SetVec(a, -g[j])
			}
			var delta mat.VecDense
			ok := chol.Factorize(H)
			if ok {
				ok = chol.SolveVecTo(&delta, rhs) == nil
			}
			if !ok {
				lambda *= nu
				nu *= 2
				if lambda > 1e16 {
					return finish(NoDescent, nil)
				}
				continue
			}
			copy(xt, x)
			for a, j := range free {
				xt[j] = clamp(x[j]+delta.AtVec(a), lo[j], hi[j])
			}
			small := true
			step := 0.0
			for j := range n {
				s[j] = xt[j] - x[j]
				if math.Abs(s[j]) > set.StepTolerance*(math.Abs(x[j])+set.StepTolerance) {
					small = false
				}
				step = math.Max(step, math.Abs(s[j])/(math.Abs(xt[j])+1e-12))
			}
			if small {
				return finish(StepConverged, nil)
			}
			// Predicted reduction of the linear model: −(gᵀs + ½ sᵀAs).
			sv := mat.NewVecDense(n, s)
			var As mat.VecDense
			As.MulVec(&A, sv)
			pred := -(floats.Dot(g, s) + 0.5*mat.Dot(sv, &As))
			lossT := math.Inf(1)
			if err := p.Func(rt, xt); err == nil && finite(rt) == nil {
				lossT = 0.5 * floats.Dot(rt, rt)
			}
			res.Evaluations++
			actual := loss - lossT
			rho := actual / pred
			if pred > 0 && actual > 0 {
				accepted = true
				copy(x, xt)
				copy(r, rt)
				prev := loss
				loss = lossT
				lambda *= math.Max(1.0/3, 1-math.Pow(2*rho-1, 3))
				nu = 2
				res.Iterations++
				if err := p.Jac(J, x); err != nil {
					return finish(Failure, fmt.Errorf("Jacobian at iteration %d: %w", res.Iterations, err))
				}
				res.JacEvaluations++
				A.SymOuterK(1, J.T())
				if err := record(step); err != nil {
					return finish(Stopped, err)
				}
				if actual <= set.FunctionTolerance*prev && pred <= set.FunctionTolerance*prev {
					return finish(FunctionConverged, nil)
				}
			} else {
				lambda *= nu
				nu *= 2
				if lambda > 1e16 {
					return finish(NoDescent, nil)
				}
			}
		}
	}
}

func clamp(v, lo, hi float64) float64 { return math.Min(math.Max(v, lo), hi) }

func filled(n int, v float64) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = v
	}
	return s
}

func finite(r []float64) error {
	for i, v := range r {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("residual %d is %v", i, v)
		}
	}
	return nil
}
