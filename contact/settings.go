package contact

// SolverSettings tune the per-step interior-point solve. The zero value
// selects the defaults documented on each field.
type SolverSettings struct {
	// Tolerance on the complementarity and feasibility residuals
	// (default 1e-10). The residuals are absolute for problems with
	// ‖B‖∞ ≤ 1 and max W_ii ≥ ‖B‖∞, and scaled beyond (see Solver.Solve).
	Tolerance float64
	// VelocityTolerance bounds the natural-map residual
	// ‖λ − Π_K(λ − ρ ũ)‖∞/ρ (m/s), which catches velocity errors the
	// products miss when impulses are small (default 1e-9). It is relative
	// to the problem's velocity scale: the residual is divided by
	// max(1, ‖B‖∞), so the bound is max(1e-9, 1e-9·‖B‖∞) m/s; a fast impact
	// is not asked for more digits than double precision gives W λ + B.
	// Polished solutions (see Solver.Solve) usually reach about 1e-14.
	VelocityTolerance float64
	// MaxIterations bounds the interior-point iterations (default 60).
	MaxIterations int
	// Smoothing is the relaxed-complementarity parameter κ (impulse times
	// velocity) at which the solve stops: λ∘y = κ e instead of 0. Zero asks for the exact solution
	// to Tolerance; larger values give smooth gradients through
	// touch-down and stick/slip (default 0).
	Smoothing float64
}

// WithDefaults returns s with zero fields replaced by their defaults.
func (s SolverSettings) WithDefaults() SolverSettings {
	if s.Tolerance == 0 {
		s.Tolerance = 1e-10
	}
	if s.VelocityTolerance == 0 {
		s.VelocityTolerance = 1e-9
	}
	if s.MaxIterations == 0 {
		s.MaxIterations = 60
	}
	return s
}
