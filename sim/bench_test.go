package sim

import (
	"sort"
	"testing"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

func benchScenes() map[string]*Model {
	size := r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}
	slide := boxBody("crate", 1.5, size, contact.Pose{Pos: r3.Vec{Z: size.Z / 2}, Rot: contact.IdentityQuat})
	slide.Start.Linear = r3.Vec{X: 2}
	return map[string]*Model{
		"BoxOnPlane": {Gravity: down, Static: []StaticShape{floor(0)}, Bodies: []Body{slide}, Materials: materials(0.4, 0)},
		"BallDrop": {Gravity: down, Static: []StaticShape{floor(0)},
			Bodies: []Body{sphereBody("ball", 0.06, 0.05, r3.Vec{Z: 0.3})}, Materials: materials(0.5, 0.75)},
		"TenBoxStack": stackScene(10),
	}
}

// BenchmarkStep measures one time step after a warm-up of 200 steps, with
// the median and largest interior-point iteration counts as metrics.
func BenchmarkStep(b *testing.B) {
	for _, name := range []string{"BoxOnPlane", "BallDrop", "TenBoxStack"} {
		m := benchScenes()[name]
		b.Run(name, func(b *testing.B) {
			s := mustSim(b, m, Settings{})
			for i := 0; i < 200; i++ {
				if err := s.Step(); err != nil {
					b.Fatal(err)
				}
			}
			iters := make([]int, 0, b.N)
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if s.Time() > 1.5 {
					b.StopTimer()
					s.Reset()
					for j := 0; j < 200; j++ {
						s.Step()
					}
					b.StartTimer()
				}
				if err := s.Step(); err != nil {
					b.Fatal(err)
				}
				iters = append(iters, s.SolveStats().Iterations)
			}
			b.StopTimer()
			sort.Ints(iters)
			b.ReportMetric(float64(iters[len(iters)/2]), "ipm-iters-median")
			b.ReportMetric(float64(iters[len(iters)-1]), "ipm-iters-max")
			b.ReportMetric(float64(len(s.Contacts())), "contacts")
		})
	}
}

func TestStepAllocatesNothing(t *testing.T) {
	for name, m := range benchScenes() {
		s := mustSim(t, m, Settings{})
		for i := 0; i < 300; i++ {
			if err := s.Step(); err != nil {
				t.Fatal(err)
			}
		}
		if a := testing.AllocsPerRun(100, func() {
			if err := s.Step(); err != nil {
				t.Fatal(err)
			}
		}); a != 0 {
			t.Errorf("%s: %.1f allocations per step after warm-up, want 0", name, a)
		}
	}
}
