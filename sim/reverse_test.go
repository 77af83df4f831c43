package sim

import (
	"math"
	"testing"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// halfSquares is the loss ½‖q‖² + ½‖v‖² of the final state.
func halfSquares(q, v, gq, gv []float64) {
	copy(gq, q)
	copy(gv, v)
}

// checkReverse compares the reverse sweep with the forward sweep (they
// must agree to 1e-10: vᵀ(J u) = (Jᵀv)ᵀu), and the checkpointed reverse
// sweep with the plain one (identical).
func checkReverse(t *testing.T, m *Model, names []string, steps int) {
	t.Helper()
	checkReverseSet(t, m, Settings{}, names, steps)
}

// checkReverseSet is checkReverse with settings; it also checks that the
// compact tape gives the same gradient.
func checkReverseSet(t *testing.T, m *Model, set Settings, names []string, steps int) {
	t.Helper()
	params, err := ParseParams(m, names)
	if err != nil {
		t.Fatal(err)
	}
	fwd, err := mustSim(t, m, set).ForwardGradient(params, steps, halfSquares)
	if err != nil {
		t.Fatal(err)
	}
	plain, err := mustSim(t, m, set).ReverseGradient(params, steps, halfSquares, ReverseOptions{})
	if err != nil {
		t.Fatal(err)
	}
	ck, err := mustSim(t, m, set).ReverseGradient(params, steps, halfSquares, ReverseOptions{Checkpoint: true})
	if err != nil {
		t.Fatal(err)
	}
	compact, err := mustSim(t, m, set).ReverseGradient(params, steps, halfSquares, ReverseOptions{Compact: true})
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range params {
		f, r := fwd[i], plain.Gradient[i]
		if d := math.Abs(f - r); !(d <= 1e-10*math.Max(1, math.Abs(f))) {
			t.Errorf("%s: reverse %.15g, forward %.15g", p.Name, r, f)
		}
		if ck.Gradient[i] != r {
			t.Errorf("%s: checkpointed %.17g ≠ plain %.17g", p.Name, ck.Gradient[i], r)
		}
		if d := math.Abs(compact.Gradient[i] - r); !(d <= 1e-12*math.Max(1, math.Abs(r))) {
			t.Errorf("%s: with the compact tape %.17g, the full one %.17g", p.Name, compact.Gradient[i], r)
		}
	}
	if plain.TapeBytes > 0 && compact.TapeBytes >= plain.TapeBytes {
		t.Errorf("compact tape %d B not smaller than the full one %d B", compact.TapeBytes, plain.TapeBytes)
	}
	if ck.TapeBytes >= plain.TapeBytes {
		t.Errorf("checkpointed tape %d B not smaller than plain %d B", ck.TapeBytes, plain.TapeBytes)
	}
}

func TestReverseMatchesForwardArm(t *testing.T) {
	m := pdArm(200, []float64{0.3, -0.4, 0.5})
	for i := range m.Bodies {
		m.Bodies[i].Joint.Damping = 0.3
		m.Bodies[i].Joint.Position = 0
	}
	checkReverse(t, m, []string{"kp:motor1", "kd:motor2", "damping:link2-joint", "mass:link3", "start.q:link1-joint", "gravity.z"}, 200)
}

func TestReverseMatchesForwardContact(t *testing.T) {
	// Through the contact solve: a box sliding on a plane and a pushed
	// stack (implicit differentiation of each step's solve).
	checkReverse(t, slidingBox(), []string{"friction:pine/tile", "mass:crate", "start.vx:crate", "gravity.z"}, 120)
	m := stackScene(3)
	m.Loads = []Load{{Body: 2, Force: r3.Vec{X: 8}}}
	m.Materials.Pairs = []MaterialPair{{A: "test", B: "test", PairProps: PairProps{Friction: 0.6}}}
	checkReverse(t, m, []string{"friction:test/test", "mass:boxC", "gravity.z"}, 80)
}

func TestReverseMatchesForwardScenes(t *testing.T) {
	// Every parameter kind and every stage of the step, through the scenes
	// of the sweep tests (sweep_test.go checks those against central
	// differences).
	t.Run("free-flight", func(t *testing.T) {
		checkReverse(t, spinningPuck(), []string{"gravity.z", "gravity.x", "mass:puck", "inertia.x:puck", "inertia.y:puck", "com.x:puck",
			"com.z:puck", "start.vx:puck", "start.wy:puck", "start.z:puck"}, 150)
	})
	t.Run("mixed-tree", func(t *testing.T) {
		m := mixedTree()
		for i := range m.Bodies {
			m.Bodies[i].Shapes = nil // its links overlap; this checks the joints
		}
		m.Bodies[0].Start.Angular = r3.Vec{X: 1, Y: -2, Z: 0.5}
		checkReverse(t, m, []string{"mass:socket", "com.x:socket", "com.y:hinge", "inertia.z:hinge", "inertia.x:bolted",
			"mass:slide", "gravity.y"}, 100)
	})
	t.Run("lossy-arm", func(t *testing.T) {
		checkReverse(t, lossyArm(), []string{"kp:motor1", "kd:motor2", "damping:link2-joint", "armature:link1-joint",
			"joint-friction:link3-joint", "mass:link2", "start.q:link1-joint", "start.qd:link3-joint", "gravity.z"}, 120)
	})
	t.Run("schedule", func(t *testing.T) {
		checkReverse(t, scheduledArm(), []string{"target.1:motor1", "target.2:motor3", "feedforward.0:motor2", "feedforward.1:motor1"}, 200)
	})
	t.Run("bounce", func(t *testing.T) {
		checkReverse(t, bouncingBall(), []string{"restitution:test/ground", "start.z:ball", "start.vx:ball", "mass:ball"}, 300)
	})
	t.Run("rolling", func(t *testing.T) {
		checkReverse(t, rollingBall(), []string{"friction:test/ground", "start.vx:ball", "inertia.y:ball", "gravity.x"}, 250)
	})
	t.Run("incline", func(t *testing.T) {
		m := inclineScene(math.Atan(1.05*0.5), 0.5)
		checkReverse(t, m, []string{"gravity.z", "gravity.y", "mass:" + m.Bodies[0].Name}, 150)
	})
	t.Run("pusher", func(t *testing.T) {
		set := Settings{Solver: contact.SolverSettings{Smoothing: 1e-6}}
		checkReverseSet(t, pusherCell(), set, []string{"kp:shoulder", "kd:elbow", "friction:card/steel", "mass:carton", "mass:fore"}, 150)
	})
	t.Run("joint-limit", func(t *testing.T) {
		// A lever driven onto its limit: one-sided rows whose gap is a
		// joint coordinate.
		b := link("lever", -1, 0, 0.5, 2, r3.Vec{Y: 1})
		b.Joint.Limited, b.Joint.Lower, b.Joint.Upper = true, -0.3, 0.3
		m := &Model{Gravity: down, Bodies: []Body{b}, Actuators: []Actuator{{Name: "m", Body: 0}},
			Controller: &Feedforward{Efforts: Table{Times: []float64{0, 1}, Values: [][]float64{{2}, {4}}}}}
		checkReverse(t, m, []string{"mass:lever", "feedforward.0:m", "feedforward.1:m", "gravity.z", "start.qd:" + b.Joint.Name}, 400)
	})
	t.Run("tumbling-box", func(t *testing.T) {
		// At κ = 0 the face-on-face manifold makes W + K nearly singular,
		// and the forward and transposed solves with its factors then agree
		// only to the rounding error times its condition number (about
		// 1e-5 here); κ = 1e-6 makes the derivative unique and well
		// conditioned (DEVELOPERS.md).
		set := Settings{Solver: contact.SolverSettings{Smoothing: 1e-6}}
		checkReverseSet(t, tumblingBoxes(), set, []string{"friction:test/test", "mass:top", "inertia.x:top", "start.wx:top", "start.y:top"}, 250)
	})
}

// tumblingBoxes drops a spinning, tilted box onto a box resting on the
// floor: vertex, edge–edge and face contacts whose normals turn with the
// bodies.
func tumblingBoxes() *Model {
	size := r3.Vec{X: 0.3, Y: 0.2, Z: 0.15}
	low := boxBody("low", 2, size, contact.Pose{Pos: r3.Vec{Z: size.Z / 2}, Rot: contact.IdentityQuat})
	top := boxBody("top", 1, r3.Vec{X: 0.2, Y: 0.12, Z: 0.1}, contact.Pose{Pos: r3.Vec{X: 0.02, Y: 0.01, Z: 0.26},
		Rot: contact.QuatFromAxisAngle(r3.Vec{X: 1, Y: 0.4, Z: 0.2}, 0.5)})
	top.Start.Angular = r3.Vec{X: 2, Y: -1, Z: 0.5}
	return &Model{Gravity: down, Static: []StaticShape{floor(0)}, Bodies: []Body{low, top},
		Materials: Materials{Default: PairProps{Friction: 0.5}, Pairs: []MaterialPair{{A: "test", B: "test", PairProps: PairProps{Friction: 0.4}}}}}
}

func TestReverseReusesTape(t *testing.T) {
	// A second sweep on the same simulator reuses the first one's tape and
	// gives the same gradient: bit for bit with the same options, to
	// rounding with the compact tape.
	m := stackScene(3)
	m.Loads = []Load{{Body: 2, Force: r3.Vec{X: 8}}}
	params, err := ParseParams(m, []string{"mass:boxC", "gravity.z"})
	if err != nil {
		t.Fatal(err)
	}
	s := mustSim(t, m, Settings{})
	first, err := s.ReverseGradient(params, 60, halfSquares, ReverseOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, compact := range []bool{true, false} {
		s.Reset()
		again, err := s.ReverseGradient(params, 60, halfSquares, ReverseOptions{Compact: compact})
		if err != nil {
			t.Fatal(err)
		}
		for i := range params {
			if !compact && again.Gradient[i] != first.Gradient[i] {
				t.Errorf("%s: %.17g, first sweep %.17g", params[i].Name, again.Gradient[i], first.Gradient[i])
			}
			if d := math.Abs(again.Gradient[i] - first.Gradient[i]); !(d <= 1e-12*math.Max(1, math.Abs(first.Gradient[i]))) {
				t.Errorf("compact %v: %s: %.17g, first sweep %.17g", compact, params[i].Name, again.Gradient[i], first.Gradient[i])
			}
		}
	}
}

func TestReverseConcurrent(t *testing.T) {
	// Sweeps on simulators of one model in parallel (pooled tapes) give
	// the serial gradient, bit for bit.
	m := stackScene(3)
	m.Loads = []Load{{Body: 2, Force: r3.Vec{X: 8}}}
	m.Materials.Pairs = []MaterialPair{{A: "test", B: "test", PairProps: PairProps{Friction: 0.6}}}
	params, err := ParseParams(m, []string{"mass:boxB", "gravity.z", "friction:test/test"})
	if err != nil {
		t.Fatal(err)
	}
	want, err := mustSim(t, m, Settings{}).ReverseGradient(params, 50, halfSquares, ReverseOptions{})
	if err != nil {
		t.Fatal(err)
	}
	got := make([]*ReverseResult, 4)
	errs := make([]error, len(got))
	done := make(chan int)
	for i := range got {
		go func() {
			defer func() { done <- i }()
			s, err := New(m, Settings{})
			if err != nil {
				errs[i] = err
				return
			}
			got[i], errs[i] = s.ReverseGradient(params, 50, halfSquares, ReverseOptions{Compact: i%2 == 1})
		}()
	}
	for range got {
		<-done
	}
	for i, r := range got {
		if errs[i] != nil {
			t.Fatal(errs[i])
		}
		for j := range params {
			tol := 0.0
			if i%2 == 1 {
				tol = 1e-12 * math.Max(1, math.Abs(want.Gradient[j]))
			}
			if d := math.Abs(r.Gradient[j] - want.Gradient[j]); d > tol {
				t.Errorf("sweep %d: %s: %.17g, serial %.17g", i, params[j].Name, r.Gradient[j], want.Gradient[j])
			}
		}
	}
}
