package contact

import (
	"math"
	"slices"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// Polishing: once the interior-point iterate is roughly converged, the
// mode of every contact can be read off it, and the exact conditions of
// those modes are a square system of equations in λ alone,
//
//	separating contact, inactive unilateral row:  λ = 0,
//	frictionless contact that pushes:             un = 0, λt = 0,
//	sticking contact, active unilateral row:      u = 0,
//	sliding contact:                              un = 0, λt + μ λn ut/‖ut‖ = 0,
//
// (u = W λ + B), which Newton's method solves to full precision in a few
// steps where the interior-point iteration would need the complementarity
// gap to shrink by several more orders of magnitude (its last digits are
// the hardest: the barrier matrix becomes badly conditioned as pairs reach
// the boundary of their cones). A polished point is accepted only if it
// satisfies the exact conditions (natural and velocity residuals) to the
// tolerances; a wrong guess of a mode leaves a sign or cone violation, and
// the interior-point iteration then simply continues.
//
// With redundant contacts (singular W) the system is singular: its
// solutions form an affine set. The Newton steps are regularized (see
// polishNewton) so that they leave the components of λ that W does not see
// as the interior-point iterate had them when polishing succeeded: the
// distribution of impulses among redundant contacts is that of an early
// iterate, a smooth function of the problem data as long as the iteration
// count does not change, but not the analytic centre of the solution set
// that the iteration would converge to. (With friction the velocities can
// depend on that distribution too; the exact problem does not determine
// them.)

// Row kinds of the polishing system.
const (
	rowZero     int8 = iota // λ_i = 0
	rowVelocity             // u_i = 0
	rowSlide                // tangent row of a sliding contact
)

// polishStart is the scaled stopping residual (with the velocity residual
// brought to the same footing, see trialResidual) below which the modes can
// be read off reliably: polishing is then retried at every hundredfold
// improvement even if the modes have not changed.
const polishStart = 1e-8

// polishEarly is the scaled stopping residual below which polishing is
// tried whenever the modes read off the iterate change.
const polishEarly = 1e-2

// polishDelta is the relative complementarity of the interior point
// placed next to a polished solution for the derivatives (see
// centralPoint): small enough for the smoothing it adds to be negligible,
// large enough for the barrier terms (up to W_ii/delta) to keep the
// Newton matrix well conditioned. Measured against finite differences
// (TestPolishedDerivativeFiniteDifferences and the sim sweeps), 1e-8
// leaves a smoothing error of up to 5e-5 and 1e-12 rounding errors above
// 1e-6; 1e-10 keeps both below 1e-6.
const polishDelta = 1e-10

// polishRounds bounds the active-set corrections of one polishing attempt.
const polishRounds = 6

// polishSteps bounds the Newton steps of one polishing attempt.
const polishSteps = 10

// polishEps is the relative diagonal shift ε/max W_ii of the polishing
// Newton matrix. Each step leaves a share of about 2ε/σ of the error along
// an eigenvalue σ of the mode's Jacobian, so ε only needs to be small
// against the smallest nonzero σ; it bounds the growth of rounding errors
// along nearly singular directions by 1/(4ε).
const polishEps = 1e-9

// classify sets the row kinds of the polishing system from the current
// iterate. A pair is read as active where λ exceeds ρ y (ρ = 1/W_ii, the
// impulse that the row's own velocity y would take back), a contact as
// sliding where ρ β, the impulse scale of its slip, exceeds the distance
// μλn − ‖λt‖ of its friction from the cone's boundary.
func (s *Solver) classify() {
	for c := range s.nc {
		i := 3 * c
		k := &s.kind
		ln := s.lam[i]
		switch m := s.mu[c]; {
		case ln <= s.rowRho(i)*s.y[i]:
			(*k)[i], (*k)[i+1], (*k)[i+2] = rowZero, rowZero, rowZero
		case m == 0:
			(*k)[i], (*k)[i+1], (*k)[i+2] = rowVelocity, rowZero, rowZero
		case s.rowRho(i+1)*s.beta[c] > m*ln-math.Hypot(s.lam[i+1], s.lam[i+2]):
			(*k)[i], (*k)[i+1], (*k)[i+2] = rowVelocity, rowSlide, rowSlide
		default:
			(*k)[i], (*k)[i+1], (*k)[i+2] = rowVelocity, rowVelocity, rowVelocity
		}
	}
	for i := 3 * s.nc; i < s.n; i++ {
		if s.lam[i] > s.rowRho(i)*s.y[i] {
			s.kind[i] = rowVelocity
		} else {
			s.kind[i] = rowZero
		}
	}
}

// polishResidual computes u = W λ + B at s.lamP into s.uP and the residual
// F of the mode equations into s.fP, every row in velocity units (impulse
// rows times 1/ρ). It returns max|F|/su, or NaN when a sliding contact has
// no slip direction.
func (s *Solver) polishResidual() float64 {
	lam, u, f := s.lamP, s.uP, s.fP
	s.velocityAt(lam, u)
	worst := 0.0
	for i := range s.n {
		switch s.kind[i] {
		case rowZero:
			f[i] = lam[i] / s.rowRho(i)
		case rowVelocity:
			f[i] = u[i]
		case rowSlide:
			if (i % 3) != 1 {
				continue // filled with the first tangent row
			}
			c := i / 3
			nut := math.Hypot(u[i], u[i+1])
			if nut == 0 {
				return math.NaN()
			}
			ml := s.mu[c] * lam[i-1] / nut
			f[i] = (lam[i] + ml*u[i]) / s.rowRho(i)
			f[i+1] = (lam[i+1] + ml*u[i+1]) / s.rowRho(i+1)
		}
	}
	for i := range s.n {
		worst = math.Max(worst, math.Abs(f[i]))
	}
	return worst / s.scaleU
}

// polishFactor assembles J + εI, J the Jacobian of the mode equations at
// s.lamP (rows as in polishResidual), into s.jac and factors it.
func (s *Solver) polishFactor() bool {
	s.factors++
	n := s.n
	a := s.jac
	lam, u := s.lamP, s.uP
	eps := polishEps / s.rho
	for i := range n {
		row := a[i*n : (i+1)*n]
		switch s.kind[i] {
		case rowZero:
			clear(row)
			row[i] = 1 / s.rowRho(i)
		case rowVelocity:
			copy(row, s.wd[i*n:(i+1)*n])
		case rowSlide:
			// g_r = λt_r + μ λn d_r with d = ut/‖ut‖:
			// ∂g/∂λ = e_t + μ d e_n + (μ λn/‖ut‖)(I − d dᵀ) W_t.
			c, r := i/3, i%3-1
			j := 3 * c
			nut := math.Hypot(u[j+1], u[j+2])
			d := [2]float64{u[j+1] / nut, u[j+2] / nut}
			ml := s.mu[c] * lam[j] / nut
			p0, p1 := -ml*d[r]*d[0], -ml*d[r]*d[1]
			if r == 0 {
				p0 += ml
			} else {
				p1 += ml
			}
			w1, w2 := s.wd[(j+1)*n:(j+2)*n], s.wd[(j+2)*n:(j+3)*n]
			om := 1 / s.rowRho(i)
			for k := range n {
				row[k] = om * (p0*w1[k] + p1*w2[k])
			}
			row[j] += om * s.mu[c] * d[r]
			row[i] += om
		}
		row[i] += eps
	}
	return lapack64.Getrf(s.general(a), s.jpiv)
}

// polish tries to finish the solve from the current iterate (see the
// comment at the top of this file), reading the modes off the iterate and,
// for up to rounds more attempts, off the previous polished point (an
// active-set correction: a contact whose polished impulse or velocity
// violates its mode is given the mode the natural map assigns it). On
// success the polished impulses are in s.lamP, their velocities in s.uP,
// and it returns their natural and velocity residuals.
func (s *Solver) polish(tol, vtol float64, rounds int) (ok bool, natural, velocity float64) {
	s.classify()
	copy(s.lamP, s.lam)
	for round := 0; ; round++ {
		if s.polishNewton() {
			natural, velocity = s.naturalAt(s.lamP, s.uP)
			if natural <= tol && velocity <= vtol {
				return true, natural, velocity
			}
		}
		if round >= rounds {
			return false, natural, velocity
		}
		if !s.reclassify(s.lamP, s.uP) {
			return false, natural, velocity
		}
	}
}

// polishNewton runs the Newton iteration of the mode equations given by
// s.kind from s.lamP (whose rows of kind rowZero it zeroes first). It
// leaves the result in s.lamP and its velocity in s.uP and reports false
// when the Jacobian could not be factored.
func (s *Solver) polishNewton() bool {
	n := s.n
	for i := range n {
		if s.kind[i] == rowZero {
			s.lamP[i] = 0
		}
	}
	// The Jacobian is factored at the starting point and kept while it
	// reduces the residual at least a hundredfold per step (a chord
	// method): the equations are linear but for the slip directions of
	// sliding contacts, which change little near a solution, and a step
	// with a kept factorization costs two triangular solves instead of a
	// factorization.
	sliding := slices.Contains(s.kind, rowSlide)
	if !sliding {
		return s.polishLinear()
	}
	prev := math.Inf(1)
	factored := false
	for step := range polishSteps {
		f := s.polishResidual()
		if !(f < prev) && step > 0 {
			// No longer converging (rounding reached, a wrong mode, or a
			// sliding system out of Newton's reach): undo the last step.
			for i := range n {
				if s.kind[i] != rowZero {
					s.lamP[i] += s.rhs[i]
				}
			}
			break
		}
		if !(f > 1e-15) {
			break // exact to rounding, or NaN (no slip direction)
		}
		if !factored || (sliding && f > 1e-2*prev) {
			if !s.polishFactor() {
				return false
			}
			factored = true
		}
		prev = f
		// Filtered step d = (J + εI)⁻¹ J (J + εI)⁻¹ F, computed as
		// (J + εI)⁻¹ (F − ε z) with z = (J + εI)⁻¹ F: along an eigenvalue
		// σ of J it is σ/(σ + ε)² times F, Newton's F/σ for σ ≫ ε and
		// zero for σ = 0, so an inconsistent part of F (redundant
		// contacts whose offsets B disagree by rounding) is left as a
		// residual instead of being amplified by 1/ε.
		copy(s.rhs, s.fP)
		luSolve(s.jac, n, s.jpiv, s.rhs)
		eps := polishEps / s.rho
		for i := range n {
			s.rhs[i] = s.fP[i] - eps*s.rhs[i]
		}
		luSolve(s.jac, n, s.jpiv, s.rhs)
		for i := range n {
			if s.kind[i] == rowZero {
				continue // stays exactly zero
			}
			s.lamP[i] -= s.rhs[i]
		}
	}
	s.velocityAt(s.lamP, s.uP)
	return true
}

// polishNeighbours tries the modes read off the iterate with one contact's
// or one unilateral row's mode changed, each in turn: the last resort of a
// solve whose interior-point iterate hovers between solutions (friction
// problems can have several) without approaching any of them.
func (s *Solver) polishNeighbours(tol, vtol float64) (ok bool, natural, velocity float64) {
	s.classify()
	copy(s.kindB, s.kind)
	try := func() bool {
		copy(s.lamP, s.lam)
		if !s.polishNewton() {
			return false
		}
		natural, velocity = s.naturalAt(s.lamP, s.uP)
		return natural <= tol && velocity <= vtol
	}
	modes := [3][3]int8{
		{rowZero, rowZero, rowZero},
		{rowVelocity, rowVelocity, rowVelocity},
		{rowVelocity, rowSlide, rowSlide},
	}
	for c := range s.nc {
		i := 3 * c
		for k, md := range modes {
			if md == [3]int8(s.kindB[i:i+3]) || (s.mu[c] == 0 && k == 2) {
				continue
			}
			copy(s.kind, s.kindB)
			if s.mu[c] == 0 && k == 1 {
				md = [3]int8{rowVelocity, rowZero, rowZero}
				if md == [3]int8(s.kindB[i:i+3]) {
					continue
				}
			}
			copy(s.kind[i:i+3], md[:])
			if try() {
				return true, natural, velocity
			}
		}
	}
	for i := 3 * s.nc; i < s.n; i++ {
		copy(s.kind, s.kindB)
		s.kind[i] = rowVelocity + rowZero - s.kind[i]
		if try() {
			return true, natural, velocity
		}
	}
	return false, natural, velocity
}

// polishLinear is polishNewton for modes without sliding contacts. The
// equations are then linear, λ = 0 on the rows of kind rowZero and
// (W λ + B)_A = 0 on the others (the set A), so the step solves the
// symmetric positive definite system W_AA + εI of the rows in A alone, by
// Cholesky: half the work of the general factorization, on fewer rows.
func (s *Solver) polishLinear() bool {
	n := s.n
	idx := s.jpiv[:0]
	for i := range n {
		if s.kind[i] == rowZero {
			s.lamP[i] = 0
		} else {
			idx = append(idx, i)
		}
	}
	m := len(idx)
	if m == 0 {
		s.velocityAt(s.lamP, s.uP)
		return true
	}
	a := s.jac[:m*m]
	eps := polishEps / s.rho
	for r, i := range idx {
		wi := s.wd[i*n : (i+1)*n]
		row := a[r*m : (r+1)*m]
		for c, j := range idx {
			row[c] = wi[j]
		}
		row[r] += eps
	}
	s.factors++
	if _, ok := lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: m, Stride: m, Data: a}); !ok {
		return false
	}
	prev := math.Inf(1)
	for step := range polishSteps {
		s.velocityAt(s.lamP, s.uP)
		f := 0.0
		for _, i := range idx {
			f = math.Max(f, math.Abs(s.uP[i]))
		}
		f /= s.scaleU
		if !(f < prev) && step > 0 {
			for r, i := range idx {
				s.lamP[i] += s.rhs[r]
			}
			break
		}
		if !(f > 1e-15) {
			break
		}
		prev = f
		// The filtered step of polishNewton.
		for r, i := range idx {
			s.rhs[r] = s.uP[i]
		}
		cholSolve(a, m, s.rhs)
		for r, i := range idx {
			s.rhs[r] = s.uP[i] - eps*s.rhs[r]
		}
		cholSolve(a, m, s.rhs)
		for r, i := range idx {
			s.lamP[i] -= s.rhs[r]
		}
	}
	s.velocityAt(s.lamP, s.uP)
	return true
}

