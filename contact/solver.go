package contact

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
	"gonum.org/v1/gonum/mat"
)

// Problem is one step's contact problem in contact space. Rows
// 0..3*NumCones-1 hold NumCones contacts, each as (normal, tangent 1,
// tangent 2); the remaining rows are unilateral constraints (joint limits):
// λ_i ≥ 0 ⊥ u_i ≥ 0. The post-step contact velocity is u = W λ + B.
//
// For a contact with friction coefficient μ the impulse λ = (λn, λt) lies in
// the Coulomb cone ‖λt‖ ≤ μ λn, and with u = (un, ut) the conditions are the
// exact Coulomb law with maximum dissipation:
//
//	separating: λ = 0, un ≥ 0;
//	sticking:   un = 0, ut = 0, ‖λt‖ ≤ μ λn;
//	sliding:    un = 0, λt = −μ λn ut/‖ut‖ (no lift-off while sliding).
//
// These are De Saxcé's bipotential conditions λ ∈ K_μ, ũ = (un + μ‖ut‖, ut)
// ∈ K_μ*, λ ⊥ ũ. A contact with μ = 0 is frictionless (λt = 0).
type Problem struct {
	// W is the Delassus operator J M⁻¹ Jᵀ. It must be positive
	// semidefinite; it may be singular (redundant contacts).
	W *mat.SymDense
	// B is the free velocity plus restitution and position-correction
	// offsets.
	B []float64
	// Mu holds the friction coefficient of each contact (μ ≥ 0).
	Mu []float64
	// NumCones is the number of contacts, stored in the first 3*NumCones rows.
	NumCones int
}

// SolveStats describe a finished solve.
type SolveStats struct {
	// Iterations is the number of interior-point iterations (one
	// factorization and two solves each).
	Iterations int
	// Residual is the stopping residual, compared with Tolerance: with
	// Smoothing = 0 the larger of the natural residual of the exact
	// conditions (see Complementarity) and of the interior-point pairs'
	// products; otherwise the largest violation of the relaxed conditions
	// λ∘y = κ e and of y = W λ + B. All are scaled as described on Solve.
	Residual float64
	// VelocityResidual is the natural-map residual in velocity units,
	// compared with VelocityTolerance when Smoothing = 0 (see Solve).
	VelocityResidual float64
	// Complementarity is the natural residual of the exact conditions: the
	// largest of the cone violations of λ and ũ and of |λᵀũ| per contact
	// (|λ u| and sign violations per unilateral row), scaled. With
	// Smoothing κ > 0 it is of the order of κ.
	Complementarity float64
	// Gap is Σ λn yn + Σ ξᵀη + Σ λ y over all complementarity pairs at the
	// end (unscaled); see Solve for ξ and η.
	Gap float64
	// Regularized counts the factorizations that needed a diagonal shift
	// because the Newton matrix was numerically singular.
	Regularized int
	// Factorizations counts the n×n LU factorizations, the bulk of the
	// cost: one per interior-point iteration, more in the fallbacks, and
	// one per polishing attempt (one per Newton step with sliding
	// contacts).
	Factorizations int
	// Restarts counts the restarts of the interior-point iteration from a
	// new starting point after it stalled.
	Restarts int
	// Polished reports that the impulses are the polished solution of the
	// contact modes read off the interior-point iterate (see Solve), not
	// the iterate itself.
	Polished bool
}

// SolveError reports a solve that did not reach its tolerance. Callers add
// the step, time and bodies to the message.
type SolveError struct {
	Iterations        int
	Residual          float64 // scaled residual reached
	Tolerance         float64
	VelocityResidual  float64 // natural-map residual reached (m/s, scaled)
	VelocityTolerance float64
	Reason            string
}

func (e *SolveError) Error() string {
	return fmt.Sprintf("contact: interior-point solve did not converge: %s after %d iterations (residual %.3g, tolerance %.3g; velocity residual %.3g, tolerance %.3g)",
		e.Reason, e.Iterations, e.Residual, e.Tolerance, e.VelocityResidual, e.VelocityTolerance)
}

// ErrNoSolution is returned by the derivative methods when no successful
// Solve precedes them.
var ErrNoSolution = errors.New("contact: no solved problem to differentiate (call Solve first)")

// Solver solves contact problems by a primal–dual interior-point method. Its
// workspaces grow to the largest problem seen and are reused, so repeated
// solves of problems of the same size allocate nothing. A Solver is not safe
// for concurrent use; use one per goroutine.
type Solver struct {
	n, nc       int
	kappa       float64
	aho         bool // direction: Newton on ξ∘η (true) or Nesterov–Todd (false)
	regularized int  // factorizations regularized in the current iteration
	factors     int  // factorizations in the current solve

	wd   []float64 // W as a full row-major n×n matrix
	b    []float64
	mu   []float64
	lam  []float64 // impulses λ
	y    []float64 // velocity slack y, equal to W λ + B at convergence
	beta []float64 // per contact: the slip-rate bound β ≥ ‖ut‖ (see Solve)

	dlam, dy, dbeta    []float64 // combined (corrector) direction
	dlamA, dyA, dbetaA []float64 // affine (predictor) direction
	u, rp              []float64 // u = W λ + B and rp = y − u
	lamT, yT, betaT    []float64 // trial point of a candidate step
	uT, rpT            []float64
	dlamK, dyK, dbetaK []float64 // best candidate direction
	lamP, uP, fP       []float64 // polished point, its velocity and mode residual
	kind, kindB        []int8    // per row: equation of the polishing system, and a saved copy
	kindA, kindP       []int8    // modes at the last polishing attempt and at the previous iteration
	lamB, yB, betaB    []float64 // best iterate so far
	rhs                []float64
	wq0                []float64 // per contact: (Ws q)_0, needed for dβ
	nt                 []ntScaling
	hx                 [][3][3]float64 // per contact: Arw(ξ)⁻¹Arw(η) at the solution

	// m holds the LU factors of the last interior-point Newton matrix
	// W + K (K block diagonal, see assemble) and piv its row pivots. It is
	// the factorization of the final iteration when Solve returns.
	m   []float64
	piv []int

	scaleL, scaleU float64 // impulse and velocity scales of the residuals
	rho            float64 // 1/max W_ii: fallback for rows with W_ii = 0
	tolRatio       float64 // Tolerance / VelocityTolerance

	// jac and jpiv are the polishing Newton matrix's workspace. sens is
	// the record of the exact Jacobian of the optimality conditions at the
	// solution, reduced to λ, factored on first use by the derivative
	// methods (jacReady).
	jac      []float64
	jpiv     []int
	sens     Sensitivity
	jacReady bool
	solved   bool
}

