package sim

import (
	"errors"
	"math"
	"strings"
	"testing"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

const g = StandardGravity

func relErr(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

func TestFreeFall(t *testing.T) {
	// Newton's laws: z = z₀ − g t²/2; a 1 m drop takes √(2/g) = 0.4516 s
	// (REFERENCE-CHECKS.md, analytic motions).
	m := &Model{Gravity: down, Bodies: []Body{sphereBody("ball", 1, 0.1, r3.Vec{Z: 10})}}
	s := mustSim(t, m, Settings{})
	tFall := math.Sqrt(2 / g)
	run(t, s, 0.452)
	drop := 10 - s.Body(0).Pose.Pos.Z
	want := 0.5 * g * s.Time() * s.Time()
	if e := relErr(drop, want); e > 0.005 {
		t.Errorf("drop after %.4f s = %.6f m, want %.6f (rel err %.2g > 0.5%%)", s.Time(), drop, want, e)
	}
	if math.Abs(tFall-0.4516) > 1e-4 {
		t.Errorf("√(2/g) = %.5f, want 0.4516", tFall)
	}
}

func inclineScene(tilt, mu float64) *Model {
	size := r3.Vec{X: 0.2, Y: 0.2, Z: 0.1}
	return &Model{
		Gravity:   down,
		Static:    []StaticShape{floor(tilt)},
		Bodies:    []Body{boxBody("crate", 2, size, onIncline(tilt, size.Z/2, 0))},
		Materials: materials(mu, 0),
	}
}

func TestInclineStays(t *testing.T) {
	// Textbook statics: a block on an incline stays put if tan θ ≤ μ
	// (REFERENCE-CHECKS.md). Here tan θ = 0.95 μ.
	const mu = 0.5
	tilt := math.Atan(0.95 * mu)
	m := inclineScene(tilt, mu)
	s := mustSim(t, m, Settings{})
	start := s.Body(0).Pose.Pos
	run(t, s, 1)
	drift := r3.Norm(r3.Sub(s.Body(0).Pose.Pos, start))
	if drift > 1e-6 {
		t.Errorf("block drifted %.3g m in 1 s at tan θ = 0.95 μ, want < 1e-6", drift)
	}
}

func TestInclineSlides(t *testing.T) {
	// Textbook dynamics: above tan θ = μ the block slides with
	// a = g(sin θ − μ cos θ) (REFERENCE-CHECKS.md). Here tan θ = 1.05 μ.
	const mu = 0.5
	tilt := math.Atan(1.05 * mu)
	m := inclineScene(tilt, mu)
	s := mustSim(t, m, Settings{})
	start := s.Body(0).Pose.Pos
	run(t, s, 1)
	along := r3.Dot(r3.Sub(s.Body(0).Pose.Pos, start), slopeDir(tilt))
	// Semi-implicit Euler gives s = a h² n(n+1)/2 after n steps.
	n := float64(s.StepCount())
	h := s.set.TimeStep
	got := 2 * along / (h * h * n * (n + 1))
	want := g * (math.Sin(tilt) - mu*math.Cos(tilt))
	if e := relErr(got, want); e > 0.005 {
		t.Errorf("slide acceleration %.5f m/s², want g(sin θ − μ cos θ) = %.5f (rel err %.2g > 0.5%%)", got, want, e)
	}
}

func TestBoxLaunchedOnPlaneStops(t *testing.T) {
	// Textbook dynamics: a block launched at v₀ decelerates at μg and stops
	// after v₀²/(2μg) (REFERENCE-CHECKS.md).
	const mu, v0 = 0.4, 2.0
	size := r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}
	b := boxBody("crate", 1.5, size, contact.Pose{Pos: r3.Vec{Z: size.Z / 2}, Rot: contact.IdentityQuat})
	b.Start.Linear = r3.Vec{X: v0}
	m := &Model{Gravity: down, Static: []StaticShape{floor(0)}, Bodies: []Body{b}, Materials: materials(mu, 0)}
	s := mustSim(t, m, Settings{})
	maxDev := 0.0
	for s.Time() < 1 {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		maxDev = math.Max(maxDev, math.Abs(s.Body(0).Pose.Pos.Z-size.Z/2))
	}
	got := s.Body(0).Pose.Pos.X
	want := v0 * v0 / (2 * mu * g)
	if e := relErr(got, want); e > 0.005 {
		t.Errorf("stopping distance %.5f m, want v₀²/(2μg) = %.5f (rel err %.2g > 0.5%%)", got, want, e)
	}
	if v := r3.Norm(s.Body(0).Linear); v > 1e-6 {
		t.Errorf("block still moving at %.3g m/s after 1 s", v)
	}
	if maxDev > 1e-5 {
		t.Errorf("height left rest by %.3g m while sliding, want < 1e-5 (no lift-off)", maxDev)
	}
}

func TestBallDropRebound(t *testing.T) {
	// Newton's law of impact: rebound height e²h (REFERENCE-CHECKS.md).
	const e, r, h0 = 0.75, 0.05, 1.0
	m := &Model{Gravity: down, Static: []StaticShape{floor(0)},
		Bodies: []Body{sphereBody("ball", 0.06, r, r3.Vec{Z: h0 + r})}, Materials: materials(0.5, e)}
	s := mustSim(t, m, Settings{})
	bounced := false
	apex := 0.0
	for s.Time() < 1.2 {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		b := s.Body(0)
		if b.Linear.Z > 0 {
			bounced = true
		}
		if bounced {
			apex = math.Max(apex, b.Pose.Pos.Z-r)
		}
	}
	want := e * e * h0
	if err := relErr(apex, want); err > 0.02 {
		t.Errorf("rebound height %.4f m, want e²h = %.4f (rel err %.2g > 2%%)", apex, want, err)
	}
}

func TestBallLaunchedWithoutSpinRolls(t *testing.T) {
	// Textbook dynamics: a ball launched at v₀ without spin slides, then
	// rolls at 5v₀/7 after t = 2v₀/(7μg) (REFERENCE-CHECKS.md).
	const mu, v0, r = 0.3, 3.0, 0.1
	b := sphereBody("ball", 0.5, r, r3.Vec{Z: r})
	b.Start.Linear = r3.Vec{X: v0}
	m := &Model{Gravity: down, Static: []StaticShape{floor(0)}, Bodies: []Body{b}, Materials: materials(mu, 0)}
	s := mustSim(t, m, Settings{})
	tRoll := 2 * v0 / (7 * mu * g)
	run(t, s, tRoll+0.5)
	got := s.Body(0).Linear.X
	want := 5 * v0 / 7
	if e := relErr(got, want); e > 0.01 {
		t.Errorf("rolling speed %.5f m/s, want 5v₀/7 = %.5f (rel err %.2g > 1%%)", got, want, e)
	}
	// Rolling without slip: ω r = v.
	if w := s.Body(0).Angular.Y * r; relErr(w, got) > 1e-3 {
		t.Errorf("ωr = %.5f, v = %.5f: not rolling", w, got)
	}
}

func TestSphereRollsDownIncline(t *testing.T) {
	// Textbook dynamics: a sphere rolls down an incline at a = (5/7) g sin θ
	// when μ ≥ (2/7) tan θ (REFERENCE-CHECKS.md).
	tilt := 20 * math.Pi / 180
	mu := 0.6 // (2/7) tan 20° = 0.104
	const r = 0.1
	pose := onIncline(tilt, r, 0)
	b := sphereBody("ball", 0.4, r, pose.Pos)
	m := &Model{Gravity: down, Static: []StaticShape{floor(tilt)}, Bodies: []Body{b}, Materials: materials(mu, 0)}
	s := mustSim(t, m, Settings{})
	run(t, s, 1)
	along := r3.Dot(r3.Sub(s.Body(0).Pose.Pos, pose.Pos), slopeDir(tilt))
	n := float64(s.StepCount())
	h := s.set.TimeStep
	got := 2 * along / (h * h * n * (n + 1))
	want := 5.0 / 7 * g * math.Sin(tilt)
	if e := relErr(got, want); e > 0.01 {
		t.Errorf("rolling acceleration %.5f, want (5/7) g sin θ = %.5f (rel err %.2g > 1%%)", got, want, e)
	}
}

func TestTipVersusSlide(t *testing.T) {
	// Textbook statics: a box w wide and h tall on an incline tips before it
	// slides when w/h < tan θ ≤ μ, and slides without tipping when
	// tan θ > μ and tan θ < w/h (REFERENCE-CHECKS.md).
	const w, hgt = 0.1, 0.3 // w/h = 1/3
	cases := []struct {
		name     string
		tanTheta float64
		mu       float64
		tips     bool
		slides   bool
	}{
		{"tips: w/h < tan θ < μ", 0.4, 0.8, true, false},
		{"slides: μ < tan θ < w/h", 0.3, 0.2, false, true},
		{"stays: tan θ < w/h, tan θ < μ", 0.25, 0.8, false, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			tilt := math.Atan(c.tanTheta)
			size := r3.Vec{X: 0.2, Y: w, Z: hgt}
			m := &Model{Gravity: down, Static: []StaticShape{floor(tilt)},
				Bodies: []Body{boxBody("tin", 1, size, onIncline(tilt, hgt/2, 0))}, Materials: materials(c.mu, 0)}
			s := mustSim(t, m, Settings{})
			start := s.Body(0).Pose
			run(t, s, 1.0)
			end := s.Body(0).Pose
			tilted := contact.Angle(start.Rot, end.Rot) > 0.2
			slid := r3.Dot(r3.Sub(end.Pos, start.Pos), slopeDir(tilt)) > 0.01
			if tilted != c.tips {
				t.Errorf("tipped = %v (rotated %.3f rad), want %v", tilted, contact.Angle(start.Rot, end.Rot), c.tips)
			}
			if !c.tips && slid != c.slides {
				t.Errorf("slid = %v, want %v", slid, c.slides)
			}
		})
	}
}