// reclassify sets the row kinds from the point (lam, u) by the natural map
// of the exact conditions: x = λ − ρ ũ projected onto the Coulomb cone
// lands inside it (sticking), at its apex (separating) or on its side
// (sliding); a unilateral row is active where λ − ρ u > 0. It reports
// whether any kind changed.
func (s *Solver) reclassify(lam, u []float64) (changed bool) {
	set := func(i int, k0, k1, k2 int8) {
		if s.kind[i] != k0 || s.kind[i+1] != k1 || s.kind[i+2] != k2 {
			changed = true
		}
		s.kind[i], s.kind[i+1], s.kind[i+2] = k0, k1, k2
	}
	for c := range s.nc {
		i := 3 * c
		m := s.mu[c]
		rho := s.rowRho(i)
		nut := math.Hypot(u[i+1], u[i+2])
		x := soc3{lam[i] - rho*(u[i]+m*nut), lam[i+1] - rho*u[i+1], lam[i+2] - rho*u[i+2]}
		nx := math.Hypot(x[1], x[2])
		switch {
		case x[0] <= 0 && m*nx <= -x[0]:
			set(i, rowZero, rowZero, rowZero)
		case m == 0:
			set(i, rowVelocity, rowZero, rowZero)
		case nx <= m*x[0] || nut == 0:
			set(i, rowVelocity, rowVelocity, rowVelocity)
		default:
			set(i, rowVelocity, rowSlide, rowSlide)
		}
	}
	for i := 3 * s.nc; i < s.n; i++ {
		k := rowZero
		if lam[i]-s.rowRho(i)*u[i] > 0 {
			k = rowVelocity
		}
		if s.kind[i] != k {
			changed = true
		}
		s.kind[i] = k
	}
	return changed
}

