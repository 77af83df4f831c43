package sim

import (
	"math"
	"math/rand/v2"
	"testing"

	"stickslip/contact"

	"gonum.org/v1/gonum/mat"
)

// rolloutProblems returns the contact problems of the gradient benchmark's
// rollout (the dragged four-box stack) at smoothing kappa.
func rolloutProblems(t testing.TB, kappa float64) []contact.Problem {
	t.Helper()
	m, _ := gradScene()
	s := mustSim(t, m, Settings{Solver: contact.SolverSettings{Smoothing: kappa}})
	var out []contact.Problem
	for k := 0; k < gradSteps; k++ {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		if len(s.contacts)+len(s.limits) == 0 {
			continue
		}
		n := len(s.prob.B)
		w := mat.NewSymDense(n, nil)
		w.CopySym(s.prob.W)
		out = append(out, contact.Problem{W: w, B: append([]float64(nil), s.prob.B...), Mu: append([]float64(nil), s.prob.Mu...), NumCones: s.prob.NumCones})
	}
	return out
}

// TestUnrolledMatchesImplicit checks the benchmark's baseline: on the
// rollout's contact problems (κ = 1e-6) its solution equals the solver's
// and its unrolled gradient equals the implicit one, the derivative of the
// same solution map (implicit function theorem), to the accuracy that the
// iteration count and the constant step lengths of the backward pass allow.
func TestUnrolledMatchesImplicit(t *testing.T) {
	const kappa = 1e-6
	probs := rolloutProblems(t, kappa)
	if len(probs) < 50 {
		t.Fatalf("only %d contact problems", len(probs))
	}
	rng := rand.New(rand.NewPCG(5, 6))
	worstL, worstG := 0.0, 0.0
	for pi, p := range probs {
		if pi%7 != 0 {
			continue
		}
		n, nc := len(p.B), p.NumCones
		sol := contact.NewSolver()
		lam := make([]float64, n)
		if _, err := sol.Solve(&p, contact.SolverSettings{Smoothing: kappa, Tolerance: 1e-13}, lam); err != nil {
			t.Fatal(err)
		}
		u := newUnrolled(p.W, p.B, p.Mu, kappa)
		u.solve()
		scale := 0.0
		for _, x := range lam {
			scale = math.Max(scale, math.Abs(x))
		}
		for i := range lam {
			worstL = math.Max(worstL, math.Abs(u.lam[i]-lam[i])/scale)
		}
		lbar := make([]float64, n)
		for i := range lbar {
			lbar[i] = rng.NormFloat64()
		}
		wantB, wantMu := make([]float64, n), make([]float64, nc)
		if err := sol.VJP(wantB, wantMu, lbar); err != nil {
			t.Fatal(err)
		}
		gotB, gotMu := make([]float64, n), make([]float64, nc)
		u.vjp(lbar, gotB, gotMu)
		var num, den float64
		for i := range gotB {
			num += (gotB[i] - wantB[i]) * (gotB[i] - wantB[i])
			den += wantB[i] * wantB[i]
		}
		for c := range gotMu {
			num += (gotMu[c] - wantMu[c]) * (gotMu[c] - wantMu[c])
			den += wantMu[c] * wantMu[c]
		}
		worstG = math.Max(worstG, math.Sqrt(num/den))
	}
	t.Logf("worst relative difference: impulses %.2e, gradients %.2e", worstL, worstG)
	if worstL > 1e-6 {
		t.Errorf("baseline impulses differ from the solver's by %.2e (relative)", worstL)
	}
	if worstG > 1e-4 {
		t.Errorf("unrolled gradients differ from the implicit ones by %.2e (relative)", worstG)
	}
}

// BenchmarkContactDerivative differentiates every contact solve of the
// gradient benchmark's rollout (κ = 1e-6) in one run, per op: implicitly
// (the compact record and one VJP that assembles and factors W + K; or
// with the factors kept), and by unrolling the baseline interior-point
// iterations (its backward pass over the tape). The solves themselves are
// done before the timer starts; they are timed in Solve and UnrolledSolve.
// The rest of a reverse sweep (dynamics, geometry) is the same for both.
func BenchmarkContactDerivative(b *testing.B) {
	const kappa = 1e-6
	probs := rolloutProblems(b, kappa)
	set := contact.SolverSettings{Smoothing: kappa}
	lbars := make([][]float64, len(probs))
	for i, p := range probs {
		lbars[i] = make([]float64, len(p.B))
		for j := range lbars[i] {
			lbars[i][j] = math.Sin(float64(3*i + j))
		}
	}
	solved := func(b *testing.B) []*contact.Solver {
		out := make([]*contact.Solver, len(probs))
		for i := range probs {
			out[i] = contact.NewSolver()
			if _, err := out[i].Solve(&probs[i], set, make([]float64, len(probs[i].B))); err != nil {
				b.Fatal(err)
			}
		}
		return out
	}
	b.Run("Solve", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			solved(b)
		}
	})
	b.Run("UnrolledSolve", func(b *testing.B) {
		iters := 0
		for i := 0; i < b.N; i++ {
			iters = 0
			for _, p := range probs {
				u := newUnrolled(p.W, p.B, p.Mu, kappa)
				u.solve()
				iters += len(u.tape)
			}
		}
		b.ReportMetric(float64(iters)/float64(len(probs)), "iters/solve")
	})
	for _, keep := range []bool{false, true} {
		name := "Implicit"
		if keep {
			name += "KeepFactors"
		}
		b.Run(name, func(b *testing.B) {
			sols := solved(b)
			recs := make([]contact.Sensitivity, len(probs))
			bytes := 0
			for i := 0; i < b.N; i++ {
				bytes = 0
				for j, p := range probs {
					if err := sols[j].Record(&recs[j], keep); err != nil {
						b.Fatal(err)
					}
					bb, mb := make([]float64, len(p.B)), make([]float64, p.NumCones)
					if err := recs[j].VJP(p.W, bb, mb, lbars[j]); err != nil {
						b.Fatal(err)
					}
					bytes += recs[j].Bytes()
				}
			}
			b.ReportMetric(float64(bytes)/float64(len(probs)), "tape-B/solve")
		})
	}
	b.Run("Unrolled", func(b *testing.B) {
		us := make([]*unrolledSolve, len(probs))
		bytes := 0
		for j, p := range probs {
			us[j] = newUnrolled(p.W, p.B, p.Mu, kappa)
			us[j].solve()
			bytes += us[j].tapeBytes()
		}
		b.ResetTimer()
		for i := 0; i < b.N; i++ {
			for j, p := range probs {
				bb, mb := make([]float64, len(p.B)), make([]float64, p.NumCones)
				us[j].vjp(lbars[j], bb, mb)
			}
		}
		b.ReportMetric(float64(bytes)/float64(len(probs)), "tape-B/solve")
	})
}
