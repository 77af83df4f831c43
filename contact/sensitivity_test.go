package contact

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// TestSensitivityMatchesSolver checks that a compact record, with and
// without its kept factors, gives the Solver's own VJP after the solver has
// moved on to another problem, on random frictional problems with
// unilateral rows (κ = 0 and κ > 0).
func TestSensitivityMatchesSolver(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	for trial := 0; trial < 40; trial++ {
		nc, nu := 1+rng.IntN(5), rng.IntN(3)
		p := randomProblem(rng, nc, nu, 3*nc+nu, 0.8)
		if trial%4 == 0 {
			p.Mu[0] = 0
		}
		set := SolverSettings{}
		if trial%2 == 1 {
			set.Smoothing = 1e-6
		}
		s := NewSolver()
		n := len(p.B)
		lam := make([]float64, n)
		if _, err := s.Solve(p, set, lam); err != nil {
			continue
		}
		lbar := make([]float64, n)
		for i := range lbar {
			lbar[i] = rng.NormFloat64()
		}
		wantB, wantMu := make([]float64, n), make([]float64, nc)
		if err := s.VJP(wantB, wantMu, lbar); err != nil {
			t.Fatal(err)
		}
		var compact, kept Sensitivity
		if err := s.Record(&compact, false); err != nil {
			t.Fatal(err)
		}
		if err := s.Record(&kept, true); err != nil {
			t.Fatal(err)
		}
		if kept.Bytes() <= compact.Bytes() {
			t.Errorf("record with factors %d B, without %d B", kept.Bytes(), compact.Bytes())
		}
		// Move the solver on.
		other := randomProblem(rng, 2, 1, 7, 0.5)
		if _, err := s.Solve(other, SolverSettings{}, make([]float64, 7)); err != nil {
			t.Fatal(err)
		}
		for _, rec := range []*Sensitivity{&compact, &kept} {
			gotB, gotMu := make([]float64, n), make([]float64, nc)
			if err := rec.VJP(p.W, gotB, gotMu, lbar); err != nil {
				t.Fatal(err)
			}
			for i := range gotB {
				if math.Abs(gotB[i]-wantB[i]) > 1e-9*(1+math.Abs(wantB[i])) {
					t.Errorf("trial %d: B̄[%d] = %g, solver %g", trial, i, gotB[i], wantB[i])
				}
			}
			for c := range gotMu {
				if math.Abs(gotMu[c]-wantMu[c]) > 1e-9*(1+math.Abs(wantMu[c])) {
					t.Errorf("trial %d: μ̄[%d] = %g, solver %g", trial, c, gotMu[c], wantMu[c])
				}
			}
		}
		if err := compact.VJP(nil, make([]float64, n), nil, lbar); err == nil {
			t.Error("a compact record without W: no error")
		}
	}
}

// TestLUSolveTrans checks the transposed LU solve against gonum's
// lapack64.Getrs with blas.Trans on random matrices.
func TestLUSolveTrans(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, n := range []int{1, 2, 5, 17, 48} {
		a := make([]float64, n*n)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		piv := make([]int, n)
		if !lapack64.Getrf(blas64.General{Rows: n, Cols: n, Stride: n, Data: a}, piv) {
			t.Fatalf("n = %d: singular", n)
		}
		b := make([]float64, n)
		for i := range b {
			b[i] = rng.NormFloat64()
		}
		want := append([]float64(nil), b...)
		lapack64.Getrs(blas.Trans, blas64.General{Rows: n, Cols: n, Stride: n, Data: a}, blas64.General{Rows: n, Cols: 1, Stride: 1, Data: want}, piv)
		got := append([]float64(nil), b...)
		luSolveTrans(a, n, piv, got)
		for i := range got {
			if math.Abs(got[i]-want[i]) > 1e-11*(1+math.Abs(want[i])) {
				t.Errorf("n = %d: x[%d] = %.15g, Getrs %.15g", n, i, got[i], want[i])
			}
		}
	}
}