// exactGap returns Σ λᵀũ over the contacts plus Σ λ u over the unilateral
// rows at (lam, u): the complementarity gap of the exact conditions.
func (s *Solver) exactGap(lam, u []float64) float64 {
	gap := 0.0
	for c := range s.nc {
		i := 3 * c
		gap += lam[i]*(u[i]+s.mu[c]*math.Hypot(u[i+1], u[i+2])) + lam[i+1]*u[i+1] + lam[i+2]*u[i+2]
	}
	for i := 3 * s.nc; i < s.n; i++ {
		gap += lam[i] * u[i]
	}
	return gap
}

// centralPoint replaces the interior-point iterate (λ, y, β) by an
// interior point next to the polished solution (s.lamP, s.uP) at relative
// complementarity delta: every pair keeps the polished value of its larger
// member and gets delta times it (converted by ρ = 1/W_ii between impulse
// and velocity units) for the smaller one; for the cone pairs the same per
// eigenvalue in a shared Jordan frame, so that ξ∘η is a multiple of the
// identity along each eigendirection. The derivatives, which linearize the
// relaxed conditions at the iterate, then see the polished modes with every
// barrier term a fraction delta (or 1/delta) of the contact's own W_ii:
// the same relative smoothing for large and small impulses, which a
// common target κ cannot give.
func (s *Solver) centralPoint(delta float64) {
	lp, up := s.lamP, s.uP
	scale := math.Sqrt(delta) * s.scaleL
	for c := range s.nc {
		i := 3 * c
		m := s.mu[c]
		rho := s.rowRho(i)
		if m == 0 {
			s.lam[i], s.y[i] = centralPair(lp[i], up[i], rho, delta, scale)
			s.lam[i+1], s.lam[i+2] = 0, 0
			s.y[i+1], s.y[i+2] = up[i+1], up[i+2]
			s.beta[c] = math.Hypot(up[i+1], up[i+2])
			continue
		}
		nlt, nut := math.Hypot(lp[i+1], lp[i+2]), math.Hypot(up[i+1], up[i+2])
		// β of the exact solution: ‖ut‖ where the contact pushes; where it
		// separates any bound on ‖ut‖ will do, and un keeps the cone pair
		// as far from degenerate as the normal pair.
		beta := nut
		if s.kind[i] == rowZero {
			beta += math.Max(up[i], 0)
		}
		// The shared Jordan frame: the friction direction, or against the
		// slip where there is no friction.
		v := [2]float64{1, 0}
		switch {
		case nlt > rho*nut:
			v = [2]float64{lp[i+1] / nlt, lp[i+2] / nlt}
		case nut > 0:
			v = [2]float64{-up[i+1] / nut, -up[i+2] / nut}
		}
		xi0, xi1 := m*lp[i], lp[i+1]*v[0]+lp[i+2]*v[1]
		eta1 := up[i+1]*v[0] + up[i+2]*v[1]
		var a, b [2]float64
		for k, sg := range [2]float64{1, -1} {
			a[k], b[k] = centralPair(math.Max(xi0+sg*xi1, 0), math.Max(beta+sg*eta1, 0), rho, delta, scale)
		}
		xi0, xi1 = (a[0]+a[1])/2, (a[0]-a[1])/2
		eta0, eta1 := (b[0]+b[1])/2, (b[0]-b[1])/2
		s.lam[i], s.lam[i+1], s.lam[i+2] = xi0/m, xi1*v[0], xi1*v[1]
		s.beta[c], s.y[i+1], s.y[i+2] = eta0, eta1*v[0], eta1*v[1]
		if s.kind[i] == rowZero {
			s.y[i] = math.Max(up[i], s.lam[i]/(delta*rho))
		} else {
			s.y[i] = delta * s.lam[i] / rho
		}
	}
	for i := 3 * s.nc; i < s.n; i++ {
		s.lam[i], s.y[i] = centralPair(lp[i], up[i], s.rowRho(i), delta, scale)
	}
}

// centralPair returns the interior pair (l, y) next to an exact
// complementary pair (l0, y0): the member that is larger, compared in
// impulse units (ρ y0 against l0), is kept, and the other is delta times
// it, so that y/l is delta/ρ (active) or 1/(delta ρ) (inactive). A pair
// with both members zero (weakly active) becomes (scale, scale/ρ); so does
// a pair whose larger member is below delta·scale in impulse units, which is
// zero to rounding (a sticking contact exactly at the friction limit puts
// one eigenvalue of its cone pair there, and keeping it would leave the
// pair on the cone's boundary, where the derivative's Newton matrix is
// infinite).
func centralPair(l0, y0, rho, delta, scale float64) (l, y float64) {
	switch {
	case l0 <= 0 && y0 <= 0, math.Max(l0, rho*y0) <= delta*scale:
		return scale, scale / rho
	case l0 >= rho*y0:
		return l0, delta * l0 / rho
	}
	return delta * rho * y0, y0
}
