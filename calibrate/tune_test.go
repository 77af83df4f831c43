package calibrate

import (
	"math"
	"testing"

	"stickslip/scenarios"

	"gonum.org/v1/gonum/diff/fd"
)

// pendulumScene is a one-joint arm: a 1 kg bob 0.5 m below a horizontal
// pivot, driven by one PD actuator. It starts 0.3 rad off its target, so
// stiff gains buy tracking with a large effort spike: the gain optimum is
// interior.
const pendulumScene = `
name: tune-pendulum
description: test pendulum driven by one PD joint
settings: {time_step: 0.002, duration: 1}
materials: {surfaces: [brass]}
bodies:
  - name: arm
    material: brass
    shapes: [{kind: sphere, radius: 0.03, pose: {position: [0, 0, -0.5]}}]
    mass: 1
    com: [0, 0, -0.5]
    inertia: {principal: [0.00036, 0.00036, 0.00036]}
    joint: {name: pivot, kind: revolute, parent: world, frame: {position: [0, 0, 1]}, axis: [0, 1, 0], position: 0.3}
actuators:
  - {name: pivot, joint: pivot}
controller:
  pd:
    kp: {pivot: 20}
    kd: {pivot: 2}
    targets:
      columns: [pivot]
      rows:
        - [0, 0]
        - [0.2, 0]
        - [0.7, 0.6]
        - [2, 0.6]
`

func loadPendulum(t testing.TB, overrides ...string) *scenarios.Scene {
	t.Helper()
	l := scenarios.Loader{Overrides: overrides}
	sc, err := l.Load([]byte(pendulumScene), "pendulum.yaml")
	if err != nil {
		t.Fatal(err)
	}
	return sc
}

func pendulumProblem(t testing.TB) *TuneProblem {
	sc := loadPendulum(t)
	return &TuneProblem{
		Model: sc.Model, Settings: sc.Settings, Steps: 400,
		Gains: []Gain{
			{Name: "kp:pivot", Initial: math.NaN(), Lower: 1, Upper: 200},
			{Name: "kd:pivot", Initial: math.NaN(), Lower: 0.1, Upper: 30},
		},
		Weights: CostWeights{Tracking: 1, Effort: 1e-4},
	}
}

func TestTuneGradientFiniteDifferences(t *testing.T) {
	p := pendulumProblem(t)
	p.Uncertain = []string{"mass:arm", "damping:pivot"}
	p.Draws = []ParamDraw{{1, 0}, {1.2, 0.05}, {0.85, 0.1}}
	p.Weights.EffortLimit = 10
	p.Limits = map[string]float64{"pivot": 4}
	tu, err := NewTuner(p)
	if err != nil {
		t.Fatal(err)
	}
	for _, x := range [][]float64{{20, 2}, {80, 6}, {150, 20}} {
		ev, err := tu.Evaluate(x, true)
		if err != nil {
			t.Fatal(err)
		}
		// Reference: central finite differences of the averaged cost
		// (gonum diff/fd).
		want := fd.Gradient(nil, func(y []float64) float64 {
			e, err := tu.Evaluate(y, false)
			if err != nil {
				t.Fatal(err)
			}
			return e.Mean
		}, x, &fd.Settings{Formula: fd.Central, Step: 1e-4})
		for j := range want {
			rel := math.Abs(ev.Grad[j]-want[j]) / math.Max(math.Abs(want[j]), 1e-12)
			t.Logf("x %v: ∂J/∂%s = %.10g, central differences %.10g (rel %.2g); terms %+v", x, p.Gains[j].Name, ev.Grad[j], want[j], rel, ev.Samples[0])
			if rel > 1e-5 {
				t.Errorf("x %v gain %s: gradient %g, finite differences %g (relative error %.2g > 1e-5)", x, p.Gains[j].Name, ev.Grad[j], want[j], rel)
			}
		}
	}
}