func stackScene(n int) *Model {
	size := r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}
	m := &Model{Gravity: down, Static: []StaticShape{floor(0)}, Materials: materials(0.6, 0)}
	for i := 0; i < n; i++ {
		z := size.Z/2 + float64(i)*size.Z
		m.Bodies = append(m.Bodies, boxBody("box"+string(rune('A'+i)), 1, size, contact.Pose{Pos: r3.Vec{Z: z}, Rot: contact.IdentityQuat}))
	}
	return m
}

func TestTenBoxStackRests(t *testing.T) {
	// Statics: a stack at rest stays at rest (Newton's first law).
	duration := 60.0
	if testing.Short() {
		duration = 2
	}
	m := stackScene(10)
	s := mustSim(t, m, Settings{})
	var start []r3.Vec
	for i := range m.Bodies {
		start = append(start, s.Body(i).Pose.Pos)
	}
	run(t, s, duration)
	for i := range m.Bodies {
		b := s.Body(i)
		if d := r3.Norm(r3.Sub(b.Pose.Pos, start[i])); d > 1e-3 {
			t.Errorf("%s drifted %.3g m over %g s, want < 1 mm", m.Bodies[i].Name, d, duration)
		}
		if v := r3.Norm(b.Linear); v > 1e-3 {
			t.Errorf("%s moves at %.3g m/s after %g s, want < 1 mm/s", m.Bodies[i].Name, v, duration)
		}
	}
}

