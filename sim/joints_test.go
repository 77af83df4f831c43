package sim

import (
	"math"
	"math/rand/v2"
	"testing"

	"stickslip/contact"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/spatial/r3"
)

// link returns a slender box link of length l along its x axis, with its
// frame at the proximal joint, hinged about axis to its parent at offset
// (the parent's length along x). Inertia about the centre from the
// handbook box table.
func link(name string, parent int, offset, l, m float64, axis r3.Vec) Body {
	const w = 0.04
	return Body{
		Name: name, Mass: m, COM: r3.Vec{X: l / 2}, Material: "link",
		Inertia: contact.Diag3(r3.Vec{X: m * (w*w + w*w) / 12, Y: m * (l*l + w*w) / 12, Z: m * (l*l + w*w) / 12}),
		Shapes:  []contact.Shape{{Kind: contact.Box, HalfExtents: r3.Vec{X: l / 2, Y: w / 2, Z: w / 2}, Local: contact.Pose{Pos: r3.Vec{X: l / 2}, Rot: contact.IdentityQuat}}},
		Joint:   Joint{Name: name + "-joint", Kind: Revolute, Parent: parent, Axis: axis, Frame: contact.Pose{Pos: r3.Vec{X: offset}, Rot: contact.IdentityQuat}},
	}
}

// arm returns an n-link planar arm hanging from the world, hinged about y.
func arm(n int) *Model {
	m := &Model{Gravity: down}
	for i := 0; i < n; i++ {
		off := 0.0
		if i > 0 {
			off = 0.4
		}
		m.Bodies = append(m.Bodies, link("link"+string(rune('1'+i)), i-1, off, 0.4, 1.5-0.3*float64(i), r3.Vec{Y: 1}))
	}
	return m
}

// mixedTree returns a tree with every joint kind: a free base carrying a
// revolute, a prismatic, a ball and a fixed child.
func mixedTree() *Model {
	base := boxBody("base", 3, r3.Vec{X: 0.4, Y: 0.3, Z: 0.2}, contact.Pose{Pos: r3.Vec{Z: 1}, Rot: contact.QuatFromAxisAngle(r3.Vec{X: 1, Y: 2, Z: 3}, 0.7)})
	a := link("hinge", 0, 0.2, 0.3, 0.8, r3.Vec{Y: 1, Z: 1})
	b := link("slide", 1, 0.3, 0.25, 0.5, r3.Vec{X: 1})
	b.Joint.Kind = Prismatic
	c := link("socket", 0, -0.2, 0.3, 0.6, r3.Vec{})
	c.Joint.Kind = Ball
	c.COM = r3.Vec{X: 0.1, Y: 0.02, Z: -0.03}
	d := link("bolted", 3, 0.3, 0.1, 0.3, r3.Vec{})
	d.Joint.Kind = Fixed
	a.Joint.Armature = 0.01
	return &Model{Gravity: down, Bodies: []Body{base, a, b, c, d}}
}

// randomState sets a random configuration and velocity.
func randomState(s *Sim, rng *rand.Rand) {
	for i := range s.model.Bodies {
		bl := &s.lay.bodies[i]
		q := s.q[bl.qOff : bl.qOff+bl.nq]
		switch s.model.Bodies[i].Joint.Kind {
		case Free:
			q[0], q[1], q[2] = rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()
			r := contact.Quat{W: rng.NormFloat64(), X: rng.NormFloat64(), Y: rng.NormFloat64(), Z: rng.NormFloat64()}.Normalize()
			q[3], q[4], q[5], q[6] = r.W, r.X, r.Y, r.Z
		case Ball:
			r := contact.Quat{W: rng.NormFloat64(), X: rng.NormFloat64(), Y: rng.NormFloat64(), Z: rng.NormFloat64()}.Normalize()
			q[0], q[1], q[2], q[3] = r.W, r.X, r.Y, r.Z
		case Revolute, Prismatic:
			q[0] = rng.NormFloat64()
		}
	}
	for i := range s.v {
		s.v[i] = rng.NormFloat64()
	}
	s.kin.update(s.model, s.lay, s.q, s.v)
}

// denseMass returns the mass matrix of tree 0 as a gonum matrix.
func denseMass(s *Sim) *mat.SymDense {
	s.kin.massMatrix(s.model, s.lay, s.mass)
	n := s.lay.nv
	return mat.NewSymDense(n, append([]float64(nil), s.mass[:n*n]...))
}