// NewSolver returns a solver with empty workspaces.
func NewSolver() *Solver { return &Solver{} }

// grow returns s resized to n, reusing its storage when large enough.
func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

func (s *Solver) resize(n, nc int) {
	s.n, s.nc = n, nc
	s.wd = grow(s.wd, n*n)
	s.m = grow(s.m, n*n)
	s.jac = grow(s.jac, n*n)
	for _, v := range []*[]float64{&s.b, &s.lam, &s.y, &s.dlam, &s.dy, &s.dlamA, &s.dyA, &s.u, &s.rp, &s.rhs,
		&s.lamT, &s.yT, &s.uT, &s.rpT, &s.dlamK, &s.dyK, &s.lamP, &s.uP, &s.fP, &s.lamB, &s.yB} {
		*v = grow(*v, n)
	}
	for _, v := range []*[]float64{&s.mu, &s.beta, &s.dbeta, &s.dbetaA, &s.wq0, &s.betaT, &s.dbetaK, &s.betaB} {
		*v = grow(*v, nc)
	}
	if cap(s.kind) < n {
		s.kind = make([]int8, n)
		s.kindB = make([]int8, n)
		s.kindA = make([]int8, n)
		s.kindP = make([]int8, n)
	}
	s.kind, s.kindB, s.kindA, s.kindP = s.kind[:n], s.kindB[:n], s.kindA[:n], s.kindP[:n]
	if cap(s.piv) < n {
		s.piv = make([]int, n)
		s.jpiv = make([]int, n)
	}
	s.piv, s.jpiv = s.piv[:n], s.jpiv[:n]
	if cap(s.nt) < nc {
		s.nt = make([]ntScaling, nc)
	}
	s.nt = s.nt[:nc]
	if cap(s.hx) < nc {
		s.hx = make([][3][3]float64, nc)
	}
	s.hx = s.hx[:nc]
}

// load checks p and copies it into the workspaces.
func (s *Solver) load(p *Problem, nlam int) error {
	if p == nil || p.W == nil {
		return errors.New("contact: problem has no Delassus matrix W")
	}
	n := len(p.B)
	if p.W.SymmetricDim() != n {
		return fmt.Errorf("contact: W is %d×%d but B has %d rows", p.W.SymmetricDim(), p.W.SymmetricDim(), n)
	}
	if p.NumCones < 0 || 3*p.NumCones > n {
		return fmt.Errorf("contact: %d contacts need %d rows but B has %d", p.NumCones, 3*p.NumCones, n)
	}
	if len(p.Mu) != p.NumCones {
		return fmt.Errorf("contact: %d friction coefficients for %d contacts", len(p.Mu), p.NumCones)
	}
	if nlam != n {
		return fmt.Errorf("contact: lambda has length %d, want %d", nlam, n)
	}
	for c, m := range p.Mu {
		if !(m >= 0) || math.IsInf(m, 1) {
			return fmt.Errorf("contact: contact %d: friction coefficient %v, want a finite μ ≥ 0", c, m)
		}
	}
	for i, v := range p.B {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("contact: row %d: B = %v, want a finite value", i, v)
		}
	}
	s.resize(n, p.NumCones)
	copy(s.b, p.B)
	copy(s.mu, p.Mu)
	raw := p.W.RawSymmetric()
	for i := range n {
		for j := i; j < n; j++ {
			var v float64
			if raw.Uplo == blas.Upper {
				v = raw.Data[i*raw.Stride+j]
			} else {
				v = raw.Data[j*raw.Stride+i]
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("contact: W[%d,%d] = %v, want a finite value", i, j, v)
			}
			s.wd[i*n+j] = v
			s.wd[j*n+i] = v
		}
		if s.wd[i*n+i] < 0 {
			return fmt.Errorf("contact: W[%d,%d] = %v < 0: W must be positive semidefinite", i, i, s.wd[i*n+i])
		}
	}
	return nil
}

