package contact

import (
	"math/rand/v2"
	"testing"
)

func benchmarkSolve(b *testing.B, p *Problem) {
	s := NewSolver()
	lam := make([]float64, len(p.B))
	// Warm up: the first solve grows the workspaces.
	if _, err := s.Solve(p, SolverSettings{}, lam); err != nil {
		b.Fatal(err)
	}
	its := 0
	b.ReportAllocs()
	for b.Loop() {
		st, err := s.Solve(p, SolverSettings{}, lam)
		if err != nil {
			b.Fatal(err)
		}
		its += st.Iterations
	}
	b.ReportMetric(float64(its)/float64(b.N), "iterations/op")
}

// BenchmarkSolve1Contact: a sliding point mass.
func BenchmarkSolve1Contact(b *testing.B) {
	benchmarkSolve(b, pointMassProblem(1, 0.5, 1e-3, 0, 0.05))
}

// BenchmarkSolve4ContactsBox: a box on a plane pushed sideways (singular W).
func BenchmarkSolve4ContactsBox(b *testing.B) {
	benchmarkSolve(b, stackProblem(rigidBox{m: 1.5, a: 0.1, b: 0.05, c: 0.02}, 1, 0.6, 1e-3, 0.05))
}

// BenchmarkSolve40ContactsStack: ten boxes stacked, four corners per
// interface (120 rows, W of rank 60).
func BenchmarkSolve40ContactsStack(b *testing.B) {
	benchmarkSolve(b, stackProblem(rigidBox{m: 0.8, a: 0.05, b: 0.05, c: 0.03}, 10, 0.5, 1e-3, 0.01))
}

// BenchmarkSolve40ContactsDense: a dense random positive definite W of the
// same size.
func BenchmarkSolve40ContactsDense(b *testing.B) {
	rng := rand.New(rand.NewPCG(21, 22))
	benchmarkSolve(b, randomProblem(rng, 40, 0, 0, 0.5))
}

// BenchmarkSolve40ContactsStackResting: the same stack at rest (every
// contact sticking), the steady state of a simulated stack.
func BenchmarkSolve40ContactsStackResting(b *testing.B) {
	benchmarkSolve(b, stackProblem(rigidBox{m: 0.8, a: 0.05, b: 0.05, c: 0.03}, 10, 0.5, 1e-3, 0))
}
