package sim

import (
	"math"
	"testing"

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
	params, err := ParseParams(m, names)
	if err != nil {
		t.Fatal(err)
	}
	fwd, err := mustSim(t, m, Settings{}).ForwardGradient(params, steps, halfSquares)
	if err != nil {
		t.Fatal(err)
	}
	plain, err := mustSim(t, m, Settings{}).ReverseGradient(params, steps, halfSquares, ReverseOptions{})
	if err != nil {
		t.Fatal(err)
	}
	ck, err := mustSim(t, m, Settings{}).ReverseGradient(params, steps, halfSquares, ReverseOptions{Checkpoint: true})
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