func TestMassMatrixPropertiesAndEnergy(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for name, m := range map[string]*Model{"arm3": arm(3), "mixed": mixedTree()} {
		s := mustSim(t, m, Settings{})
		if len(s.lay.trees) != 1 {
			t.Fatalf("%s: want one tree", name)
		}
		for trial := 0; trial < 20; trial++ {
			randomState(s, rng)
			M := denseMass(s)
			// Symmetric by construction; positive definite checked by
			// gonum's Cholesky (REFERENCE-CHECKS.md: gonum as reference).
			var ch mat.Cholesky
			if !ch.Factorize(M) {
				t.Fatalf("%s: mass matrix not positive definite", name)
			}
			// ½ vᵀ M v equals Σ ½ m |v_c|² + ½ ωᵀ I_c ω from each body's
			// twist (König's theorem), less armature energy.
			v := mat.NewVecDense(len(s.v), s.v)
			quad := 0.5 * mat.Inner(v, M, v)
			var direct float64
			for i, b := range m.Bodies {
				vel := s.kin.vel[i]
				vc := vel.pointVel(s.kin.com[i])
				r := s.kin.pose[i].Rot.Mat()
				ic := r.Mul(b.Inertia).Mul(r.T())
				direct += 0.5*b.Mass*r3.Dot(vc, vc) + 0.5*r3.Dot(vel.w, ic.MulVec(vel.w))
				if b.Joint.Armature != 0 {
					vv := s.v[s.lay.bodies[i].vOff]
					direct += 0.5 * b.Joint.Armature * vv * vv
				}
			}
			if e := math.Abs(quad-direct) / direct; e > 1e-12 {
				t.Errorf("%s: ½vᵀMv = %.15g, Σ body kinetic energy = %.15g (rel %.2g > 1e-12)", name, quad, direct, e)
			}
		}
	}
}

func TestInverseForwardDynamicsRoundTrip(t *testing.T) {
	// Forward dynamics by CRBA + Cholesky, inverse by recursive
	// Newton–Euler (Featherstone): τ → a → τ to 1e-10.
	rng := rand.New(rand.NewPCG(3, 4))
	for name, m := range map[string]*Model{"arm3": arm(3), "mixed": mixedTree()} {
		s := mustSim(t, m, Settings{})
		n := s.lay.nv
		for trial := 0; trial < 20; trial++ {
			randomState(s, rng)
			tau := make([]float64, n)
			for i := range tau {
				tau[i] = 10 * rng.NormFloat64()
			}
			c := make([]float64, n)
			s.kin.bias(m, s.lay, s.v, 0, c)
			M := denseMass(s)
			rhs := mat.NewVecDense(n, nil)
			for i := range tau {
				rhs.SetVec(i, tau[i]-c[i])
			}
			var acc mat.VecDense
			var ch mat.Cholesky
			ch.Factorize(M)
			if err := ch.SolveVecTo(&acc, rhs); err != nil {
				t.Fatal(err)
			}
			back := make([]float64, n)
			s.kin.inverseDynamics(m, s.lay, s.v, acc.RawVector().Data, 0, back)
			for i := range back {
				if d := math.Abs(back[i] - tau[i]); d > 1e-10*math.Max(1, math.Abs(tau[i])) {
					t.Errorf("%s: τ[%d] = %.12g after round trip, want %.12g", name, i, back[i], tau[i])
				}
			}
		}
	}
}

// period measures the mean period of the first joint's oscillation from
// its upward zero crossings, interpolated within the step.
func period(t *testing.T, s *Sim, duration float64) float64 {
	t.Helper()
	var crossings []float64
	prev := s.q[0]
	for s.Time() < duration {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		if q := s.q[0]; prev < 0 && q >= 0 {
			h := s.set.TimeStep
			crossings = append(crossings, s.Time()-h+h*(-prev)/(q-prev))
		}
		prev = s.q[0]
	}
	if len(crossings) < 3 {
		t.Fatalf("only %d zero crossings in %g s", len(crossings), duration)
	}
	return (crossings[len(crossings)-1] - crossings[0]) / float64(len(crossings)-1)
}