func TestTorqueFreeSpinKeepsAngularMomentum(t *testing.T) {
	// Euler's equations: without torque the world angular momentum is
	// constant (REFERENCE-CHECKS.md).
	b := boxBody("puck", 2, r3.Vec{X: 0.4, Y: 0.25, Z: 0.1}, contact.IdentityPose)
	b.Start.Angular = r3.Vec{X: 0.1, Y: 0.2, Z: 6}
	m := &Model{Bodies: []Body{b}}
	s := mustSim(t, m, Settings{})
	l0 := s.AngularMomentum()
	run(t, s, 10)
	l1 := s.AngularMomentum()
	if e := r3.Norm(r3.Sub(l1, l0)) / r3.Norm(l0); e > 1e-3 {
		t.Errorf("angular momentum changed by %.3g relative over 10 s, want < 0.1%%: %v → %v", e, l0, l1)
	}
}

func TestIntermediateAxisUnstable(t *testing.T) {
	// Euler's equations: rotation about the intermediate principal axis is
	// unstable (REFERENCE-CHECKS.md, torque-free spinning body).
	b := boxBody("puck", 2, r3.Vec{X: 0.4, Y: 0.25, Z: 0.1}, contact.IdentityPose)
	b.Start.Angular = r3.Vec{X: 1e-3, Y: 5, Z: 1e-3} // y is the intermediate axis
	s := mustSim(t, &Model{Bodies: []Body{b}}, Settings{})
	least := 1.0
	for s.Time() < 10 {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		axis := s.Body(0).Pose.Rot.Rotate(r3.Vec{Y: 1})
		least = math.Min(least, math.Abs(axis.Y))
	}
	if least > 0.5 {
		t.Errorf("body y axis stayed within %.0f° of world y for 10 s: intermediate-axis spin did not tumble", math.Acos(least)*180/math.Pi)
	}
}