// Solve solves p and writes the impulses into lambda (len(lambda) =
// len(p.B)). The zero value of set selects the defaults.
//
// # Formulation
//
// De Saxcé's conditions contain ‖ut‖, which is not differentiable at ut = 0
// (sticking). The solver lifts them to a smooth complementarity problem by
// introducing one extra unknown per contact, the slip-rate bound β:
//
//	λn ≥ 0 ⊥ un ≥ 0,
//	ξ = (μ λn, λt) ∈ L ⊥ η = (β, ut) ∈ L,     L the Lorentz cone ‖x1‖ ≤ x0.
//
// ξ ∈ L is the Coulomb cone. For λn > 0, ξᵀη = μλnβ + λtᵀut = 0 with
// β ≥ ‖ut‖ forces either ut = 0 and β = 0 (sticking) or β = ‖ut‖,
// ‖λt‖ = μλn and λt = −μλn ut/‖ut‖ (sliding), while λn un = 0 keeps
// un = 0 in both (no lift-off). For λn = 0, ξ ∈ L forces λt = 0 and
// un ≥ 0 remains (separating; β is then any bound on ‖ut‖). So every solution
// of the lifted problem gives an exact Coulomb solution, and vice versa with
// β = ‖ut‖. Unlike the convex relaxation (ũ replaced by u), sliding contacts
// do not lift off.
//
// Unilateral rows are scalar pairs λ ≥ 0 ⊥ u ≥ 0; contacts with μ = 0 have
// only the normal pair and λt = 0.
//
// # Method
//
// A primal–dual interior-point method follows the central path
// λn yn = τ, ξ∘η = τ e, λ y = τ (unilateral) with a slack y for u
// (infeasible start: y − Wλ − B is driven to zero by the Newton steps),
// Mehrotra's predictor–corrector choice of τ and a fraction-to-boundary step
// of 0.99. The Newton direction linearizes the Jordan products directly
// (the AHO direction: exact Newton on the relaxed conditions). When its step
// is shorter than 0.3 the Nesterov–Todd direction is tried instead, and when
// that is short too a damped Newton step towards the current central point,
// backtracked on the residual norm, globalizes the iteration (the problem is
// not monotone).
//
// Each direction eliminates y and β and factors the n×n Newton matrix
// W + K by LU with partial pivoting, where K is block diagonal (3×3 per
// contact, diagonal for unilateral rows). K is not symmetric: the tangent
// rows depend on λn through ξ0 = μ λn, which is the non-associated
// (non-monotone) part of Coulomb friction. The barrier blocks of K keep the
// matrix nonsingular for singular W; a numerically singular matrix is
// retried with a diagonal shift of 1e-13 times the largest diagonal of W
// (counted in SolveStats.Regularized).
//
// # Polishing
//
// With κ = 0 the iteration is finished by polishing (see
// solver_polish.go): the mode of each contact (separating, sticking,
// sliding) and of each unilateral row (active or not) is read off the
// iterate and the equations of those modes are solved by Newton's method.
// The polished impulses are returned, with SolveStats.Polished set, only
// if they meet both tolerances on the exact conditions; otherwise the
// interior-point iteration continues. Polishing is tried once the scaled
// residual is below 1e-2, again whenever the modes read off the iterate
// change and hold for two iterations, and below 1e-8 at every hundredfold
// improvement. It finishes in one or two factorizations what the
// interior-point method would need several increasingly ill-conditioned
// iterations for, or could not reach at all; a resting stack is typically
// solved after one iteration. The iterate that the derivatives linearize
// about is then moved to an interior point next to the polished solution,
// with each pair relaxed by a relative 1e-10 (see centralPoint).
//
// # Smoothing
//
// With set.Smoothing = κ > 0 the solve stops on the relaxed conditions
// λn yn = κ, ξ∘η = κ e, λ y = κ (unilateral), y = W λ + B, whose solution is a
// smooth function of B, W and μ: its derivatives (JVP, VJP) smooth over
// touch-down and stick/slip. κ has units of impulse times velocity. With
// κ = 0 the solve stops on the natural residual of the exact conditions.
//
// # Residuals and scaling
//
// Impulse residuals are divided by sλ = max(1, ‖B‖∞ / max W_ii), velocity
// residuals by su = max(1, ‖B‖∞), products by sλ su. For problems with
// ‖B‖∞ ≤ 1 and max W_ii ≥ ‖B‖∞ both scales are 1 and the residuals are
// absolute. With κ = 0 the solve stops when SolveStats.Residual ≤
// set.Tolerance and SolveStats.VelocityResidual ≤ set.VelocityTolerance.
//
// # Fallbacks
//
// The problem is not monotone, and the central path from a given starting
// point can turn back before reaching a solution. A solve whose stopping
// residual has not halved for 6 iterations (or whose iterate became NaN) is
// stalled: the modes read off it are polished (with active-set
// corrections), and failing that the iteration restarts from a differently
// balanced starting point (impulses or velocities scaled by 10 or 1/10; up
// to 4 restarts, each while at least 10 iterations remain). When the
// iteration limit is reached, the best iterate seen is polished, then
// every change of a single contact's mode is tried.
//
// A solve that does not reach set.Tolerance within set.MaxIterations returns
// a *SolveError; lambda then holds the best iterate.
func (s *Solver) Solve(p *Problem, set SolverSettings, lambda []float64) (SolveStats, error) {
	set = set.WithDefaults()
	s.solved, s.jacReady = false, false
	if err := s.load(p, len(lambda)); err != nil {
		return SolveStats{}, err
	}
	if set.Smoothing < 0 || math.IsNaN(set.Smoothing) {
		return SolveStats{}, fmt.Errorf("contact: smoothing %v, want κ ≥ 0", set.Smoothing)
	}
	s.kappa = set.Smoothing
	s.tolRatio = set.Tolerance / set.VelocityTolerance
	var stats SolveStats
	if s.n == 0 {
		s.solved = true
		return stats, nil
	}
	s.factors = 0
	for i := range s.kindA {
		s.kindA[i], s.kindP[i] = -1, -1 // no attempt yet
	}
	s.initialPoint(1, 1)
	lastPolish := math.Inf(1)              // stopping residual at the last polishing attempt
	progress, progressIt := math.Inf(1), 0 // for stall detection
	bestRes := math.Inf(1)                 // stopping residual of the best iterate, kept in lamB, yB, betaB
	restarts := 0
	for it := 0; ; it++ {
		natural, velocity, relaxed, gap := s.evaluate()
		stats.Iterations, stats.Complementarity, stats.Gap = it, natural, gap
		stats.Factorizations = s.factors
		stats.VelocityResidual = velocity
		// With κ = 0 the interior-point pairs themselves must also be
		// complementary (relaxed residual at target 0), so that the final
		// iterate (λ, y, β) is a solution of the lifted problem, which the
		// derivatives need.
		stats.Residual = math.Max(natural, relaxed)
		if s.kappa > 0 {
			stats.Residual = relaxed
		}
		if stats.Residual <= set.Tolerance && (s.kappa > 0 || velocity <= set.VelocityTolerance) {
			copy(lambda, s.lam)
			s.solved = true
			return stats, nil
		}
		// The stopping residual with the velocity one brought to the same
		// footing (see trialResidual).
		current := stats.Residual
		if s.kappa == 0 {
			current = math.Max(current, velocity*s.tolRatio)
		}
		if current < bestRes {
			bestRes = current
			copy(s.lamB, s.lam)
			copy(s.yB, s.y)
			copy(s.betaB, s.beta)
		}
		// Polish as soon as the iterate is roughly converged, then whenever
		// the modes read off it change and have held for two iterations
		// (an attempt costs about one iteration and usually saves several),
		// and once close whenever the iterate has come another two orders
		// of magnitude closer.
		if s.kappa == 0 && current <= polishEarly {
			s.classify()
			stable := slices.Equal(s.kind, s.kindP) || math.IsInf(lastPolish, 1)
			copy(s.kindP, s.kind)
			if (stable && !slices.Equal(s.kind, s.kindA)) || (current <= polishStart && current <= 0.01*lastPolish) {
				copy(s.kindA, s.kind)
				lastPolish = current
				// One active-set correction: cheap, and often all an early
				// reading of the modes needs.
				if ok, nat, vel := s.polish(set.Tolerance, set.VelocityTolerance, 1); ok {
					return s.finishPolished(set, &stats, lambda, nat, vel)
				}
			}
		}
		if current < 0.5*progress {
			progress, progressIt = current, it
		}
		stalled := it-progressIt >= stallIterations || math.IsNaN(current)
		if stalled && restarts < len(restartScales) && set.MaxIterations-it >= restartBudget {
			// Stalled: the central path from this start turned back
			// (Coulomb friction is not monotone) or was lost. Try the modes
			// read off the stalled iterate, then start again from a
			// differently balanced point, whose path may avoid the fold.
			if s.kappa == 0 && !math.IsNaN(current) && current < lastPolish {
				if ok, nat, vel := s.polish(set.Tolerance, set.VelocityTolerance, polishRounds); ok {
					return s.finishPolished(set, &stats, lambda, nat, vel)
				}
			}
			sc := restartScales[restarts]
			restarts++
			stats.Restarts = restarts
			s.initialPoint(sc[0], sc[1])
			progress, progressIt, lastPolish = math.Inf(1), it, math.Inf(1)
			continue
		}
		if it >= set.MaxIterations || (math.IsNaN(current) && restarts == len(restartScales)) {
			reason := "iteration limit reached"
			if math.IsNaN(current) {
				reason = "iterate became NaN"
			}
			if !math.IsInf(bestRes, 1) && !(bestRes >= current) {
				// Fall back to the best iterate seen.
				copy(s.lam, s.lamB)
				copy(s.y, s.yB)
				copy(s.beta, s.betaB)
				natural, velocity, relaxed, stats.Gap = s.evaluate()
				stats.Complementarity, stats.VelocityResidual = natural, velocity
				stats.Residual = math.Max(natural, relaxed)
				if s.kappa > 0 {
					stats.Residual = relaxed
				}
			}
			if s.kappa == 0 && !math.IsInf(bestRes, 1) {
				// Last resorts: the modes read off the best iterate with
				// active-set corrections, then every single change of one
				// contact's or row's mode.
				if ok, nat, vel := s.polish(set.Tolerance, set.VelocityTolerance, polishRounds); ok {
					return s.finishPolished(set, &stats, lambda, nat, vel)
				}
				if ok, nat, vel := s.polishNeighbours(set.Tolerance, set.VelocityTolerance); ok {
					return s.finishPolished(set, &stats, lambda, nat, vel)
				}
			}
			copy(lambda, s.lam)
			stats.Factorizations = s.factors
			return stats, &SolveError{Iterations: it, Residual: stats.Residual, Tolerance: set.Tolerance,
				VelocityResidual: stats.VelocityResidual, VelocityTolerance: set.VelocityTolerance, Reason: reason}
		}
		alpha := s.iterate(gap, true)
		if alpha < shortStep {
			// A short step: also try the Nesterov–Todd direction and a
			// damped centring step, and keep the candidate whose trial
			// point has the smallest stopping residual; if none improves
			// on the current one, the longest step.
			current := stats.Residual
			if s.kappa == 0 {
				current = math.Max(current, velocity*s.tolRatio)
			}
			best, bestAlpha := s.trialResidual(alpha), alpha
			s.keepCandidate()
			if a := s.iterate(gap, false); a > 0 {
				if r := s.trialResidual(a); better(r, a, best, bestAlpha, current) {
					best, bestAlpha = r, a
					s.keepCandidate()
				}
			}
			if a := s.centre(gap); a > 0 {
				if r := s.trialResidual(a); better(r, a, best, bestAlpha, current) {
					bestAlpha = a
					s.keepCandidate()
				}
			}
			alpha = bestAlpha
			copy(s.dlam, s.dlamK)
			copy(s.dy, s.dyK)
			copy(s.dbeta, s.dbetaK)
		}
		stats.Regularized += s.regularized
		s.regularized = 0
		for i := range s.lam {
			s.lam[i] += alpha * s.dlam[i]
			s.y[i] += alpha * s.dy[i]
		}
		for c := range s.beta {
			s.beta[c] += alpha * s.dbeta[c]
		}
	}
}

