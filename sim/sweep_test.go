package sim

import (
	"math"
	"testing"

	"stickslip/contact"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/spatial/r3"
)

// outputs flattens sampled positions, rotation vectors (relative to ref)
// and joint positions into one vector.
func outputs(frames []Frame, ref []Frame) []float64 {
	var y []float64
	for k, f := range frames {
		for b, bf := range f.Bodies {
			phi := rotDiff(ref[k].Bodies[b].Pose.Rot, bf.Pose.Rot)
			y = append(y, bf.Pose.Pos.X, bf.Pose.Pos.Y, bf.Pose.Pos.Z, phi.X, phi.Y, phi.Z)
		}
		for _, j := range f.Joints {
			y = append(y, j.Q)
		}
	}
	return y
}

func sweepOutputs(smp *Samples, j int) []float64 {
	var y []float64
	for k, f := range smp.Frames {
		for b := range f.Bodies {
			p, r := smp.DPos[k][b][j], smp.DRot[k][b][j]
			y = append(y, p.X, p.Y, p.Z, r.X, r.Y, r.Z)
		}
		for i := range f.Joints {
			y = append(y, smp.DJoint[k][i][j])
		}
	}
	return y
}

// checkSweep compares the forward tangent sweep of each parameter with
// central finite differences of whole rollouts (gonum diff/fd), relative
// error ≤ tol in the 2-norm over all sampled outputs.
func checkSweep(t *testing.T, m *Model, set Settings, names []string, times []float64, tol float64) {
	t.Helper()
	checkSweepFrom(t, m, set, names, 0, times, tol)
}

// checkSweepFrom is checkSweep on a window that restarts at time from from
// the nominal rollout's state there (as calibration windows do).
func checkSweepFrom(t *testing.T, m *Model, set Settings, names []string, from float64, times []float64, tol float64) {
	t.Helper()
	params, err := ParseParams(m, names)
	if err != nil {
		t.Fatal(err)
	}
	s := mustSim(t, m, set)
	if err := s.runTo(from); err != nil {
		t.Fatal(err)
	}
	start := s.frame()
	smp, err := s.Sample(params, times)
	if err != nil {
		t.Fatal(err)
	}
	for j := range params {
		p := &params[j]
		v0 := p.Get(m)
		f := func(y, x []float64) {
			mm := CopyModel(m)
			p.Set(mm, x[0])
			o := mustSim(t, mm, set)
			// From t = 0 the perturbed model's own initial state applies (so
			// start.* parameters act); later windows restart from the
			// nominal state, as calibration windows restart from the log.
			if from > 0 {
				if err := o.SetFrame(&start); err != nil {
					t.Fatal(err)
				}
			}
			fr, err := o.sampleFrames(times)
			if err != nil {
				t.Fatal(err)
			}
			copy(y, outputs(fr, smp.Frames))
		}
		want := sweepOutputs(smp, j)
		jac := make([]float64, len(want))
		fd.Jacobian(matCol(jac), f, []float64{v0}, &fd.JacobianSettings{
			// A relative step of 1e-5 balances truncation error against
			// the noise of the solver's tolerance (1e-10 in velocity);
			// parameters near zero take an absolute step of 1e-7.
			Formula: fd.Central, Step: 1e-5 * math.Max(math.Abs(v0), 1e-2),
		})
		diff := make([]float64, len(want))
		floats.SubTo(diff, want, jac)
		num, den := floats.Norm(diff, 2), floats.Norm(jac, 2)
		if den == 0 && num == 0 {
			continue
		}
		if testing.Verbose() {
			t.Logf("%s: sweep %.6g fd %.6g", p.Name, want, jac)
		}
		if rel := num / math.Max(den, 1e-12); !(rel <= tol) {
			t.Errorf("%s: sweep vs central differences: relative error %.3g > %.0e (‖fd‖ = %.4g)", p.Name, rel, tol, den)
		}
	}
}

// spinningPuck is a box in free flight, spinning about all three axes,
// pushed off its centre of mass.
func spinningPuck() *Model {
	b := boxBody("puck", 2, r3.Vec{X: 0.4, Y: 0.25, Z: 0.1}, contact.Pose{Pos: r3.Vec{Z: 5}, Rot: contact.QuatFromAxisAngle(r3.Vec{X: 1, Y: 1}, 0.4)})
	b.Start.Angular = r3.Vec{X: 0.5, Y: 3, Z: 1}
	b.Start.Linear = r3.Vec{X: 1}
	b.COM = r3.Vec{X: 0.02}
	return &Model{Gravity: down, Bodies: []Body{b}, Loads: []Load{{Body: 0, Point: r3.Vec{X: 0.1}, Force: r3.Vec{Y: 3}}}}
}

