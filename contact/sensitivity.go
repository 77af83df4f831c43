package contact

import (
	"fmt"

	"stickslip/implicit"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/mat"
)

// Sensitivity is the compact record of a solved problem that its
// derivatives need once the Solver has moved on to other problems: the
// solution λ and the block-diagonal part K of the reduced Jacobian W + K of
// the optimality conditions (see JVP), 9 numbers per contact and one per
// unilateral row, with the friction coefficients. It does not hold W (n²
// numbers), which the caller supplies again when it differentiates; a
// reverse sweep through a long rollout keeps one Sensitivity per step and
// never the solver's iterations.
//
// Recorded with factor set, it also keeps the LU factors of W + K (n² numbers
// and n pivots), so that later VJPs need no factorization: memory traded
// for time.
type Sensitivity struct {
	n, nc int
	rho   float64
	lam   []float64
	mu    []float64
	// k holds per contact the normal row's diagonal y/λ and the tangent
	// rows' entries (μ·H₁₀, H₁₁, H₁₂, μ·H₂₀, H₂₁, H₂₂) with H = Arw(ξ)⁻¹Arw(η)
	// and H₁₀, H₂₀ for the dμ column λn·(H₁₀, H₂₀); then one diagonal per unilateral
	// row.
	k []float64

	lu  []float64 // LU factors of W + K when kept (Record with factor)
	piv []int
	// workspaces, and the factors in use (lu or a)
	a, theta, work []float64
	apiv           []int
	flu            []float64
	fpiv           []int
}

// perCone is the length of a contact's entry in Sensitivity.k.
const perCone = 9

// Record writes the compact sensitivity record of the last solution into
// dst, reusing its storage. With factor it also keeps the factored W + K.
func (s *Solver) Record(dst *Sensitivity, factor bool) error {
	if !s.solved {
		return ErrNoSolution
	}
	n, nc := s.n, s.nc
	dst.n, dst.nc, dst.rho = n, nc, s.rho
	dst.lam = append(dst.lam[:0], s.lam[:n]...)
	dst.mu = append(dst.mu[:0], s.mu[:nc]...)
	dst.k = grow(dst.k, perCone*nc+n-3*nc)
	for c := range nc {
		if s.mu[c] > 0 && !s.jacReady {
			xi, eta := s.cone(c)
			s.hx[c] = arwCoupling(xi, eta)
		}
	}
	for c := range nc {
		i := 3 * c
		e := dst.k[perCone*c : perCone*(c+1)]
		clear(e)
		e[0] = s.y[i] / s.lam[i]
		if m := s.mu[c]; m > 0 {
			h := &s.hx[c]
			e[1], e[2], e[3] = m*h[1][0], h[1][1], h[1][2]
			e[4], e[5], e[6] = m*h[2][0], h[2][1], h[2][2]
			e[7], e[8] = h[1][0], h[2][0]
		}
	}
	for i := 3 * nc; i < n; i++ {
		dst.k[perCone*nc+i-3*nc] = s.y[i] / s.lam[i]
	}
	dst.lu, dst.piv = dst.lu[:0], dst.piv[:0]
	if factor {
		if s.jacReady && dst != &s.sens {
			dst.lu = append(dst.lu, s.sens.lu...)
			dst.piv = append(dst.piv, s.sens.piv...)
			return nil
		}
		// Factor W + K straight into the record (the solver's own
		// derivative methods factor it again if they are called).
		dst.lu = grow(dst.lu, n*n)
		if cap(dst.piv) < n {
			dst.piv = make([]int, n)
		}
		dst.piv = dst.piv[:n]
		if err := s.factorInto(dst.lu, dst.piv); err != nil {
			dst.lu, dst.piv = dst.lu[:0], dst.piv[:0]
			return err
		}
	}
	return nil
}

// Size returns the number of rows and of contacts of the recorded problem.
func (r *Sensitivity) Size() (n, nc int) { return r.n, r.nc }

// Bytes returns the memory the record holds, in bytes.
func (r *Sensitivity) Bytes() int {
	return 8*(len(r.lam)+len(r.mu)+len(r.k)+len(r.lu)) + 8*len(r.piv) + 24
}

// HasFactors reports whether the record keeps the factors of W + K.
func (r *Sensitivity) HasFactors() bool { return len(r.lu) > 0 }

// Lambda returns the recorded solution (not a copy).
func (r *Sensitivity) Lambda() []float64 { return r.lam }

// assemble writes W + K into a (row major, n×n) from the symmetric W.
func (r *Sensitivity) assemble(a []float64, w *mat.SymDense) {
	n := r.n
	raw := w.RawSymmetric()
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			x := raw.Data[i*raw.Stride+j]
			if raw.Uplo != blas.Upper {
				x = raw.Data[j*raw.Stride+i]
			}
			a[i*n+j], a[j*n+i] = x, x
		}
	}
	for c := range r.nc {
		i := 3 * c
		e := r.k[perCone*c : perCone*(c+1)]
		a[i*n+i] += e[0]
		if r.mu[c] > 0 {
			for t := 1; t < 3; t++ {
				row := a[(i+t)*n:]
				row[i] += e[3*t-2]
				row[i+1] += e[3*t-1]
				row[i+2] += e[3*t]
			}
			continue
		}
		for t := 1; t < 3; t++ {
			row := a[(i+t)*n : (i+t+1)*n]
			clear(row)
			row[i+t] = 1
		}
	}
	for i := 3 * r.nc; i < n; i++ {
		a[i*n+i] += r.k[perCone*r.nc+i-3*r.nc]
	}
}