// finishPolished ends a solve with the polished solution (s.lamP, s.uP)
// of natural and velocity residuals nat and vel.
func (s *Solver) finishPolished(set SolverSettings, stats *SolveStats, lambda []float64, nat, vel float64) (SolveStats, error) {
	copy(lambda, s.lamP)
	copy(s.u, s.uP)
	stats.Residual, stats.Complementarity, stats.VelocityResidual = nat, nat, vel
	stats.Gap = s.exactGap(s.lamP, s.uP)
	stats.Polished = true
	stats.Factorizations = s.factors
	s.centralPoint(polishDelta)
	s.solved = true
	return *stats, nil
}

// trialResidual returns the stopping residual at the point a step alpha
// along (s.dlam, s.dy, s.dbeta), leaving the iterate unchanged.
func (s *Solver) trialResidual(alpha float64) float64 {
	for i := range s.n {
		s.lamT[i] = s.lam[i] + alpha*s.dlam[i]
		s.yT[i] = s.y[i] + alpha*s.dy[i]
	}
	for c := range s.nc {
		s.betaT[c] = s.beta[c] + alpha*s.dbeta[c]
	}
	natural, velocity, relaxed, _ := s.evaluateAt(s.lamT, s.yT, s.betaT, s.uT, s.rpT)
	if s.kappa > 0 {
		return relaxed
	}
	// Both stopping measures, the velocity one brought to the same footing.
	return math.Max(math.Max(natural, relaxed), velocity*s.tolRatio)
}