func TestPendulumPeriods(t *testing.T) {
	const theta0 = 0.05 // small swing: the amplitude correction θ₀²/16 is 1.6e-4
	t.Run("simple", func(t *testing.T) {
		// Simple pendulum: T = 2π √(L/g) (REFERENCE-CHECKS.md). A point
		// mass: a body whose mass sits at distance L with negligible
		// inertia about its centre.
		const L = 0.8
		b := link("bob", -1, 0, L, 1, r3.Vec{Y: 1})
		b.COM = r3.Vec{X: L}
		b.Inertia = contact.Diag3(r3.Vec{X: 1e-9, Y: 1e-9, Z: 1e-9})
		// Hanging down: the link's x axis points along −z at q = 0.
		b.Joint.Frame.Rot = contact.QuatFromAxisAngle(r3.Vec{Y: 1}, math.Pi/2)
		b.Joint.Position = theta0
		s := mustSim(t, &Model{Gravity: down, Bodies: []Body{b}}, Settings{})
		got := period(t, s, 10)
		want := 2 * math.Pi * math.Sqrt(L/g)
		if e := relErr(got, want); e > 0.005 {
			t.Errorf("period %.5f s, want 2π√(L/g) = %.5f (rel err %.2g > 0.5%%)", got, want, e)
		}
	})
	t.Run("physical", func(t *testing.T) {
		// Physical pendulum: T = 2π √(I/(m g d)), I about the pivot by the
		// parallel-axis theorem (REFERENCE-CHECKS.md).
		const L, m = 0.6, 2.0
		b := link("rod", -1, 0, L, m, r3.Vec{Y: 1})
		b.Joint.Frame.Rot = contact.QuatFromAxisAngle(r3.Vec{Y: 1}, math.Pi/2)
		b.Joint.Position = theta0
		s := mustSim(t, &Model{Gravity: down, Bodies: []Body{b}}, Settings{})
		got := period(t, s, 10)
		d := L / 2
		I := b.Inertia.At(1, 1) + m*d*d
		want := 2 * math.Pi * math.Sqrt(I/(m*g*d))
		if e := relErr(got, want); e > 0.005 {
			t.Errorf("period %.5f s, want 2π√(I/(mgd)) = %.5f (rel err %.2g > 0.5%%)", got, want, e)
		}
	})
}

func TestDoublePendulumEnergy(t *testing.T) {
	// Conservation of energy for an undamped double pendulum over 10 s
	// (Newton's laws): drift below 0.5 %.
	m := arm(2)
	m.Bodies[0].Joint.Position = 1.2
	m.Bodies[1].Joint.Position = -0.5
	s := mustSim(t, m, Settings{})
	k, p := s.Energy()
	e0 := k + p
	// Measure against the swing's energy scale: potential from hanging.
	scale := 0.0
	worst := 0.0
	for s.Time() < 10 {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		k, p := s.Energy()
		worst = math.Max(worst, math.Abs(k+p-e0))
		scale = math.Max(scale, k)
	}
	if worst/scale > 0.005 {
		t.Errorf("energy drift %.4g J against a kinetic-energy scale of %.4g J (%.2g > 0.5%%)", worst, scale, worst/scale)
	}
}

// pdArm is the three-link arm held at a pose by PD control.
func pdArm(kp float64, target []float64) *Model {
	m := arm(3)
	for i := range m.Bodies {
		m.Actuators = append(m.Actuators, Actuator{Name: "motor" + string(rune('1'+i)), Body: i})
	}
	kps := []float64{kp, kp, kp}
	kds := []float64{0.1 * kp, 0.1 * kp, 0.1 * kp}
	m.Controller = &PD{Kp: kps, Kd: kds, Targets: Table{Times: []float64{0}, Values: [][]float64{target}}}
	for i := range m.Bodies {
		m.Bodies[i].Joint.Position = target[i]
	}
	return m
}

func TestPDSteadyStateError(t *testing.T) {
	// Statics: at rest, Kp (q* − q) = G(q), so the error is Kp⁻¹ times the
	// gravity torque at the equilibrium.
	const kp = 400
	target := []float64{0.3, -0.4, 0.5}
	m := pdArm(kp, target)
	s := mustSim(t, m, Settings{})
	run(t, s, 6)
	grav := make([]float64, 3)
	zero := make([]float64, 3)
	s.kin.bias(m, s.lay, zero, 0, grav)
	for i := range target {
		got := target[i] - s.q[i]
		want := grav[i] / kp
		if e := math.Abs(got-want) / math.Abs(want); e > 0.01 {
			t.Errorf("joint %d: error %.6g rad, want Kp⁻¹ G = %.6g (rel %.2g > 1%%)", i, got, want, e)
		}
	}
}

