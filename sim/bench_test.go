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

// sevenJointArm is a seven-joint arm holding a pose by PD above a table
// plane, beside three loose boxes resting on it.
func sevenJointArm() *Model {
	m := &Model{Gravity: down, Static: []StaticShape{floor(0)}, Materials: materials(0.5, 0)}
	axes := []r3.Vec{{Z: 1}, {Y: 1}, {X: 1}, {Y: 1}, {X: 1}, {Y: 1}, {X: 1}}
	var target []float64
	for i, ax := range axes {
		off := 0.25
		if i == 0 {
			off = 0
		}
		l := link("j"+string(rune('1'+i)), i-1, off, 0.25, 1.5-0.15*float64(i), ax)
		if i == 0 {
			l.Joint.Frame.Pos = r3.Vec{Z: 0.6}
		}
		l.Joint.Position = 0.1 * float64(i%3)
		target = append(target, l.Joint.Position)
		m.Bodies = append(m.Bodies, l)
		m.Actuators = append(m.Actuators, Actuator{Name: "m" + string(rune('1'+i)), Body: i, EffortLimit: 200})
	}
	kp, kd := make([]float64, 7), make([]float64, 7)
	for i := range kp {
		kp[i], kd[i] = 800, 40
	}
	m.Controller = &PD{Kp: kp, Kd: kd, Targets: Table{Times: []float64{0}, Values: [][]float64{target}}}
	for i := 0; i < 3; i++ {
		m.Bodies = append(m.Bodies, boxBody("box"+string(rune('1'+i)), 0.5, r3.Vec{X: 0.1, Y: 0.1, Z: 0.1},
			contact.Pose{Pos: r3.Vec{X: -0.5, Y: 0.3 * float64(i-1), Z: 0.05}, Rot: contact.IdentityQuat}))
	}
	return m
}

// BenchmarkArticulatedStep measures step cost for the robot scenes and the
// share of step time spent in dynamics, collision and the contact solve.
func BenchmarkArticulatedStep(b *testing.B) {
	for _, c := range []struct {
		name string
		m    *Model
	}{{"PusherCell", pusherCell()}, {"SevenJointArmThreeBoxes", sevenJointArm()}} {
		b.Run(c.name, func(b *testing.B) {
			s := mustSim(b, c.m, Settings{})
			for i := 0; i < 300; i++ {
				if err := s.Step(); err != nil {
					b.Fatal(err)
				}
			}
			prof := &StepProfile{}
			s.Profile = prof
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if s.Time() > 2 {
					b.StopTimer()
					s.Profile = nil
					s.Reset()
					for j := 0; j < 300; j++ {
						s.Step()
					}
					s.Profile = prof
					b.StartTimer()
				}
				if err := s.Step(); err != nil {
					b.Fatal(err)
				}
			}
			b.StopTimer()
			total := float64(prof.Dynamics + prof.Collision + prof.Contact)
			b.ReportMetric(100*float64(prof.Dynamics)/total, "%dynamics")
			b.ReportMetric(100*float64(prof.Collision)/total, "%collision")
			b.ReportMetric(100*float64(prof.Contact)/total, "%contact")
		})
	}
}