// factor sets flu and fpiv to the LU factors of W + K: the kept ones, or
// a fresh factorization of W + K assembled from w (which must then be the
// problem's W, as recorded).
func (r *Sensitivity) factor(w *mat.SymDense) error {
	if len(r.lu) > 0 {
		r.flu, r.fpiv = r.lu, r.piv
		return nil
	}
	n := r.n
	if w == nil || w.SymmetricDim() != n {
		return fmt.Errorf("contact: sensitivity of a %d-row problem needs its %d×%d Delassus operator", n, n, n)
	}
	r.a = grow(r.a, n*n)
	if cap(r.apiv) < n {
		r.apiv = make([]int, n)
	}
	r.apiv = r.apiv[:n]
	if err := factorShifted(r.a, n, r.apiv, r.rho, func(a []float64) { r.assemble(a, w) }); err != nil {
		return err
	}
	r.flu, r.fpiv = r.a, r.apiv
	return nil
}

// JVP is Solver.JVP for the recorded problem: it writes into dLambda the
// derivative of λ along (dB, dMu). w is the problem's Delassus operator; it
// is not read when the record kept its factors. dMu may be nil.
func (r *Sensitivity) JVP(w *mat.SymDense, dLambda, dB, dMu []float64) error {
	n, nc := r.n, r.nc
	if len(dLambda) != n || len(dB) != n || (dMu != nil && len(dMu) != nc) {
		return fmt.Errorf("contact: sensitivity JVP: lengths %d, %d, %d for a problem of %d rows and %d contacts",
			len(dLambda), len(dB), len(dMu), n, nc)
	}
	if err := r.factor(w); err != nil {
		return err
	}
	r.theta = grow(r.theta, n+nc)
	copy(r.theta, dB)
	for c := range nc {
		r.theta[n+c] = 0
		if dMu != nil {
			r.theta[n+c] = dMu[c]
		}
	}
	r.work = grow(r.work, n)
	return implicit.JVP(recordFactor{r}, recordParams{r}, dLambda, r.theta, r.work)
}

// VJP is Solver.VJP for the recorded problem: it writes into bBar and muBar
// the gradients of ⟨lambdaBar, λ⟩ with respect to B and μ. w is the
// problem's Delassus operator; it is not read when the record kept its
// factors. muBar may be nil.
func (r *Sensitivity) VJP(w *mat.SymDense, bBar, muBar, lambdaBar []float64) error {
	n, nc := r.n, r.nc
	if len(bBar) != n || len(lambdaBar) != n || (muBar != nil && len(muBar) != nc) {
		return fmt.Errorf("contact: sensitivity VJP: lengths %d, %d, %d for a problem of %d rows and %d contacts",
			len(bBar), len(muBar), len(lambdaBar), n, nc)
	}
	if err := r.factor(w); err != nil {
		return err
	}
	r.theta = grow(r.theta, n+nc)
	r.work = grow(r.work, n)
	if err := implicit.VJP(recordFactor{r}, recordParams{r}, r.theta, lambdaBar, r.work); err != nil {
		return err
	}
	copy(bBar, r.theta[:n])
	if muBar != nil {
		copy(muBar, r.theta[n:])
	}
	return nil
}

// recordFactor presents a record's factors (flu, fpiv) as the F_z of
// package implicit.
type recordFactor struct{ r *Sensitivity }

func (f recordFactor) Size() int { return f.r.n }

func (f recordFactor) SolveTo(dst, b []float64) error {
	copy(dst, b)
	luSolve(f.r.flu, f.r.n, f.r.fpiv, dst)
	return nil
}

func (f recordFactor) SolveTransTo(dst, b []float64) error {
	copy(dst, b)
	luSolveTrans(f.r.flu, f.r.n, f.r.fpiv, dst)
	return nil
}

// recordParams is F_θ for the parameters θ = (B, μ): F_θ(dB, dμ) = dB + M dμ,
// where M dμ lives on the tangent rows of contact c: λn [Arw(ξ)⁻¹Arw(η)]_{t,0}
// dμ_c. Frictionless contacts keep λt = 0, so their tangent rows read
// nothing.
type recordParams struct{ r *Sensitivity }

func (o recordParams) Dims() (n, p int) { return o.r.n, o.r.n + o.r.nc }

func (o recordParams) ApplyTo(dst, dTheta []float64) {
	r := o.r
	copy(dst, dTheta[:r.n])
	for c := range r.nc {
		i := 3 * c
		if r.mu[c] == 0 {
			dst[i+1], dst[i+2] = 0, 0
			continue
		}
		e := r.k[perCone*c:]
		dmu := dTheta[r.n+c]
		dst[i+1] += r.lam[i] * e[7] * dmu
		dst[i+2] += r.lam[i] * e[8] * dmu
	}
}

func (o recordParams) ApplyTransTo(dst, w []float64) {
	r := o.r
	copy(dst, w[:r.n])
	for c := range r.nc {
		i := 3 * c
		dst[r.n+c] = 0
		if r.mu[c] == 0 {
			dst[i+1], dst[i+2] = 0, 0
			continue
		}
		e := r.k[perCone*c:]
		dst[r.n+c] = r.lam[i] * (w[i+1]*e[7] + w[i+2]*e[8])
	}
}