func TestSweepFreeFlight(t *testing.T) {
	// No contact: gravity, gyroscopic terms, start state, mass properties.
	checkSweep(t, spinningPuck(), Settings{}, []string{"gravity.z", "mass:puck", "inertia.y:puck", "com.x:puck",
		"start.vx:puck", "start.wy:puck", "start.z:puck"}, []float64{0.1, 0.3}, 1e-5)
}

// lossyArm is the PD arm with damping, armature and joint friction.
func lossyArm() *Model {
	m := pdArm(200, []float64{0.3, -0.4, 0.5})
	for i := range m.Bodies {
		m.Bodies[i].Joint.Damping = 0.3
		m.Bodies[i].Joint.Armature = 0.01
		m.Bodies[i].Joint.Friction = 0.2
		m.Bodies[i].Joint.Position = 0
	}
	return m
}

func TestSweepArm(t *testing.T) {
	// Joints, PD controller, damping, armature and joint friction.
	checkSweep(t, lossyArm(), Settings{}, []string{"kp:motor1", "kd:motor2", "damping:link2-joint", "armature:link1-joint",
		"joint-friction:link3-joint", "mass:link2", "start.q:link1-joint", "start.qd:link3-joint", "gravity.z"}, []float64{0.05, 0.2}, 1e-5)
}

func slidingBox() *Model {
	size := r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}
	b := boxBody("crate", 1.5, size, contact.Pose{Pos: r3.Vec{Z: size.Z / 2}, Rot: contact.IdentityQuat})
	b.Start.Linear = r3.Vec{X: 2, Y: 0.3}
	b.Material = "pine"
	f := floor(0)
	f.Material = "tile"
	return &Model{Gravity: down, Static: []StaticShape{f}, Bodies: []Body{b},
		Materials: Materials{Default: PairProps{Friction: 0.5}, Pairs: []MaterialPair{{A: "pine", B: "tile", PairProps: PairProps{Friction: 0.4}}}}}
}

func TestSweepSlidingBox(t *testing.T) {
	// Contact mode fixed (sliding) over the window.
	checkSweep(t, slidingBox(), Settings{}, []string{"friction:pine/tile", "start.vx:crate", "gravity.z", "start.vy:crate", "start.wz:crate"},
		[]float64{0.05, 0.15}, 1e-5)
}

func TestSweepSlidingMassHasNoEffect(t *testing.T) {
	// Textbook dynamics: a freely sliding block decelerates at μg whatever
	// its mass (REFERENCE-CHECKS.md), so ∂x/∂m = 0; the sweep must say so.
	m := slidingBox()
	params, _ := ParseParams(m, []string{"mass:crate", "inertia.z:crate"})
	smp, err := mustSim(t, m, Settings{}).Sample(params, []float64{0.15})
	if err != nil {
		t.Fatal(err)
	}
	for j, p := range params {
		if d := r3.Norm(smp.DPos[0][0][j]); d > 1e-6 {
			t.Errorf("∂x/∂%s = %.3g, want 0 (mass cancels in sliding friction)", p.Name, d)
		}
	}
}

// bouncingBall is a ball dropped on the floor with restitution 0.7.
func bouncingBall() *Model {
	return &Model{Gravity: down, Static: []StaticShape{floor(0)},
		Bodies:    []Body{sphereBody("ball", 0.06, 0.05, r3.Vec{Z: 0.3})},
		Materials: Materials{Default: PairProps{Friction: 0.5}, Pairs: []MaterialPair{{A: "test", B: "ground", PairProps: PairProps{Friction: 0.5, Restitution: 0.7}}}}}
}

func TestSweepBallDrop(t *testing.T) {
	checkSweep(t, bouncingBall(), Settings{}, []string{"restitution:test/ground", "start.z:ball", "start.vx:ball"}, []float64{0.3}, 1e-5)
}

// matCol wraps a slice as an n×1 matrix for fd.Jacobian.
func matCol(d []float64) *mat.Dense { return mat.NewDense(len(d), 1, d) }

func TestSweepIncline(t *testing.T) {
	m := inclineScene(math.Atan(1.05*0.5), 0.5)
	m.Bodies[0].Material = "pine"
	m.Static[0].Material = "oak"
	m.Materials.Pairs = []MaterialPair{{A: "pine", B: "oak", PairProps: PairProps{Friction: 0.5}}}
	checkSweep(t, m, Settings{}, []string{"friction:pine/oak", "gravity.z", "gravity.y"}, []float64{0.1, 0.3}, 1e-5)
}

// rollingBall is a ball launched without spin: it slides, then rolls.
func rollingBall() *Model {
	b := sphereBody("ball", 0.5, 0.1, r3.Vec{Z: 0.1})
	b.Start.Linear = r3.Vec{X: 3}
	return &Model{Gravity: down, Static: []StaticShape{floor(0)}, Bodies: []Body{b},
		Materials: Materials{Pairs: []MaterialPair{{A: "test", B: "ground", PairProps: PairProps{Friction: 0.3}}}}}
}