// keepCandidate saves the current direction as the best so far.
func (s *Solver) keepCandidate() {
	copy(s.dlamK, s.dlam)
	copy(s.dyK, s.dy)
	copy(s.dbetaK, s.dbeta)
}

// better reports whether a candidate with trial residual r and step a beats
// the best so far (rb, ab): a lower residual when it improves on the
// current one, otherwise a longer step.
func better(r, a, rb, ab, current float64) bool {
	if r < current || rb < current {
		return r < rb
	}
	return a > ab
}

// stallIterations is the number of iterations without halving the
// stopping residual after which a solve is deemed stalled and restarted.
const stallIterations = 6

// restartBudget is the least number of iterations left for a restart to be
// worth it.
const restartBudget = 10

// restartScales are the multipliers of the initial impulses and velocities
// (see initialPoint) of successive restarts.
var restartScales = [...][2]float64{{0.1, 1}, {10, 1}, {1, 10}, {1, 0.1}}

// shortStep is the step length below which a predictor–corrector step is
// deemed to have failed and the fallbacks are tried.
const shortStep = 0.3

// iterate computes the predictor–corrector direction into s.dlam, s.dy,
// s.dbeta using the AHO direction (Newton on ξ∘η = τe) if aho is set, else
// the Nesterov–Todd direction, and returns the step length.
//
// AHO is exact Newton on the relaxed conditions and stays accurate near the
// end, where the sliding contacts' slip directions must align to many
// digits (the Nesterov–Todd iterates drift off the central path there, and
// the alignment error then decays only like √gap). Nesterov–Todd is the
// fallback when AHO gives a short step.
func (s *Solver) iterate(gap float64, aho bool) (alpha float64) {
	s.aho = aho
	if !s.factorNewton() {
		s.regularized++
	}
	// Predictor: the affine-scaling direction (τ = 0).
	s.direction(0, false, s.dlamA, s.dyA, s.dbetaA)
	alphaA := math.Min(1, s.maxStep(s.dlamA, s.dyA, s.dbetaA))
	gapA := s.gapAt(alphaA, s.dlamA, s.dyA, s.dbetaA)
	sigma := math.Pow(gapA/gap, 3)
	sigma = math.Max(0, math.Min(1, sigma))
	tau := sigma * gap / float64(s.numPairs())

	// Corrector: centring towards τ plus Mehrotra's second-order term. Once
	// τ reaches the smoothing target κ the step is pure Newton on the
	// relaxed conditions: the second-order term, built from the affine
	// direction towards τ = 0, would not vanish at their solution.
	s.direction(math.Max(tau, s.kappa), tau > s.kappa, s.dlam, s.dy, s.dbeta)
	return math.Min(1, 0.99*s.maxStep(s.dlam, s.dy, s.dbeta))
}

// centre computes a damped Newton step towards the central point of the
// current average gap τ̄ (AHO direction, no corrector) and returns its
// length. The step is backtracked until the residual of the relaxed
// conditions at τ̄ decreases, which Newton's direction guarantees for short
// enough steps; this globalizes the iteration on the non-monotone problem.
func (s *Solver) centre(gap float64) float64 {
	s.aho = true
	if !s.factorNewton() {
		s.regularized++
	}
	tau := math.Max(gap/float64(s.numPairs()), s.kappa)
	s.direction(tau, false, s.dlam, s.dy, s.dbeta)
	alpha := math.Min(1, 0.99*s.maxStep(s.dlam, s.dy, s.dbeta))
	f0 := s.meritAt(0, tau)
	for range 30 {
		if s.meritAt(alpha, tau) <= (1-1e-4*alpha)*f0 {
			break
		}
		alpha /= 2
	}
	return alpha
}

