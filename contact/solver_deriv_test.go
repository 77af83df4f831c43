package contact

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"
)

func TestDerivativeSingleContactAnalytic(t *testing.T) {
	// Point mass m, W = I/m (exact Coulomb law, κ = 0). Sticking:
	// λ = −m B, so dλ/dB = −m I. Sliding along +x: λn = −m Bn,
	// λt1 = −μ λn, and a sideways perturbation rotates the slip direction:
	// λt2 = −μ λn ut2/‖ut‖ with ut = Bt + λt/m, giving
	// dλt2/dBt2 = −μ λn / Bt1 and dλt1/dμ = −λn. (Textbook Coulomb law,
	// differentiated by hand.)
	const m, mu, h = 2.0, 0.5, 1e-3
	g := standardGravity
	tests := []struct {
		name string
		vt   float64
		want [3][3]float64 // dλ_i/dB_j
		dmu  [3]float64    // dλ/dμ
	}{
		{"stick", 0.4 * mu * g * h, [3][3]float64{{-m, 0, 0}, {0, -m, 0}, {0, 0, -m}}, [3]float64{}},
		{"slide", 0.05, [3][3]float64{{-m, 0, 0}, {mu * m, 0, 0}, {0, 0, -mu * m * g * h / 0.05}}, [3]float64{0, -m * g * h, 0}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			p := pointMassProblem(m, mu, h, 0, tc.vt)
			s := NewSolver()
			lam := make([]float64, 3)
			if _, err := s.Solve(p, SolverSettings{}, lam); err != nil {
				t.Fatal(err)
			}
			dl := make([]float64, 3)
			for j := range 3 {
				db := make([]float64, 3)
				db[j] = 1
				if err := s.JVP(dl, db, nil); err != nil {
					t.Fatal(err)
				}
				for i := range 3 {
					if math.Abs(dl[i]-tc.want[i][j]) > 1e-6*(1+math.Abs(tc.want[i][j])) {
						t.Errorf("dλ%d/dB%d = %g, want %g", i, j, dl[i], tc.want[i][j])
					}
				}
			}
			if err := s.JVP(dl, make([]float64, 3), []float64{1}); err != nil {
				t.Fatal(err)
			}
			for i := range 3 {
				if math.Abs(dl[i]-tc.dmu[i]) > 1e-8 {
					t.Errorf("dλ%d/dμ = %g, want %g", i, dl[i], tc.dmu[i])
				}
			}
		})
	}
}

func TestDerivativeFiniteDifferences(t *testing.T) {
	// Every JVP and VJP against central finite differences (gonum diff/fd),
	// on the smoothed problem (κ > 0), whose solution is smooth in B and μ.
	rng := rand.New(rand.NewPCG(31, 32))
	set := SolverSettings{Smoothing: 1e-4, Tolerance: 1e-14}
	for trial := range 30 {
		nc := 1 + rng.IntN(4)
		nu := rng.IntN(3)
		p := randomProblem(rng, nc, nu, 0, 0.8)
		if trial%5 == 0 {
			p.Mu[0] = 0 // a frictionless contact among frictional ones
		}
		n := len(p.B)
		s := NewSolver()
		lam := make([]float64, n)
		if _, err := s.Solve(p, set, lam); err != nil {
			t.Fatalf("trial %d: %v", trial, err)
		}
		// Finite-difference Jacobian dλ/d(B, μ); μ is held fixed when a
		// contact is frictionless (μ = 0 is on the boundary of its domain).
		withMu := p.Mu[0] > 0
		x := append([]float64(nil), p.B...)
		if withMu {
			x = append(x, p.Mu...)
		}
		fs := NewSolver()
		f := func(y, x []float64) {
			q := &Problem{W: p.W, B: x[:n], Mu: p.Mu, NumCones: nc}
			if withMu {
				q.Mu = x[n:]
			}
			if _, err := fs.Solve(q, set, y); err != nil {
				t.Fatalf("trial %d: %v", trial, err)
			}
		}
		jfd := mat.NewDense(n, len(x), nil)
		fd.Jacobian(jfd, f, x, &fd.JacobianSettings{Formula: fd.Central, Step: 1e-6})

		dl := make([]float64, n)
		for j := range len(x) {
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
				want := jfd.At(i, j)
				if math.Abs(dl[i]-want) > 1e-5*(1+math.Abs(want)) {
					t.Errorf("trial %d: JVP dλ%d/dx%d = %.9g, finite differences %.9g", trial, i, j, dl[i], want)
				}
			}
		}
		// VJP: row i of the Jacobian.
		bBar, muBar := make([]float64, n), make([]float64, nc)
		for i := range n {
			lb := make([]float64, n)
			lb[i] = 1
			if err := s.VJP(bBar, muBar, lb); err != nil {
				t.Fatal(err)
			}
			for j := range len(x) {
				got := 0.0
				if j < n {
					got = bBar[j]
				} else {
					got = muBar[j-n]
				}
				want := jfd.At(i, j)
				if math.Abs(got-want) > 1e-5*(1+math.Abs(want)) {
					t.Errorf("trial %d: VJP dλ%d/dx%d = %.9g, finite differences %.9g", trial, i, j, got, want)
				}
			}
		}
	}
}

func TestDerivativeErrors(t *testing.T) {
	s := NewSolver()
	if err := s.JVP(nil, nil, nil); !errors.Is(err, ErrNoSolution) {
		t.Errorf("JVP before Solve: %v", err)
	}
	p := pointMassProblem(1, 0.5, 1e-3, 0, 0)
	if _, err := s.Solve(p, SolverSettings{}, make([]float64, 3)); err != nil {
		t.Fatal(err)
	}
	if err := s.JVP(make([]float64, 2), make([]float64, 3), nil); err == nil {
		t.Error("JVP with a short dLambda: no error")
	}
	if err := s.VJP(make([]float64, 3), make([]float64, 2), make([]float64, 3)); err == nil {
		t.Error("VJP with a long muBar: no error")
	}
}

func TestDerivativeAllocs(t *testing.T) {
	p := stackProblem(rigidBox{m: 1, a: 0.1, b: 0.1, c: 0.1}, 2, 0.5, 1e-3, 0.02)
	s := NewSolver()
	n := len(p.B)
	lam, dl, db, mub := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, p.NumCones)
	db[0] = 1
	set := SolverSettings{Smoothing: 1e-6}
	allocs := testing.AllocsPerRun(10, func() {
		if _, err := s.Solve(p, set, lam); err != nil {
			t.Fatal(err)
		}
		if err := s.JVP(dl, db, nil); err != nil {
			t.Fatal(err)
		}
		if err := s.VJP(db, mub, dl); err != nil {
			t.Fatal(err)
		}
	})
	if allocs != 0 {
		t.Errorf("%v allocations per solve and derivative, want 0", allocs)
	}
}