func TestSweepRollingBall(t *testing.T) {
	m := rollingBall()
	// Sliding phase (first 0.2 s) and rolling phase (after 0.35 s).
	checkSweep(t, m, Settings{}, []string{"friction:test/ground", "start.vx:ball", "inertia.y:ball"}, []float64{0.1, 0.2}, 1e-5)
	// Rolling: a horizontal gravity component accelerates it at (5/7) g_x,
	// which depends on the inertia through the rolling constraint.
	checkSweepFrom(t, m, Settings{}, []string{"gravity.x"}, 0.5, []float64{0.6, 0.7}, 1e-5)
}

func TestSweepStack(t *testing.T) {
	m := stackScene(10)
	m.Bodies[9].Start.Linear = r3.Vec{X: 0.01}
	// The top box is dragged across the one below (8 N > μ m g = 5.9 N).
	m.Loads = []Load{{Body: 9, Force: r3.Vec{X: 8}}}
	m.Materials.Pairs = []MaterialPair{{A: "test", B: "test", PairProps: PairProps{Friction: 0.6}}}
	// Forty contacts: the finite differences need the solver tightened
	// below its default so that its tolerance does not show as noise.
	checkSweepFrom(t, m, Settings{Solver: contact.SolverSettings{Tolerance: 1e-13, VelocityTolerance: 1e-12}}, []string{"mass:boxJ", "friction:test/test", "gravity.z"}, 0.2, []float64{0.25, 0.3}, 1e-5)
}

func TestSweepPusherCell(t *testing.T) {
	// Mid-push window: the fore link drives the carton across the table.
	// The link presses the carton's side with a four-point manifold and the
	// carton rests on four more: the Delassus operator is rank deficient,
	// so at κ = 0 the impulses (not the motion) are not unique and neither
	// is their derivative. A small κ picks the central solution, smoothly;
	// the sweep then equals central differences of the same smoothed model.
	set := Settings{Solver: contact.SolverSettings{Smoothing: 1e-6}}
	checkSweepFrom(t, pusherCell(), set, []string{"kp:shoulder", "kd:elbow", "friction:card/steel", "mass:carton", "mass:fore"},
		0.8, []float64{0.85, 0.9}, 1e-5)
}

func TestSweepSmoothedAcrossStop(t *testing.T) {
	// With κ > 0 the solve is smooth through slip→stick: the sweep equals
	// central differences of the smoothed forward model at the same κ.
	m := slidingBox()
	m.Bodies[0].Start.Linear = r3.Vec{X: 0.5}
	set := Settings{Solver: contact.SolverSettings{Smoothing: 1e-4}}
	checkSweep(t, m, set, []string{"friction:pine/tile", "start.vx:crate"}, []float64{0.1, 0.2, 0.3}, 1e-5)
}

func TestTraceMatchesForwardGradient(t *testing.T) {
	// A running cost's gradient by Trace equals the final-state gradient
	// when only the last step's cost is counted.
	m := pdArm(200, []float64{0.3, -0.4, 0.5})
	params, _ := ParseParams(m, []string{"kp:motor1", "kd:motor3"})
	want, err := mustSim(t, m, Settings{}).ForwardGradient(params, 50, halfSquares)
	if err != nil {
		t.Fatal(err)
	}
	got := make([]float64, len(params))
	err = mustSim(t, m, Settings{}).Trace(params, 50, func(k int, q, v []float64, dq, dv [][]float64) error {
		if k < 50 {
			return nil
		}
		for j := range params {
			for i := range q {
				got[j] += q[i] * dq[j][i]
			}
			for i := range v {
				got[j] += v[i] * dv[j][i]
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	for j := range got {
		if got[j] != want[j] {
			t.Errorf("%s: Trace %.17g, ForwardGradient %.17g", params[j].Name, got[j], want[j])
		}
	}
}

// scheduledArm is the PD arm following a target table, with a
// feedforward effort table added.
func scheduledArm() *Model {
	m := pdArm(200, []float64{0.3, -0.4, 0.5})
	pd := m.Controller.(*PD)
	pd.Targets = Table{Times: []float64{0, 0.1, 0.3}, Values: [][]float64{{0.3, -0.4, 0.5}, {0.5, -0.2, 0.4}, {0.6, -0.1, 0.2}}}
	m.Controller = Sum{pd, &Feedforward{Efforts: Table{Times: []float64{0, 0.2}, Values: [][]float64{{1, 0, -1}, {2, 1, 0}}}}}
	return m
}

func TestSweepControlInputs(t *testing.T) {
	// Control inputs: entries of the PD target table and of a feedforward
	// effort table added to it.
	checkSweep(t, scheduledArm(), Settings{}, []string{"target.1:motor1", "target.2:motor3", "feedforward.0:motor2", "feedforward.1:motor1"},
		[]float64{0.15, 0.35}, 1e-5)
}