// meritAt returns the squared scaled residual of the relaxed conditions with
// target tau at the point a step alpha along (s.dlam, s.dy, s.dbeta).
func (s *Solver) meritAt(alpha, tau float64) float64 {
	sU, sC := s.scaleU, s.scaleL*s.scaleU
	f := 0.0
	// y − Wλ − B is linear along the direction: it scales by 1 − alpha.
	for i := range s.n {
		r := (1 - alpha) * s.rp[i] / sU
		f += r * r
	}
	for c := range s.nc {
		i := 3 * c
		r := ((s.lam[i]+alpha*s.dlam[i])*(s.y[i]+alpha*s.dy[i]) - tau) / sC
		f += r * r
		if m := s.mu[c]; m > 0 {
			xi, eta := s.cone(c)
			for k := range 3 {
				xi[k] += alpha * s.dlam[i+k]
			}
			xi[0] += alpha * (m - 1) * s.dlam[i]
			eta[0] += alpha * s.dbeta[c]
			eta[1] += alpha * s.dy[i+1]
			eta[2] += alpha * s.dy[i+2]
			p := socJordan(xi, eta)
			p[0] -= tau
			f += (p[0]*p[0] + p[1]*p[1] + p[2]*p[2]) / (sC * sC)
		}
	}
	for i := 3 * s.nc; i < s.n; i++ {
		r := ((s.lam[i]+alpha*s.dlam[i])*(s.y[i]+alpha*s.dy[i]) - tau) / sC
		f += r * r
	}
	return f
}

// numPairs returns the number of complementarity pairs.
func (s *Solver) numPairs() int {
	np := s.n - 3*s.nc + s.nc
	for _, m := range s.mu[:s.nc] {
		if m > 0 {
			np++
		}
	}
	return np
}

// initialPoint sets an interior starting point of the scale of the problem.
func (s *Solver) initialPoint(lMul, yMul float64) {
	n := s.n
	bmax, wmax := 0.0, 0.0
	for i := range n {
		bmax = math.Max(bmax, math.Abs(s.b[i]))
		wmax = math.Max(wmax, s.wd[i*n+i])
	}
	if wmax == 0 {
		wmax = 1
	}
	s.scaleU = math.Max(1, bmax)
	s.scaleL = math.Max(1, bmax/wmax)
	s.rho = 1 / wmax
	yScale := bmax
	if yScale == 0 {
		yScale = math.Max(math.Sqrt(s.kappa), 1e-8)
	}
	lScale := yScale / wmax * lMul
	yScale *= yMul
	for i := range n {
		s.lam[i], s.y[i] = lScale, yScale
	}
	for c := range s.nc {
		i := 3 * c
		s.lam[i+1], s.lam[i+2] = 0, 0
		s.y[i+1], s.y[i+2] = 0, 0
		// Balance ξᵀη = μ λn β with the normal pair's λn yn.
		s.beta[c] = yScale / math.Max(s.mu[c], 1e-3)
	}
}

// evaluate computes u = W λ + B and rp = y − u and returns the natural
// residual of the exact conditions, the velocity residual, the residual of
// the relaxed conditions (target κ) and the complementarity gap.
//
// The natural residual is the definition of the problem: cone violations of
// λ and ũ and |λᵀũ| per contact. Products alone are weak when impulses are
// small (a sticking contact with λ ≈ 0.02 N s and ut ≈ 1e-8 m/s has
// λᵀũ ≈ 1e-11), so the velocity residual is the natural map ‖λ − Π_K(λ − ρ ũ)‖∞/ρ with ρ = 1/W_ii of the contact's
// normal row (the velocity a unit impulse gives the contact itself), which
// vanishes exactly at solutions and reads in velocity units.
func (s *Solver) evaluate() (natural, velocity, relaxed, gap float64) {
	return s.evaluateAt(s.lam, s.y, s.beta, s.u, s.rp)
}

// evaluateAt is evaluate at the point (lam, y, beta), writing u and rp into
// the given slices.
func (s *Solver) evaluateAt(lam, y, beta, uOut, rpOut []float64) (natural, velocity, relaxed, gap float64) {
	n := s.n
	s.velocityAt(lam, uOut)
	natural, velocity = s.naturalAt(lam, uOut)
	sU, sC := s.scaleU, s.scaleL*s.scaleU
	k := s.kappa
	for i := range n {
		rpOut[i] = y[i] - uOut[i]
		relaxed = math.Max(relaxed, math.Abs(rpOut[i])/sU)
	}
	for c := range s.nc {
		i := 3 * c
		pn := lam[i] * y[i]
		gap += pn
		relaxed = math.Max(relaxed, math.Abs(pn-k)/sC)
		if m := s.mu[c]; m > 0 {
			xi, eta := soc3{m * lam[i], lam[i+1], lam[i+2]}, soc3{beta[c], y[i+1], y[i+2]}
			p := socJordan(xi, eta)
			gap += p[0]
			relaxed = math.Max(relaxed, math.Max(math.Abs(p[0]-k), math.Max(math.Abs(p[1]), math.Abs(p[2])))/sC)
		}
	}
	for i := 3 * s.nc; i < n; i++ {
		p := lam[i] * y[i]
		gap += p
		relaxed = math.Max(relaxed, math.Abs(p-k)/sC)
	}
	return natural, velocity, relaxed, gap
}

// velocityAt writes u = W λ + B into u.
func (s *Solver) velocityAt(lam, u []float64) {
	n := s.n
	copy(u, s.b)
	blas64.Gemv(blas.NoTrans, 1, s.general(s.wd), blas64.Vector{N: n, Data: lam, Inc: 1}, 1, blas64.Vector{N: n, Data: u, Inc: 1})
}

