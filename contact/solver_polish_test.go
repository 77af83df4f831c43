package contact

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/diff/fd"

	"gonum.org/v1/gonum/mat"
)

// inclineTin is the contact problem of a 1 kg box (0.2 × 0.1 × 0.3 m) sliding
// down a plane with tan θ = 0.3, μ = 0.2, at h = 1 ms, as the simulator
// assembled it at t = 0.818 s: four corner contacts of one rigid body
// (W 12×12 of rank 6), all sliding. The interior-point iteration alone
// stalled on it at a velocity residual of 3e-9 m/s.
var inclineTin = struct {
	mu, b []float64
	w     []float64 // upper triangle, row by row
}{
	mu: []float64{0.20000000000000001, 0.20000000000000001, 0.20000000000000001, 0.20000000000000001},
	b:  []float64{-0.0093930671396431908, -2.930645667126072e-15, -0.77023150565263787, -0.0093930671396429966, -2.9306456671380359e-15, -0.77023150565269716, -0.0093930671259522258, 2.6760794611520824e-14, -0.77023150565263787, -0.0093930671259103982, 2.6760794611508859e-14, -0.77023150565269716},
	w: []float64{
		2.2230769230763787, -1.3846153846159306, -0.89999999999854863, 0.37692307692253135, -1.3846153846159308, -0.89999999999944169, 1.6230769230769235, -1.3846153846153451, -0.89999999999845781, -0.22307692307692339, -1.3846153846153446, -0.89999999999935065,
		3.6769230769225976, -1.1999999999990956, 1.384615384615568, 3.6769230769230821, 1.1999999999991049, -1.384615384615568, 2.4769230769232888, -1.1999999999988538, 1.3846153846159306, 2.476923076923772, 1.1999999999993467,
		6.1000000000010459, -0.89999999999999991, -1.200000000000063, 1.3000000000005394, 0.90000000000163505, 1.2000000000011577, 6.1000000000002892, 0.90000000000018399, 1.2000000000001902, 1.2999999999997822,
		2.2230769230763787, 1.384615384615568, -0.89999999999910729, -0.22307692307692362, 1.3846153846149822, -0.89999999999990887, 1.6230769230769233, 1.3846153846149818, -0.89999999999901603,
		3.6769230769235661, 1.2000000000000721, -1.3846153846155682, 2.4769230769228057, -1.199999999999821, 1.384615384615931, 2.4769230769232888, 1.2000000000003139,
		6.1000000000000796, 0.90000000000074243, -1.2000000000006645, 1.3000000000007499, 0.90000000000107705, -1.1999999999996971, 6.1000000000002901,
		2.2230769230774685, -1.3846153846149822, 0.90000000000154401, 0.37692307692362181, -1.3846153846149818, 0.90000000000065139,
		3.6769230769239902, 1.2000000000009157, 1.3846153846153444, 3.6769230769235062, -1.2000000000009063,
		6.0999999999995334, 0.90000000000009295, 1.1999999999999484, 1.2999999999999932,
		2.2230769230774685, 1.3846153846153444, 0.90000000000098601,
		3.6769230769230221, -1.1999999999999391,
		6.1000000000005006,
	},
}

func TestPolishSlidingBoxOnIncline(t *testing.T) {
	// Textbook dynamics of a block sliding down an incline (REFERENCE-CHECKS:
	// block on an incline, tan θ > μ): over one step h the plane's normal
	// impulse is m g h cos θ, friction is μ times it and opposes the slip,
	// and the block neither sinks nor lifts (un = 0 at every corner).
	const m, h, mu = 1.0, 1e-3, 0.2
	cosTheta := 1 / math.Sqrt(1+0.3*0.3)
	n := len(inclineTin.b)
	w := mat.NewSymDense(n, nil)
	k := 0
	for i := range n {
		for j := i; j < n; j++ {
			w.SetSym(i, j, inclineTin.w[k])
			k++
		}
	}
	p := &Problem{W: w, B: inclineTin.b, Mu: inclineTin.mu, NumCones: 4}
	lam := make([]float64, n)
	st, err := NewSolver().Solve(p, SolverSettings{}, lam)
	if err != nil {
		t.Fatal(err)
	}
	if r := coulombResidual(p, lam); r > 1e-12 {
		t.Errorf("Coulomb residual %g, want ≤ 1e-12", r)
	}
	u := velocityOf(p, lam)
	var sumN, sumT float64
	for c := range 4 {
		i := 3 * c
		sumN += lam[i]
		sumT += math.Hypot(lam[i+1], lam[i+2])
		if math.Abs(u[i]) > 1e-12 {
			t.Errorf("contact %d: un = %g, want 0 (no lift-off, no sinking)", c, u[i])
		}
		ut := math.Hypot(u[i+1], u[i+2])
		for r := 1; r < 3; r++ {
			if d := lam[i+r] + mu*lam[i]*u[i+r]/ut; math.Abs(d) > 1e-12 {
				t.Errorf("contact %d: friction not opposed to slip (%g)", c, d)
			}
		}
	}
	// The corners' free normal velocities agree to 1e-11 (the box barely
	// rotates), so the total matches the textbook value to that order.
	if want := m * standardGravity * h * cosTheta; math.Abs(sumN-want) > 1e-9*want {
		t.Errorf("normal impulse %.12g, want m g h cos θ = %.12g", sumN, want)
	}
	if math.Abs(sumT-mu*sumN) > 1e-12 {
		t.Errorf("friction impulse %.12g, want μ λn = %.12g", sumT, mu*sumN)
	}
	t.Logf("iterations %d, polished %v, residual %.2g, velocity residual %.2g", st.Iterations, st.Polished, st.Residual, st.VelocityResidual)
}

