package sim

import (
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

// gradScene is a four-box stack whose top box is dragged, differentiated
// with respect to 16 parameters.
func gradScene() (*Model, []string) {
	m := stackScene(4)
	m.Loads = []Load{{Body: 3, Force: r3.Vec{X: 8}}}
	m.Materials.Pairs = []MaterialPair{{A: "test", B: "test", PairProps: PairProps{Friction: 0.6}}, {A: "test", B: "ground", PairProps: PairProps{Friction: 0.6}}}
	var names []string
	names = append(names, "friction:test/test", "friction:test/ground", "gravity.z", "gravity.x")
	for _, b := range m.Bodies {
		names = append(names, "mass:"+b.Name, "inertia.x:"+b.Name, "inertia.y:"+b.Name)
	}
	return m, names
}

const gradSteps = 100

// BenchmarkGradient compares, in one run, a forward rollout, a forward
// sweep with one tangent column, the reverse-sweep gradient of a 16-
// parameter loss (the rollout that records the tape plus the backward
// pass; with the full and the compact tape), and the same
// gradient by central finite differences (2 × 16 rollouts).
func BenchmarkGradient(b *testing.B) {
	m, names := gradScene()
	params, err := ParseParams(m, names)
	if err != nil {
		b.Fatal(err)
	}
	if len(params) != 16 {
		b.Fatalf("%d parameters, want 16", len(params))
	}
	rollout := func() *Sim {
		s := mustSim(b, m, Settings{})
		for k := 0; k < gradSteps; k++ {
			if err := s.Step(); err != nil {
				b.Fatal(err)
			}
		}
		return s
	}
	b.Run("Rollout", func(b *testing.B) {
		b.ReportAllocs()
		for i := 0; i < b.N; i++ {
			rollout()
		}
	})
	b.Run("ForwardSweepOneColumn", func(b *testing.B) {
		b.ReportAllocs()
		for i := 0; i < b.N; i++ {
			s := mustSim(b, m, Settings{})
			if _, err := s.ForwardGradient(params[:1], gradSteps, halfSquares); err != nil {
				b.Fatal(err)
			}
		}
	})
	for _, compact := range []bool{false, true} {
		name := "ReverseSweep16"
		if compact {
			name += "Compact"
		}
		b.Run(name, func(b *testing.B) {
			b.ReportAllocs()
			var tape int
			for i := 0; i < b.N; i++ {
				s := mustSim(b, m, Settings{})
				r, err := s.ReverseGradient(params, gradSteps, halfSquares, ReverseOptions{Compact: compact})
				if err != nil {
					b.Fatal(err)
				}
				tape = r.TapeBytes
			}
			b.ReportMetric(float64(tape)/gradSteps, "tape-B/step")
		})
	}
	b.Run("ForwardSweep16", func(b *testing.B) {
		b.ReportAllocs()
		for i := 0; i < b.N; i++ {
			s := mustSim(b, m, Settings{})
			if _, err := s.ForwardGradient(params, gradSteps, halfSquares); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("CentralDifferences16", func(b *testing.B) {
		b.ReportAllocs()
		for i := 0; i < b.N; i++ {
			for j := range params {
				for _, sign := range []float64{1, -1} {
					mm := CopyModel(m)
					v := params[j].Get(m)
					params[j].Set(mm, v+sign*1e-6)
					s := mustSim(b, mm, Settings{})
					for k := 0; k < gradSteps; k++ {
						if err := s.Step(); err != nil {
							b.Fatal(err)
						}
					}
				}
			}
		}
	})
}
