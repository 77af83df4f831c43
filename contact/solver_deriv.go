package contact

import (
	"fmt"

	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// Derivatives of the solution by implicit differentiation.
//
// At the end of a solve the iterate z = (λ, y, β) satisfies F(z, θ) = 0 with
//
//	y − W λ − B = 0,
//	λn yn = κ,  ξ∘η = κ e  (ξ = (μλn, λt), η = (β, yt)),  λ y = κ (unilateral),
//
// (κ = Smoothing; with κ = 0 only approximately, at the final gap). Its
// linearization, with y and β eliminated exactly as in the interior-point
// Newton step but with the exact coupling Arw(ξ)⁻¹Arw(η) instead of the
// Nesterov–Todd one, is
//
//	(W + K) dλ = −(dB + dW λ + M dμ),
//
// where K is block diagonal and M dμ is non-zero only on the tangent rows of
// contact c: λn [Arw(ξ)⁻¹Arw(η)]_{t,0} dμ_c. The n×n matrix W + K (the reduced
// F_z) is factored once per solve, on the first derivative call, and reused
// by every JVP and VJP. Derivatives with respect to W follow from dB_eff =
// dW λ: the gradient is W̄ = B̄ λᵀ (symmetrize for symmetric perturbations).
//
// Frictionless contacts (μ = 0) keep λt = 0; their derivatives with respect
// to μ and to their tangential B are zero (the one-sided derivative at
// μ = 0 is not represented).

// factorJacobian forms and factors W + K at the final iterate, into the
// solver's own sensitivity record.
func (s *Solver) factorJacobian() error {
	if !s.solved {
		return ErrNoSolution
	}
	if s.jacReady {
		return nil
	}
	if err := s.Record(&s.sens, true); err != nil {
		return err
	}
	s.jacReady = true
	return nil
}

// factorInto assembles W + K from the couplings in s.hx into a and factors
// it in place (pivots into piv).
func (s *Solver) factorInto(a []float64, piv []int) error {
	return factorShifted(a, s.n, piv, s.rho, func(a []float64) {
		copy(a, s.wd[:s.n*s.n])
		s.addBarrier(a, func(c int) *[3][3]float64 { return &s.hx[c] })
	})
}

// factorShifted fills a (n×n, row major) with fill and factors it in place.
// If it is singular — W singular at rows whose barrier terms vanished (κ = 0
// at redundant contacts) — it refills it with a tiny diagonal shift, 1e-13/ρ
// (ρ = 1/max W_ii), the minimum-norm-like choice that keeps the derivative
// bounded, and factors again.
func factorShifted(a []float64, n int, piv []int, rho float64, fill func(a []float64)) error {
	g := blas64.General{Rows: n, Cols: n, Stride: n, Data: a[:n*n]}
	fill(a)
	if lapack64.Getrf(g, piv) {
		return nil
	}
	fill(a)
	for i := range n {
		a[i*n+i] += 1e-13 / rho
	}
	if !lapack64.Getrf(g, piv) {
		return fmt.Errorf("contact: Jacobian of the solution is singular")
	}
	return nil
}

// JVP writes into dLambda the directional derivative of the last solution λ
// along a perturbation (dB, dMu) of the problem: dλ = −(W + K)⁻¹(dB + M dμ)
// (package implicit, with F_z = W + K factored once per solve and
// F_θ(dB, dμ) = dB + M dμ). dMu may be nil (no change of friction). A
// perturbation dW of W enters as dB = dW λ.
func (s *Solver) JVP(dLambda, dB, dMu []float64) error {
	if err := s.factorJacobian(); err != nil {
		return err
	}
	return s.sens.JVP(nil, dLambda, dB, dMu)
}

// VJP writes into bBar and muBar the gradients of the scalar ⟨lambdaBar, λ⟩
// with respect to B and μ: B̄ = −(W + K)⁻ᵀ λ̄ and μ̄_c = B̄_tᵀ λn
// [Arw(ξ)⁻¹Arw(η)]_{t,0} (package implicit). muBar may be nil. The gradient
// with respect to W is B̄ λᵀ. lambdaBar is left unchanged.
func (s *Solver) VJP(bBar, muBar, lambdaBar []float64) error {
	if err := s.factorJacobian(); err != nil {
		return err
	}
	return s.sens.VJP(nil, bBar, muBar, lambdaBar)
}

// ReducedJacobian writes the reduced Jacobian W + K of the optimality
// conditions at the last solution (see JVP) into dst, a row-major n×n slice,
// for callers that assemble larger systems.
func (s *Solver) ReducedJacobian(dst []float64) error {
	if !s.solved {
		return ErrNoSolution
	}
	if len(dst) != s.n*s.n {
		return fmt.Errorf("contact: dst has length %d, want %d", len(dst), s.n*s.n)
	}
	for c := range s.nc {
		if s.mu[c] > 0 {
			xi, eta := s.cone(c)
			s.hx[c] = arwCoupling(xi, eta)
		}
	}
	copy(dst, s.wd)
	s.addBarrier(dst, func(c int) *[3][3]float64 { return &s.hx[c] })
	return nil
}