func TestPolishedDerivativeFiniteDifferences(t *testing.T) {
	// The JVP and VJP at polished solutions (κ = 0) against central finite
	// differences (gonum diff/fd) of λ(B, μ), on random problems with a
	// positive definite W (unique solution) whose solution is strictly
	// complementary, so that it is a smooth function of the data nearby:
	// there the exact derivative is the derivative of the modes' equations,
	// and the interior-point linearization at the central point next to
	// the polished solution must reproduce it.
	rng := rand.New(rand.NewPCG(61, 62))
	checked := 0
	for trial := 0; checked < 10 && trial < 200; trial++ {
		nc, nu := 1+rng.IntN(4), rng.IntN(3)
		p := randomProblem(rng, nc, nu, 0, 0.8)
		n := len(p.B)
		s := NewSolver()
		lam := make([]float64, n)
		st, err := s.Solve(p, SolverSettings{}, lam)
		if err != nil || !st.Polished || margin(p, lam) < 1e-3 {
			continue
		}
		checked++
		fs := NewSolver()
		f := func(y, x []float64) {
			q := &Problem{W: p.W, B: x[:n], Mu: x[n:], NumCones: nc}
			if _, err := fs.Solve(q, SolverSettings{}, y); err != nil {
				t.Fatal(err)
			}
		}
		x := append(append([]float64(nil), p.B...), p.Mu...)
		jfd := mat.NewDense(n, len(x), nil)
		fd.Jacobian(jfd, f, x, &fd.JacobianSettings{Formula: fd.Central, Step: 1e-6})
		dl := make([]float64, n)
		for j := range x {
			db, dmu := make([]float64, n), make([]float64, nc)
			if j < n {
				db[j] = 1
			} else {
				dmu[j-n] = 1
			}
			if err := s.JVP(dl, db, dmu); err != nil {
				t.Fatal(err)
			}
			for i := range n {
				if want := jfd.At(i, j); math.Abs(dl[i]-want) > 1e-6*(1+math.Abs(want)) {
					t.Errorf("trial %d: JVP dλ%d/dx%d = %.9g, finite differences %.9g", trial, i, j, dl[i], want)
				}
			}
		}
		bBar, muBar := make([]float64, n), make([]float64, nc)
		for i := range n {
			lb := make([]float64, n)
			lb[i] = 1
			if err := s.VJP(bBar, muBar, lb); err != nil {
				t.Fatal(err)
			}
			for j := range x {
				got := muBar[max(j-n, 0)]
				if j < n {
					got = bBar[j]
				}
				if want := jfd.At(i, j); math.Abs(got-want) > 1e-6*(1+math.Abs(want)) {
					t.Errorf("trial %d: VJP dλ%d/dx%d = %.9g, finite differences %.9g", trial, i, j, got, want)
				}
			}
		}
	}
	if checked < 10 {
		t.Fatalf("only %d strictly complementary polished solutions among the trials", checked)
	}
}

// margin returns how far the solution lam of p is from a change of mode:
// the smallest of λn or un (whichever should be positive), μλn − ‖λt‖ of
// sticking contacts, ‖ut‖ of sliding ones, and λ or u of unilateral rows.
func margin(p *Problem, lam []float64) float64 {
	u := velocityOf(p, lam)
	m := math.Inf(1)
	for c := range p.NumCones {
		i := 3 * c
		if lam[i] == 0 {
			m = math.Min(m, u[i])
			continue
		}
		m = math.Min(m, lam[i])
		if p.Mu[c] > 0 {
			ut := math.Hypot(u[i+1], u[i+2])
			if ut < 1e-12 {
				m = math.Min(m, p.Mu[c]*lam[i]-math.Hypot(lam[i+1], lam[i+2]))
			} else {
				m = math.Min(m, ut)
			}
		}
	}
	for i := 3 * p.NumCones; i < len(lam); i++ {
		m = math.Min(m, math.Max(lam[i], u[i]))
	}
	return m
}