func TestJointLimitHolds(t *testing.T) {
	// A limit row is a one-sided constraint: penetration ≤ 1e-4 rad while
	// a torque of twice the gravity load drives into it.
	b := link("lever", -1, 0, 0.5, 2, r3.Vec{Y: 1})
	b.Joint.Limited, b.Joint.Lower, b.Joint.Upper = true, -0.3, 0.3
	// Horizontal at q = 0; gravity load m g L/2 about y. Positive y rotation
	// lowers the tip, so drive positive.
	load := 2 * g * 0.25
	m := &Model{Gravity: down, Bodies: []Body{b},
		Actuators:  []Actuator{{Name: "m", Body: 0}},
		Controller: &Feedforward{Efforts: Table{Times: []float64{0}, Values: [][]float64{{2 * load}}}}}
	s := mustSim(t, m, Settings{})
	worst := 0.0
	for s.Time() < 2 {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		worst = math.Max(worst, s.q[0]-0.3)
	}
	if worst > 1e-4 {
		t.Errorf("limit penetrated by %.3g rad, want ≤ 1e-4", worst)
	}
	if s.q[0] < 0.3-1e-3 {
		t.Errorf("lever at %.4f rad, want resting on the 0.3 rad limit", s.q[0])
	}
}

func TestStiffPDStable(t *testing.T) {
	// Kp = 1e4 N·m/rad, critical damping Kd = 2√(Kp I) on a 1 kg·m² link
	// at h = 1 ms: bounded, and settles (linear second-order system).
	b := Body{Name: "rotor", Mass: 1, Inertia: contact.Diag3(r3.Vec{X: 1, Y: 1, Z: 1}),
		Joint: Joint{Name: "spin", Kind: Revolute, Parent: -1, Axis: r3.Vec{Z: 1}}}
	kp := 1e4
	kd := 2 * math.Sqrt(kp*1)
	m := &Model{Bodies: []Body{b}, Actuators: []Actuator{{Name: "m", Body: 0}},
		Controller: &PD{Kp: []float64{kp}, Kd: []float64{kd}, Targets: Table{Times: []float64{0}, Values: [][]float64{{1}}}}}
	s := mustSim(t, m, Settings{})
	peak := 0.0
	for s.Time() < 1 {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		peak = math.Max(peak, math.Abs(s.q[0]))
	}
	if peak > 1.05 {
		t.Errorf("overshoot to %.4f rad with critical damping", peak)
	}
	if math.Abs(s.q[0]-1) > 1e-4 || math.Abs(s.v[0]) > 1e-3 {
		t.Errorf("after 1 s: q = %.6f, v = %.3g; want settled at 1", s.q[0], s.v[0])
	}
}

func TestTableValidate(t *testing.T) {
	tb := Table{Times: []float64{0, 1, 0.5}, Values: [][]float64{{0}, {1}, {2}}}
	if err := tb.Validate(1); err == nil {
		t.Error("decreasing times accepted")
	}
}

