package calibrate

import (
	"math"
	"testing"

	"stickslip/scenarios"
	"stickslip/sim"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"
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

func TestTunePendulumMatchesGridSearch(t *testing.T) {
	p := pendulumProblem(t)
	tu, err := NewTuner(p)
	if err != nil {
		t.Fatal(err)
	}
	res, err := tu.Tune(TuneSettings{})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("tuned %v → %v, cost %.6g → %.6g (%s, %d iterations, %d evaluations)",
		res.Initial, res.Tuned, res.Before.Mean, res.After.Mean, res.Status, len(res.History)-1, res.Evaluations)
	// Reference: exhaustive search over a 61 × 61 grid of the gains
	// spanning their bounds (the definition of the minimum, no gradients).
	const n = 61
	best, bestX := math.Inf(1), []float64(nil)
	lo, hi := tu.Bounds()
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			x := []float64{lo[0] + (hi[0]-lo[0])*float64(i)/(n-1), lo[1] + (hi[1]-lo[1])*float64(j)/(n-1)}
			ev, err := tu.Evaluate(x, false)
			if err != nil {
				t.Fatal(err)
			}
			if ev.Mean < best {
				best, bestX = ev.Mean, x
			}
		}
	}
	t.Logf("grid best %.6g at %v", best, bestX)
	if res.After.Mean > 1.01*best {
		t.Errorf("tuned cost %.6g is more than 1 %% above the grid search's best %.6g", res.After.Mean, best)
	}
}

func TestTuneRobustWorstTail(t *testing.T) {
	// The arm's mass and joint damping are uncertain (as a fit would
	// leave them): mass 1 ± 0.3 kg, damping 0.05 ± 0.05 N·m·s/rad,
	// correlation 0.3.
	sc := loadPendulum(t)
	names := []string{"mass:arm", "damping:pivot"}
	mean := []float64{1, 0.05}
	cov := mat.NewSymDense(2, []float64{0.09, 0.3 * 0.3 * 0.05, 0.3 * 0.3 * 0.05, 0.0025})
	train, _, err := DrawSamples(sc.Model, names, mean, cov, 16, 1)
	if err != nil {
		t.Fatal(err)
	}
	test, clipped, err := DrawSamples(sc.Model, names, mean, cov, 60, 2)
	if err != nil {
		t.Fatal(err)
	}
	tune := func(draws []ParamDraw) []float64 {
		p := pendulumProblem(t)
		p.Weights.EffortLimit = 1
		p.Limits = map[string]float64{"pivot": 5}
		p.Uncertain, p.Draws = names, draws
		tu, err := NewTuner(p)
		if err != nil {
			t.Fatal(err)
		}
		res, err := tu.Tune(TuneSettings{})
		if err != nil {
			t.Fatal(err)
		}
		return res.Tuned
	}
	nominal := tune(nil)
	robust := tune(train)
	p := pendulumProblem(t)
	p.Weights.EffortLimit = 1
	p.Limits = map[string]float64{"pivot": 5}
	p.Uncertain, p.Draws = names, test
	tu, err := NewTuner(p)
	if err != nil {
		t.Fatal(err)
	}
	evN, err := tu.Evaluate(nominal, false)
	if err != nil {
		t.Fatal(err)
	}
	evR, err := tu.Evaluate(robust, false)
	if err != nil {
		t.Fatal(err)
	}
	sN, sR := evN.Spread(), evR.Spread()
	t.Logf("held-out samples: %d (%d values clipped)", len(test), clipped)
	t.Logf("nominal gains %v: mean %.6g, worst 10 %% %.6g, max %.6g", nominal, sN.Mean, sN.Worst10, sN.Max)
	t.Logf("robust gains  %v: mean %.6g, worst 10 %% %.6g, max %.6g", robust, sR.Mean, sR.Worst10, sR.Max)
	// Acceptance (issue 7): gains tuned over the samples do no worse on
	// the worst tenth of held-out samples than gains tuned on the nominal
	// parameters alone.
	if sR.Worst10 > sN.Worst10 {
		t.Errorf("worst 10 %%: robust gains %.6g, nominal gains %.6g", sR.Worst10, sN.Worst10)
	}
}

// pusherTargets sweeps the shoulder from 0 to 0.5 rad between 0.1 s and
// 0.5 s, so a 0.6 s horizon covers the push.
const pusherTargets = "controller.pd.targets.rows=[[0,0,1.5707963267948966],[0.1,0,1.5707963267948966],[0.5,0.5,1.5707963267948966],[3,0.5,1.5707963267948966]]"

func TestTunePusherFinalPose(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("pusher-cell", pusherTargets)
	if err != nil {
		t.Fatal(err)
	}
	const steps = 600
	// Contact smoothing κ = 1e-4 N·s·m/s: with exact contact the final
	// pose is a rough function of the gains (stick/slip switches), and
	// its piecewise derivative ignores the switching times.
	set := sc.Settings
	set.Solver.Smoothing = 1e-4
	// The target: where the carton ends when the arm is driven with the
	// scene's own stiff gains (300 N·m/rad, 30 N·m·s/rad).
	s, err := sim.New(sc.Model, set)
	if err != nil {
		t.Fatal(err)
	}
	for k := 0; k < steps; k++ {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
	}
	target := s.Body(2).Pose.Pos
	p := &TuneProblem{Model: sc.Model, Settings: set, Steps: steps,
		Gains: []Gain{
			{Name: "kp:shoulder", Initial: 30, Lower: 5, Upper: 600},
			{Name: "kd:shoulder", Initial: 3, Lower: 0.5, Upper: 60},
		},
		Pose:    &PoseTarget{Body: "carton", Position: target},
		Weights: CostWeights{FinalPose: 1e4},
	}
	tu, err := NewTuner(p)
	if err != nil {
		t.Fatal(err)
	}
	res, err := tu.Tune(TuneSettings{Iterations: 15, Progress: func(it TuneIteration) {
		t.Logf("iter %d cost %.6g gains %v (%d evaluations, %.1f s)", it.Iter, it.Cost, it.Gains, it.Evaluations, it.Elapsed)
	}})
	if err != nil {
		t.Fatal(err)
	}
	before, after := res.Before.Samples[0].PoseError, res.After.Samples[0].PoseError
	t.Logf("target %v; final carton position error %.4g m → %.4g m (%.1f×), %s", target, before, after, before/after, res.Status)
	if !(after <= before/5) {
		t.Errorf("final carton position error %.4g m → %.4g m: reduced %.2f×, want at least 5×", before, after, before/after)
	}
}

func TestTuneIndependentOfWorkers(t *testing.T) {
	p := pendulumProblem(t)
	p.Uncertain = []string{"mass:arm"}
	p.Draws = []ParamDraw{{0.8}, {1}, {1.3}, {1.1}, {0.9}}
	var got [][]float64
	for _, w := range []int{1, 2, 5} {
		tu, err := NewTuner(p)
		if err != nil {
			t.Fatal(err)
		}
		tu.Workers = w
		res, err := tu.Tune(TuneSettings{Iterations: 5})
		if err != nil {
			t.Fatal(err)
		}
		got = append(got, append(res.Tuned, res.After.Mean))
	}
	for i := 1; i < len(got); i++ {
		for j := range got[0] {
			if got[i][j] != got[0][j] {
				t.Errorf("workers change the result: %v vs %v", got[i], got[0])
			}
		}
	}
}