func TestEqualSpheresExchangeVelocity(t *testing.T) {
	// Newton's law of impact: equal spheres, e = 1, no friction, head on:
	// velocities exchange; momentum and energy are conserved
	// (REFERENCE-CHECKS.md).
	a := sphereBody("left", 1, 0.1, r3.Vec{X: -0.5})
	b := sphereBody("right", 1, 0.1, r3.Vec{X: 0.5})
	a.Start.Linear = r3.Vec{X: 2}
	m := &Model{Bodies: []Body{a, b}, Materials: materials(0, 1)}
	s := mustSim(t, m, Settings{})
	k0, _ := s.Energy()
	run(t, s, 0.5)
	va, vb := s.Body(0).Linear.X, s.Body(1).Linear.X
	if math.Abs(va) > 0.02 || relErr(vb, 2) > 0.01 {
		t.Errorf("after impact v = (%.4f, %.4f), want (0, 2) within 1%%", va, vb)
	}
	k1, _ := s.Energy()
	if relErr(k1, k0) > 0.01 {
		t.Errorf("kinetic energy %.5f → %.5f, want conserved within 1%%", k0, k1)
	}
	if p := s.LinearMomentum().X; relErr(p, 2) > 1e-9 {
		t.Errorf("momentum %.12f, want 2", p)
	}
}

func TestPassiveScenesDoNotGainEnergy(t *testing.T) {
	// Energy balance: without actuators or loads, contact and friction can
	// only remove energy (sliding loses μ m g × distance; REFERENCE-CHECKS.md).
	slide := inclineScene(math.Atan(0.6), 0.5)
	drop := &Model{Gravity: down, Static: []StaticShape{floor(0)},
		Bodies: []Body{sphereBody("ball", 0.06, 0.05, r3.Vec{Z: 0.5})}, Materials: materials(0.5, 0.75)}
	stack := stackScene(4)
	tumble := stackScene(3)
	tumble.Bodies[2].Start.Linear = r3.Vec{X: 1.5}
	tumble.Bodies[2].Start.Angular = r3.Vec{Y: 4}
	for name, m := range map[string]*Model{"incline": slide, "drop": drop, "stack": stack, "tumble": tumble} {
		t.Run(name, func(t *testing.T) {
			s := mustSim(t, m, Settings{})
			k, p := s.Energy()
			e0 := k + p
			maxGain := 0.0
			for s.Time() < 1.5 {
				if err := s.Step(); err != nil {
					t.Fatal(err)
				}
				k, p := s.Energy()
				maxGain = math.Max(maxGain, k+p-e0)
			}
			// Position correction may add at most its bounded work; we
			// allow 1e-6 J of numerical noise.
			if maxGain > 1e-6 {
				t.Errorf("energy rose %.3g J above its start", maxGain)
			}
		})
	}
}

func TestSolverFailureIsAStepError(t *testing.T) {
	// DESIGN.md, Bad input: no convergence is an error naming the step,
	// the contacts and the residual, never a silent state.
	m := stackScene(3)
	s := mustSim(t, m, Settings{Solver: contact.SolverSettings{MaxIterations: 1, Tolerance: 1e-300, VelocityTolerance: 1e-300}})
	err := s.Step()
	var se *StepError
	if !errors.As(err, &se) {
		t.Fatalf("got %v, want a *StepError", err)
	}
	msg := err.Error()
	for _, want := range []string{"step 1", "t = 0.001 s", "contacts among bodies", "boxA", "residual"} {
		if !strings.Contains(msg, want) {
			t.Errorf("message %q lacks %q", msg, want)
		}
	}
}