// naturalAt returns the natural and velocity residuals (see evaluate) of
// the impulses lam with velocities u = W λ + B: they measure the exact
// conditions only, whatever the interior-point variables y and β.
func (s *Solver) naturalAt(lam, u []float64) (natural, velocity float64) {
	sL, sU := s.scaleL, s.scaleU
	sC := sL * sU
	for c := range s.nc {
		i := 3 * c
		ln, lt1, lt2 := lam[i], lam[i+1], lam[i+2]
		un, ut1, ut2 := u[i], u[i+1], u[i+2]
		m := s.mu[c]
		nlt, nut := math.Hypot(lt1, lt2), math.Hypot(ut1, ut2)
		natural = math.Max(natural, math.Max(0, nlt-m*ln)/sL)
		natural = math.Max(natural, math.Max(0, -ln)/sL)
		natural = math.Max(natural, math.Max(0, -un)/sU)
		natural = math.Max(natural, math.Abs(ln*un+m*ln*nut+lt1*ut1+lt2*ut2)/sC)
		rho := s.rowRho(i)
		x := soc3{ln - rho*(un+m*nut), lt1 - rho*ut1, lt2 - rho*ut2}
		pr := projectCoulomb(m, x)
		for r := range 3 {
			velocity = math.Max(velocity, math.Abs(lam[i+r]-pr[r])/(rho*sU))
		}
	}
	for i := 3 * s.nc; i < s.n; i++ {
		l, ui := lam[i], u[i]
		natural = math.Max(natural, math.Max(0, -l)/sL)
		natural = math.Max(natural, math.Max(0, -ui)/sU)
		natural = math.Max(natural, math.Abs(l*ui)/sC)
		velocity = math.Max(velocity, math.Abs(math.Min(l/s.rowRho(i), ui))/sU)
	}
	return natural, velocity
}

// rowRho returns 1/W_ii, or 1/max W_ii for a zero diagonal.
func (s *Solver) rowRho(i int) float64 {
	if d := s.wd[i*s.n+i]; d > 0 {
		return 1 / d
	}
	return s.rho
}

// projectCoulomb returns the Euclidean projection of x = (xn, xt) onto the
// Coulomb cone K_μ = {‖xt‖ ≤ μ xn}.
func projectCoulomb(mu float64, x soc3) soc3 {
	nt := math.Hypot(x[1], x[2])
	switch {
	case nt <= mu*x[0] && x[0] >= 0:
		// The x0 ≥ 0 test matters for μ = 0 and xt = 0, where K_0 is the
		// ray x0 ≥ 0 and nt ≤ μ x0 holds for every x0.
		return x
	case mu*nt <= -x[0]:
		// x lies in the polar cone −K_{1/μ}.
		return soc3{}
	}
	// Project onto the boundary ray through (1, μ xt/‖xt‖).
	t := (x[0] + mu*nt) / (1 + mu*mu)
	return soc3{t, mu * t * x[1] / nt, mu * t * x[2] / nt}
}

// cone returns the Lorentz pair (ξ, η) = ((μλn, λt), (β, yt)) of contact c.
func (s *Solver) cone(c int) (xi, eta soc3) {
	i := 3 * c
	return soc3{s.mu[c] * s.lam[i], s.lam[i+1], s.lam[i+2]}, soc3{s.beta[c], s.y[i+1], s.y[i+2]}
}

func (s *Solver) general(data []float64) blas64.General {
	return blas64.General{Rows: s.n, Cols: s.n, Stride: s.n, Data: data}
}

// factorNewton computes the Nesterov–Todd scalings, assembles the reduced
// Newton matrix W + K into s.m and factors it. It reports false when a
// regularizing diagonal shift was needed.
//
// Eliminating dy = W dλ − rp and dβ from the linearized conditions gives,
// per row,
//
//	scalar pair (normal or unilateral): (W dλ)_i + (y_i/λ_i) dλ_i = …,
//	tangent rows of a contact:          (W dλ)_t + (H D dλc)_t = …,
//
// with H = Ws² the Nesterov–Todd block of the pair (ξ, η), D = diag(μ, 1, 1)
// and dλc the contact's three rows. Tangent rows of frictionless contacts
// are replaced by dλt = 0.
func (s *Solver) factorNewton() bool {
	s.factors++
	for c := range s.nc {
		if s.mu[c] > 0 {
			xi, eta := s.cone(c)
			if s.aho {
				s.nt[c].h = arwCoupling(xi, eta)
			} else {
				s.nt[c].set(xi, eta)
			}
		}
	}
	copy(s.m, s.wd)
	s.addBarrier(s.m, func(c int) *[3][3]float64 { return &s.nt[c].h })
	if lapack64.Getrf(s.general(s.m), s.piv) {
		return true
	}
	// Numerically singular: shift the diagonal slightly and refactor. The
	// direction is then an inexact Newton direction; convergence is still
	// judged on the unperturbed residuals.
	n := s.n
	wmax := 0.0
	for i := range n {
		wmax = math.Max(wmax, s.wd[i*n+i])
	}
	copy(s.m, s.wd)
	s.addBarrier(s.m, func(c int) *[3][3]float64 { return &s.nt[c].h })
	shift := 1e-13 * math.Max(wmax, 1e-300)
	for i := range n {
		s.m[i*n+i] += shift
	}
	lapack64.Getrf(s.general(s.m), s.piv)
	return false
}

// addBarrier adds the block-diagonal K to the row-major n×n matrix a (which
// holds W), taking the tangent-row coupling of contact c from h(c).
func (s *Solver) addBarrier(a []float64, h func(c int) *[3][3]float64) {
	n := s.n
	for c := range s.nc {
		i := 3 * c
		a[i*n+i] += s.y[i] / s.lam[i]
		if m := s.mu[c]; m > 0 {
			hc := h(c)
			for r := 1; r < 3; r++ {
				row := a[(i+r)*n:]
				row[i] += m * hc[r][0]
				row[i+1] += hc[r][1]
				row[i+2] += hc[r][2]
			}
		} else {
			for r := 1; r < 3; r++ {
				row := a[(i+r)*n : (i+r+1)*n]
				clear(row)
				row[i+r] = 1
			}
		}
	}
	for i := 3 * s.nc; i < n; i++ {
		a[i*n+i] += s.y[i] / s.lam[i]
	}
}

