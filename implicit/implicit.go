// Package implicit differentiates the solution of a system of equations
// F(z, θ) = 0 with respect to its parameters by the implicit function
// theorem:
//
//	dz = −F_z⁻¹ F_θ dθ          (JVP, forward mode)
//	θ̄  = −F_θᵀ F_z⁻ᵀ z̄         (VJP, reverse mode)
//
// F_z enters only through a Factorization, so a solver that ends with a
// factorization of F_z (a Newton or interior-point method at its last
// iterate) hands it over and no further factorization is needed. F_θ is
// any linear Operator. Nothing here knows what the equations mean; the
// package reads like the rest of gonum: small interfaces, caller-owned
// destinations, workspaces reused across calls.
//
// For complementarity problems the equations are usually the relaxed
// conditions z∘y = κ: at κ → 0 the derivative is the exact, piecewise one,
// and a larger κ gives a smooth derivative across changes of the active
// set. Near-singular F_z (degenerate active sets at κ = 0) is reported by
// LU.Factorize.
package implicit

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Factorization solves with F_z and with its transpose. dst and b may be
// the same slice.
type Factorization interface {
	// Size returns n, the number of unknowns z (and of equations).
	Size() int
	// SolveTo writes x with F_z x = b into dst.
	SolveTo(dst, b []float64) error
	// SolveTransTo writes x with F_zᵀ x = b into dst.
	SolveTransTo(dst, b []float64) error
}

// Operator is a linear map from parameter space (size p) to equation space
// (size n), F_θ, with its transpose.
type Operator interface {
	// Dims returns (n, p).
	Dims() (n, p int)
	// ApplyTo writes F_θ dθ into dst (length n).
	ApplyTo(dst, dTheta []float64)
	// ApplyTransTo writes F_θᵀ w into dst (length p).
	ApplyTransTo(dst, w []float64)
}

// ErrShape reports slices whose lengths do not match the problem.
var ErrShape = errors.New("implicit: dimension mismatch")

// JVP writes dz = −F_z⁻¹ F_θ dθ into dz. work must have length n; it may
// be nil, and then one is allocated.
func JVP(f Factorization, fTheta Operator, dz, dTheta, work []float64) error {
	n, p := fTheta.Dims()
	if f.Size() != n || len(dz) != n || len(dTheta) != p {
		return ErrShape
	}
	if work == nil {
		work = make([]float64, n)
	}
	fTheta.ApplyTo(work, dTheta)
	if err := f.SolveTo(dz, work); err != nil {
		return err
	}
	for i := range dz {
		dz[i] = -dz[i]
	}
	return nil
}

// VJP writes θ̄ = −F_θᵀ F_z⁻ᵀ z̄ into thetaBar. work must have length n; it
// may be nil, and then one is allocated. zBar is left unchanged.
func VJP(f Factorization, fTheta Operator, thetaBar, zBar, work []float64) error {
	n, p := fTheta.Dims()
	if f.Size() != n || len(zBar) != n || len(thetaBar) != p {
		return ErrShape
	}
	if work == nil {
		work = make([]float64, n)
	}
	if err := f.SolveTransTo(work, zBar); err != nil {
		return err
	}
	fTheta.ApplyTransTo(thetaBar, work)
	for i := range thetaBar {
		thetaBar[i] = -thetaBar[i]
	}
	return nil
}

// Dense is an Operator held as a dense n×p matrix.
type Dense struct{ M *mat.Dense }

// Dims implements Operator.
func (d Dense) Dims() (n, p int) { return d.M.Dims() }

// ApplyTo implements Operator.
func (d Dense) ApplyTo(dst, x []float64) {
	n, _ := d.M.Dims()
	mat.NewVecDense(n, dst).MulVec(d.M, mat.NewVecDense(len(x), x))
}

// ApplyTransTo implements Operator.
func (d Dense) ApplyTransTo(dst, w []float64) {
	_, p := d.M.Dims()
	mat.NewVecDense(p, dst).MulVec(d.M.T(), mat.NewVecDense(len(w), w))
}

// Report says how well conditioned a factored F_z is and what was done
// about it.
type Report struct {
	// Cond is an estimate of the 1-norm condition number of F_z.
	Cond float64
	// Shift is the diagonal shift added to make F_z factorable (0: none).
	Shift float64
	// NearSingular is set when Cond exceeds the threshold given to
	// Factorize: the derivative may then be dominated by rounding, or the
	// solution may not be locally unique (degenerate active set).
	NearSingular bool
}

func (r Report) String() string {
	s := fmt.Sprintf("condition number ≈ %.3g", r.Cond)
	if r.Shift != 0 {
		s += fmt.Sprintf(", diagonal shifted by %.3g to factor", r.Shift)
	}
	if r.NearSingular {
		s += " (near singular: derivatives are unreliable; a larger smoothing κ makes them well defined)"
	}
	return s
}

// LU is a Factorization of a dense F_z by LU decomposition with partial
// pivoting (gonum mat.LU).
type LU struct {
	lu mat.LU
	n  int
}

// Factorize factors a. If a is singular to working precision it retries
// with a diagonal shift of shift·‖a‖₁ (shift = 0: no retry) and says so in
// the report; NearSingular is set when the condition number exceeds
// maxCond.
func (l *LU) Factorize(a *mat.Dense, shift, maxCond float64) (Report, error) {
	n, c := a.Dims()
	if n != c {
		return Report{}, ErrShape
	}
	l.n = n
	l.lu.Factorize(a)
	rep := Report{Cond: l.lu.Cond()}
	if math.IsInf(rep.Cond, 1) || rep.Cond > 1/1e-16 {
		if shift == 0 {
			return rep, fmt.Errorf("implicit: F_z is singular (%v)", rep)
		}
		norm := mat.Norm(a, 1)
		b := mat.DenseCopyOf(a)
		for i := 0; i < n; i++ {
			b.Set(i, i, b.At(i, i)+shift*norm)
		}
		l.lu.Factorize(b)
		rep.Shift = shift * norm
		rep.Cond = l.lu.Cond()
	}
	rep.NearSingular = rep.Cond > maxCond
	return rep, nil
}

// Size implements Factorization.
func (l *LU) Size() int { return l.n }

// SolveTo implements Factorization.
func (l *LU) SolveTo(dst, b []float64) error {
	var x mat.VecDense
	if err := l.lu.SolveVecTo(&x, false, mat.NewVecDense(l.n, append([]float64(nil), b...))); err != nil {
		var c mat.Condition
		if !errors.As(err, &c) {
			return err
		}
	}
	copy(dst, x.RawVector().Data)
	return nil
}

// SolveTransTo implements Factorization.
func (l *LU) SolveTransTo(dst, b []float64) error {
	var x mat.VecDense
	if err := l.lu.SolveVecTo(&x, true, mat.NewVecDense(l.n, append([]float64(nil), b...))); err != nil {
		var c mat.Condition
		if !errors.As(err, &c) {
			return err
		}
	}
	copy(dst, x.RawVector().Data)
	return nil
}