func TestSphericalPendulumStart(t *testing.T) {
	// A ball-jointed pendulum started tilted 40° and spinning about the
	// vertical. It starts at the given rotation and angular velocity, and
	// the spherical pendulum conserves its energy and the vertical
	// component of its angular momentum about the pivot (gravity's torque
	// about the pivot is horizontal; textbook mechanics, e.g. Goldstein,
	// Classical Mechanics, the spherical pendulum).
	const l, mass = 0.6, 1.5
	rot := contact.QuatFromAxisAngle(r3.Vec{X: 1}, 40*math.Pi/180)
	spin := r3.Vec{Z: 3}
	bob := Body{Name: "bob", Mass: mass, COM: r3.Vec{Z: -l},
		Inertia: contact.Diag3(r3.Vec{X: 0.002, Y: 0.002, Z: 0.001}),
		Joint:   Joint{Name: "pivot", Kind: Ball, Parent: -1, Frame: contact.IdentityPose, Rotation: rot, Spin: spin}}
	m := &Model{Gravity: down, Bodies: []Body{bob}}
	s := mustSim(t, m, Settings{})
	b := s.Body(0)
	if d := r3.Norm(r3.Sub(b.Angular, spin)); d > 1e-12 {
		t.Errorf("starting angular velocity %v, want %v", b.Angular, spin)
	}
	if d := r3.Norm(r3.Sub(b.Pose.Rot.Rotate(r3.Vec{Z: -1}), rot.Rotate(r3.Vec{Z: -1}))); d > 1e-12 {
		t.Errorf("starting pose %v, want rotation %v", b.Pose.Rot, rot)
	}
	k, p := s.Energy()
	e0, lz0 := k+p, s.AngularMomentum().Z
	worstE, worstL := 0.0, 0.0
	for s.Time() < 5 {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
		k, p := s.Energy()
		worstE = math.Max(worstE, math.Abs(k+p-e0))
		worstL = math.Max(worstL, math.Abs(s.AngularMomentum().Z-lz0))
	}
	t.Logf("energy drift %.2g of the kinetic energy, L_z drift %.2g", worstE/k, worstL/math.Abs(lz0))
	if worstE/k > 0.005 {
		t.Errorf("energy drift %.3g J (%.2g of the kinetic energy)", worstE, worstE/k)
	}
	if worstL/math.Abs(lz0) > 0.001 {
		t.Errorf("vertical angular momentum drift %.3g of %.4g kg·m²/s", worstL, lz0)
	}
}

// ballBob is a bob hanging from the world by a ball joint, started tilted
// and spinning, with joint damping, Coulomb friction and armature.
func ballBob() *Model {
	bob := Body{Name: "bob", Mass: 1.5, COM: r3.Vec{Z: -0.6},
		Inertia: contact.Diag3(r3.Vec{X: 0.002, Y: 0.003, Z: 0.001}),
		Joint: Joint{Name: "pivot", Kind: Ball, Parent: -1, Frame: contact.IdentityPose,
			Rotation: contact.QuatFromAxisAngle(r3.Vec{X: 1, Y: 0.3}, 0.7), Spin: r3.Vec{X: 0.5, Z: 3},
			Damping: 0.01, Friction: 0.02, Armature: 0.004}}
	return &Model{Gravity: down, Bodies: []Body{bob}}
}

func TestBallJointFrictionAndArmature(t *testing.T) {
	// A ball without gravity, spinning about a fixed axis, with Coulomb
	// joint friction F and armature a: the constant friction torque
	// decelerates it at F/(I + a) about the same axis (Newton–Euler for a
	// body of isotropic inertia I: no gyroscopic torque).
	const inertia, arm, fric, w0 = 0.01, 0.004, 0.003, 2.0
	axis := r3.Unit(r3.Vec{X: 1, Y: -2, Z: 0.5})
	ball := Body{Name: "ball", Mass: 1, Inertia: contact.Diag3(r3.Vec{X: inertia, Y: inertia, Z: inertia}),
		Joint: Joint{Name: "socket", Kind: Ball, Parent: -1, Frame: contact.IdentityPose,
			Rotation: contact.QuatFromAxisAngle(r3.Vec{Y: 1}, 0.4), Spin: r3.Scale(w0, axis), Friction: fric, Armature: arm}}
	s := mustSim(t, &Model{Bodies: []Body{ball}}, Settings{})
	for s.Time() < 1-1e-9 {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
	}
	w := s.Body(0).Angular
	want := w0 - fric/(inertia+arm)*s.Time()
	if got := r3.Dot(w, axis); math.Abs(got-want) > 0.002*w0 {
		t.Errorf("spin after %.3g s: %.6g rad/s, want %.6g", s.Time(), got, want)
	}
	if off := r3.Norm(r3.Sub(w, r3.Scale(r3.Dot(w, axis), axis))); off > 1e-9 {
		t.Errorf("spin axis drifted: %.3g rad/s off the axis", off)
	}
}

func TestSweepBallJoint(t *testing.T) {
	// Ball-joint damping, Coulomb friction and armature, against central
	// differences; and the reverse sweep against the forward one.
	names := []string{"joint-friction:pivot", "armature:pivot", "damping:pivot", "mass:bob", "gravity.x"}
	checkSweep(t, ballBob(), Settings{}, names, []float64{0.1, 0.3}, 1e-5)
	checkReverse(t, ballBob(), names, 300)
}