// direction solves the Newton system with centring target tau, adding
// Mehrotra's second-order correction from the affine direction when corr is
// set, and writes the direction into dlam, dy, dbeta.
func (s *Solver) direction(tau float64, corr bool, dlam, dy, dbeta []float64) {
	n := s.n
	rhs := s.rhs
	for c := range s.nc {
		i := 3 * c
		rc := tau - s.lam[i]*s.y[i]
		if corr {
			rc -= s.dlamA[i] * s.dyA[i]
		}
		rhs[i] = s.rp[i] + rc/s.lam[i]
		m := s.mu[c]
		if m == 0 {
			rhs[i+1], rhs[i+2] = 0, 0
			continue
		}
		nt := &s.nt[c]
		var wq soc3
		if s.aho {
			// Newton on ξ∘η = τ e: Arw(η) dξ + Arw(ξ) dη = τe − ξ∘η − dξa∘dηa.
			xi, eta := s.cone(c)
			p := socJordan(xi, eta)
			r := soc3{tau - p[0], -p[1], -p[2]}
			if corr {
				sec := socJordan(soc3{m * s.dlamA[i], s.dlamA[i+1], s.dlamA[i+2]}, soc3{s.dbetaA[c], s.dyA[i+1], s.dyA[i+2]})
				r[0] -= sec[0]
				r[1] -= sec[1]
				r[2] -= sec[2]
			}
			wq = socArwSolve(xi, r)
		} else {
			v := nt.v
			vv := socJordan(v, v)
			r := soc3{tau - vv[0], -vv[1], -vv[2]}
			if corr {
				dxi := mul3(&nt.w, soc3{m * s.dlamA[i], s.dlamA[i+1], s.dlamA[i+2]})
				deta := mul3(&nt.winv, soc3{s.dbetaA[c], s.dyA[i+1], s.dyA[i+2]})
				sec := socJordan(dxi, deta)
				r[0] -= sec[0]
				r[1] -= sec[1]
				r[2] -= sec[2]
			}
			wq = mul3(&nt.w, socArwSolve(v, r))
		}
		rhs[i+1] = s.rp[i+1] + wq[1]
		rhs[i+2] = s.rp[i+2] + wq[2]
		s.wq0[c] = wq[0]
	}
	for i := 3 * s.nc; i < n; i++ {
		rc := tau - s.lam[i]*s.y[i]
		if corr {
			rc -= s.dlamA[i] * s.dyA[i]
		}
		rhs[i] = s.rp[i] + rc/s.lam[i]
	}
	copy(dlam, rhs)
	luSolve(s.m, n, s.piv, dlam)
	// dy from the feasibility equation keeps y − W λ − B exactly linear.
	for i := range n {
		dy[i] = -s.rp[i]
	}
	blas64.Gemv(blas.NoTrans, 1, s.general(s.wd), blas64.Vector{N: n, Data: dlam, Inc: 1}, 1, blas64.Vector{N: n, Data: dy, Inc: 1})
	for c := range s.nc {
		m := s.mu[c]
		if m == 0 {
			dbeta[c] = 0
			continue
		}
		i := 3 * c
		h := &s.nt[c].h
		dbeta[c] = s.wq0[c] - (h[0][0]*m*dlam[i] + h[0][1]*dlam[i+1] + h[0][2]*dlam[i+2])
	}
}

// maxStep returns the largest step keeping every pair in its cone.
func (s *Solver) maxStep(dlam, dy, dbeta []float64) float64 {
	alpha := math.Inf(1)
	for c := range s.nc {
		i := 3 * c
		alpha = math.Min(alpha, scalarStep(s.lam[i], dlam[i]))
		alpha = math.Min(alpha, scalarStep(s.y[i], dy[i]))
		if m := s.mu[c]; m > 0 {
			xi, eta := s.cone(c)
			alpha = math.Min(alpha, socStep(xi, soc3{m * dlam[i], dlam[i+1], dlam[i+2]}))
			alpha = math.Min(alpha, socStep(eta, soc3{dbeta[c], dy[i+1], dy[i+2]}))
		}
	}
	for i := 3 * s.nc; i < s.n; i++ {
		alpha = math.Min(alpha, scalarStep(s.lam[i], dlam[i]))
		alpha = math.Min(alpha, scalarStep(s.y[i], dy[i]))
	}
	return alpha
}

// gapAt returns the complementarity gap at the point reached by a step
// alpha along the given direction.
func (s *Solver) gapAt(alpha float64, dlam, dy, dbeta []float64) float64 {
	gap := 0.0
	for c := range s.nc {
		i := 3 * c
		gap += (s.lam[i] + alpha*dlam[i]) * (s.y[i] + alpha*dy[i])
		if m := s.mu[c]; m > 0 {
			gap += m * (s.lam[i] + alpha*dlam[i]) * (s.beta[c] + alpha*dbeta[c])
			for r := 1; r < 3; r++ {
				gap += (s.lam[i+r] + alpha*dlam[i+r]) * (s.y[i+r] + alpha*dy[i+r])
			}
		}
	}
	for i := 3 * s.nc; i < s.n; i++ {
		gap += (s.lam[i] + alpha*dlam[i]) * (s.y[i] + alpha*dy[i])
	}
	return gap
}

// Velocity writes u = W λ + B of the last solve into dst (len(dst) = the
// number of rows).
func (s *Solver) Velocity(dst []float64) {
	copy(dst, s.u[:s.n])
}

// SlipBound writes the per-contact slip-rate bounds β of the last solve into
// dst (len(dst) = NumCones): β = ‖ut‖ for sliding contacts, β ≈ 0 for
// sticking ones.
func (s *Solver) SlipBound(dst []float64) {
	copy(dst, s.beta[:s.nc])
}
