package calibrate

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strings"
	"sync"
	"time"

	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

// Controller gain tuning.
//
// The task cost of one rollout over N steps of length h is
//
//	J = w_track Σ_{k=1..N} h ‖q_k − q*(t_k)‖²             (tracking, rad²·s)
//	  + w_effort Σ_{k=0..N−1} h Σ_a u_a,k²                 (effort, N²m²·s)
//	  + w_limit Σ_{k=0..N−1} h Σ_a max(0, |τ_a,k| − L_a)²   (effort above a limit)
//	  + w_pose ‖p_N − p*‖²                                  (final position, m²)
//
// where τ_a,k is the effort the controller commands at state k (the
// effort of step k+1), u_a,k the effort applied after the actuator's own
// limit, q the tracked joint coordinates and p the position of a free
// body. The tuned cost is the mean of J over parameter samples. Its
// gradient with respect to the gains comes from the exact forward tangents
// of sim.Trace: ∂τ/∂θ = −K_p ∂q/∂θ − K_d ∂v/∂θ plus (q* − q) for θ = K_p
// and (q̇* − q̇) for θ = K_d of the same actuator; a saturated actuator
// applies a constant effort, so its applied effort has zero derivative.

// Gain is a controller gain the tuner adjusts.
type Gain struct {
	// Name is kp:ACTUATOR or kd:ACTUATOR.
	Name string
	// Initial is the starting value; NaN takes the model's value.
	Initial float64
	// Lower and Upper bound the gain; both are required and finite.
	Lower, Upper float64
}

// CostWeights weight the terms of the task cost (see above). Zero leaves a
// term out.
type CostWeights struct {
	Tracking    float64
	Effort      float64
	EffortLimit float64
	FinalPose   float64
}

// PoseTarget asks a free body to end at a world position.
type PoseTarget struct {
	Body     string
	Position r3.Vec
}

// ParamDraw is one sample of the uncertain parameters: values in the order
// of TuneProblem.Uncertain.
type ParamDraw []float64

// TuneProblem is one tuning task on a model.
type TuneProblem struct {
	// Model is the nominal model; it is never modified.
	Model    *sim.Model
	Settings sim.Settings
	Gains    []Gain
	// Steps is the horizon in time steps.
	Steps int
	// Track lists the actuators whose joints are tracked (nil: all).
	// Reference holds one column per tracked actuator, in Track order; nil
	// tracks the model's PD targets.
	Track     []string
	Reference *sim.Table
	// Pose, if not nil, is the final-position target.
	Pose *PoseTarget
	// Limits are the effort limits of the limit penalty per actuator
	// (name → N·m or N); actuators not listed use their own effort limit,
	// and no limit means no penalty.
	Limits  map[string]float64
	Weights CostWeights
	// Uncertain names the parameters that vary between samples and Draws
	// their values; no draws means the nominal model alone.
	Uncertain []string
	Draws     []ParamDraw
}

// TermCosts are the terms of one rollout's cost, weighted.
type TermCosts struct {
	Tracking, Effort, EffortLimit, FinalPose float64
	// PoseError is the final position error ‖p_N − p*‖ in metres (NaN
	// without a pose target).
	PoseError float64
}

// Total returns the sum of the terms.
func (t TermCosts) Total() float64 { return t.Tracking + t.Effort + t.EffortLimit + t.FinalPose }

// tuneSetup is a problem resolved against its model.
type tuneSetup struct {
	p        *TuneProblem
	gains    []sim.Param
	gainAct  []int  // actuator of each gain
	gainKp   []bool // kp (true) or kd
	uncert   []sim.Param
	models   []*sim.Model // one per sample (nominal if no draws)
	pd       []*sim.PD    // the PD controller of each sample model
	trackAct []int        // actuator index per tracked channel
	trackCol []int        // column of the reference per channel
	ref      *sim.Table
	poseBody int
	limits   []float64 // penalty limit per actuator, 0: none
	lower    []float64
	upper    []float64
	initial  []float64
	h        float64
	kappa    float64 // contact smoothing of the current stage
}

// pdController returns the PD controller of m, directly or in a sum.
func pdController(m *sim.Model) *sim.PD {
	switch c := m.Controller.(type) {
	case *sim.PD:
		return c
	case sim.Sum:
		for _, x := range c {
			if pd, ok := x.(*sim.PD); ok {
				return pd
			}
		}
	}
	return nil
}

func actuatorIndex(m *sim.Model, name string) int {
	return slices.IndexFunc(m.Actuators, func(a sim.Actuator) bool { return a.Name == name })
}

func actuatorList(m *sim.Model) string {
	var names []string
	for _, a := range m.Actuators {
		names = append(names, a.Name)
	}
	if len(names) == 0 {
		return "(the scene has no actuators)"
	}
	return strings.Join(names, ", ")
}

// setup checks the problem and builds the sample models.
func (p *TuneProblem) setup() (*tuneSetup, error) {
	m := p.Model
	if m == nil {
		return nil, errors.New("tune: no model")
	}
	st := &tuneSetup{p: p, h: p.Settings.WithDefaults().TimeStep, poseBody: -1, kappa: p.Settings.Solver.Smoothing}
	if pdController(m) == nil {
		return nil, errors.New("the scene has no PD controller: there are no gains to tune")
	}
	if len(p.Gains) == 0 {
		return nil, errors.New("no gains to tune: name at least one kp:ACTUATOR or kd:ACTUATOR with bounds")
	}
	if p.Steps < 1 {
		return nil, fmt.Errorf("horizon of %d steps: it must be at least one step", p.Steps)
	}
	seen := map[string]bool{}
	for _, g := range p.Gains {
		qty, act, _ := strings.Cut(g.Name, ":")
		if qty != "kp" && qty != "kd" {
			return nil, fmt.Errorf("gain %q: only kp:ACTUATOR and kd:ACTUATOR gains can be tuned", g.Name)
		}
		a := actuatorIndex(m, act)
		if a < 0 {
			return nil, fmt.Errorf("gain %q: no actuator named %q; actuators: %s", g.Name, act, actuatorList(m))
		}
		if seen[g.Name] {
			return nil, fmt.Errorf("gain %q is listed twice", g.Name)
		}
		seen[g.Name] = true
		prm, err := sim.ParseParam(m, g.Name)
		if err != nil {
			return nil, err
		}
		if math.IsNaN(g.Lower) || math.IsNaN(g.Upper) || math.IsInf(g.Lower, 0) || math.IsInf(g.Upper, 0) {
			return nil, fmt.Errorf("gain %q needs finite bounds [lower, upper]: gains without bounds could be tuned to values no drive can deliver", g.Name)
		}
		if err := prm.CheckValue(g.Lower); err != nil {
			return nil, fmt.Errorf("gain %q: lower bound: %v", g.Name, err)
		}
		if !(g.Lower < g.Upper) {
			return nil, fmt.Errorf("gain %q: bounds [%g, %g] leave no room; the lower bound must be below the upper", g.Name, g.Lower, g.Upper)
		}
		init := g.Initial
		if math.IsNaN(init) {
			init = prm.Get(m)
		}
		if init < g.Lower || init > g.Upper {
			return nil, fmt.Errorf("gain %q: initial value %g lies outside the bounds [%g, %g]", g.Name, init, g.Lower, g.Upper)
		}
		st.gains = append(st.gains, prm)
		st.gainAct = append(st.gainAct, a)
		st.gainKp = append(st.gainKp, qty == "kp")
		st.lower = append(st.lower, g.Lower)
		st.upper = append(st.upper, g.Upper)
		st.initial = append(st.initial, init)
	}
	w := p.Weights
	for _, x := range []float64{w.Tracking, w.Effort, w.EffortLimit, w.FinalPose} {
		if x < 0 || math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, fmt.Errorf("cost weights must be finite and not negative, got %+v", w)
		}
	}
	if w.Tracking+w.Effort+w.EffortLimit+w.FinalPose == 0 {
		return nil, errors.New("every cost weight is zero: there is nothing to tune for")
	}

	// Tracking channels.
	if w.Tracking > 0 {
		track := p.Track
		if track == nil {
			for _, a := range m.Actuators {
				track = append(track, a.Name)
			}
		}
		for i, name := range track {
			a := actuatorIndex(m, name)
			if a < 0 {
				return nil, fmt.Errorf("tracking: no actuator named %q; actuators: %s", name, actuatorList(m))
			}
			st.trackAct = append(st.trackAct, a)
			if p.Reference != nil {
				st.trackCol = append(st.trackCol, i)
			} else {
				st.trackCol = append(st.trackCol, a)
			}
		}
		st.ref = p.Reference
		if st.ref == nil {
			st.ref = &pdController(m).Targets
		} else if err := st.ref.Validate(len(track)); err != nil {
			return nil, fmt.Errorf("tracking reference: %v", err)
		}
	}
	if p.Pose != nil {
		b := slices.IndexFunc(m.Bodies, func(b sim.Body) bool { return b.Name == p.Pose.Body })
		if b < 0 {
			return nil, fmt.Errorf("final pose: no body named %q", p.Pose.Body)
		}
		if m.Bodies[b].Joint.Kind != sim.Free {
			return nil, fmt.Errorf("final pose: body %q is on a %s joint; a final-pose target names a free body (a loose object such as a carton)", p.Pose.Body, m.Bodies[b].Joint.Kind)
		}
		st.poseBody = b
	} else if w.FinalPose > 0 {
		return nil, errors.New("the final-pose weight is set but the task names no final pose")
	}
	st.limits = make([]float64, len(m.Actuators))
	for i, a := range m.Actuators {
		st.limits[i] = a.EffortLimit
	}
	for name, l := range p.Limits {
		a := actuatorIndex(m, name)
		if a < 0 {
			return nil, fmt.Errorf("effort limits: no actuator named %q; actuators: %s", name, actuatorList(m))
		}
		if !(l > 0) || math.IsInf(l, 0) {
			return nil, fmt.Errorf("effort limit of %s: %g must be positive and finite", name, l)
		}
		st.limits[a] = l
	}

	// Sample models.
	uncert, err := sim.ParseParams(m, p.Uncertain)
	if err != nil {
		return nil, fmt.Errorf("uncertain parameters: %w", err)
	}
	for _, u := range uncert {
		if strings.HasPrefix(u.Name, "kp:") || strings.HasPrefix(u.Name, "kd:") {
			return nil, fmt.Errorf("uncertain parameter %s is a gain; gains are what is tuned", u.Name)
		}
	}
	st.uncert = uncert
	if len(p.Draws) == 0 {
		st.models = []*sim.Model{sim.CopyModel(m)}
	}
	for i, d := range p.Draws {
		if len(d) != len(uncert) {
			return nil, fmt.Errorf("sample %d has %d values for %d uncertain parameters", i+1, len(d), len(uncert))
		}
		c := sim.CopyModel(m)
		for j, u := range uncert {
			if err := u.CheckValue(d[j]); err != nil {
				return nil, fmt.Errorf("sample %d: %v", i+1, err)
			}
			u.Set(c, d[j])
		}
		st.models = append(st.models, c)
	}
	for _, c := range st.models {
		st.pd = append(st.pd, pdController(c))
	}
	return st, nil
}

// rollout evaluates the cost of sample i at gains x and, if grad is not
// nil, its gradient into grad.
func (st *tuneSetup) rollout(i int, x []float64, grad []float64) (TermCosts, error) {
	m := st.models[i]
	for j, g := range st.gains {
		g.Set(m, x[j])
	}
	set := st.p.Settings
	set.Solver.Smoothing = st.kappa
	s, err := sim.New(m, set)
	if err != nil {
		return TermCosts{}, err
	}
	var ev tuneEval
	ev.init(st, s, m, st.pd[i], grad)
	// The efforts of step 1 come from the initial state, whose tangent is
	// zero: gains change only their own terms.
	ev.effort(0, s.Q(), s.V(), nil, nil)
	visit := func(k int, q, v []float64, dq, dv [][]float64) error {
		ev.track(k, q, dq)
		if k < st.p.Steps {
			ev.effort(k, q, v, dq, dv)
		} else {
			ev.pose(q, dq)
		}
		return nil
	}
	if grad != nil {
		err = s.Trace(st.gains, st.p.Steps, visit)
	} else {
		var q, v []float64
		for k := 1; k <= st.p.Steps && err == nil; k++ {
			if err = s.Step(); err == nil {
				q, v = s.Q(), s.V()
				err = visit(k, q, v, nil, nil)
			}
		}
	}
	if err != nil {
		return TermCosts{}, fmt.Errorf("sample %d: %w", i+1, err)
	}
	return ev.terms, nil
}

// tuneEval accumulates one rollout's cost and gradient.
type tuneEval struct {
	st       *tuneSetup
	m        *sim.Model
	pd       *sim.PD
	grad     []float64
	terms    TermCosts
	qOff     []int
	vOff     []int
	actQ     []int // q offset per actuator
	actV     []int
	in       sim.ControlInput
	out      sim.ControlOutput
	ref      []float64
	tq, tqd  []float64 // PD targets and their rates
	dtau     []float64 // ∂τ_a/∂θ_j, per gain, for one actuator
	hasPose  bool
	poseQOff int
}

func (ev *tuneEval) init(st *tuneSetup, s *sim.Sim, m *sim.Model, pd *sim.PD, grad []float64) {
	ev.st, ev.m, ev.pd, ev.grad = st, m, pd, grad
	ev.qOff, ev.vOff, _, _ = s.Layout()
	na := len(m.Actuators)
	ev.actQ, ev.actV = make([]int, na), make([]int, na)
	for a, act := range m.Actuators {
		ev.actQ[a], ev.actV[a] = ev.qOff[act.Body], ev.vOff[act.Body]
	}
	ev.in = sim.ControlInput{Q: make([]float64, na), QD: make([]float64, na)}
	ev.out = sim.ControlOutput{Effort: make([]float64, na), Stiffness: make([]float64, na), Damping: make([]float64, na)}
	if st.ref != nil {
		ev.ref = make([]float64, len(st.ref.Values[0]))
	}
	ev.tq, ev.tqd = make([]float64, na), make([]float64, na)
	ev.dtau = make([]float64, len(st.gains))
	ev.terms.PoseError = math.NaN()
	if st.poseBody >= 0 {
		ev.hasPose, ev.poseQOff = true, ev.qOff[st.poseBody]
	}
	for j := range grad {
		grad[j] = 0
	}
}

func (ev *tuneEval) track(k int, q []float64, dq [][]float64) {
	st := ev.st
	w := st.p.Weights.Tracking
	if w == 0 {
		return
	}
	st.ref.At(float64(k)*st.h, ev.ref)
	for c, a := range st.trackAct {
		e := q[ev.actQ[a]] - ev.ref[st.trackCol[c]]
		ev.terms.Tracking += w * st.h * e * e
		if ev.grad != nil {
			for j := range ev.grad {
				ev.grad[j] += 2 * w * st.h * e * dq[j][ev.actQ[a]]
			}
		}
	}
}

// effort adds the effort terms of the commands at state k (time k·h).
func (ev *tuneEval) effort(k int, q, v []float64, dq, dv [][]float64) {
	st := ev.st
	we, wl := st.p.Weights.Effort, st.p.Weights.EffortLimit
	if we == 0 && wl == 0 {
		return
	}
	t := float64(k) * st.h
	ev.in.T = t
	for a := range ev.m.Actuators {
		ev.in.Q[a], ev.in.QD[a] = q[ev.actQ[a]], v[ev.actV[a]]
		ev.out.Effort[a], ev.out.Stiffness[a], ev.out.Damping[a] = 0, 0, 0
	}
	ev.m.Controller.Command(&ev.in, &ev.out)
	if ev.grad != nil {
		ev.pd.Targets.At(t, ev.tq)
		ev.pd.Targets.Rate(t, ev.tqd)
	}
	for a, act := range ev.m.Actuators {
		tau := ev.out.Effort[a]
		if ev.grad != nil {
			// ∂τ/∂θ_j through the state, then the gain's own term.
			for j := range ev.dtau {
				d := 0.0
				if dq != nil {
					d = -ev.out.Stiffness[a]*dq[j][ev.actQ[a]] - ev.out.Damping[a]*dv[j][ev.actV[a]]
				}
				if st.gainAct[j] == a {
					if st.gainKp[j] {
						d += ev.tq[a] - ev.in.Q[a]
					} else {
						d += ev.tqd[a] - ev.in.QD[a]
					}
				}
				ev.dtau[j] = d
			}
		}
		if we > 0 {
			u, sat := tau, false
			if lim := act.EffortLimit; lim > 0 && math.Abs(tau) > lim {
				u, sat = math.Copysign(lim, tau), true
			}
			ev.terms.Effort += we * st.h * u * u
			if ev.grad != nil && !sat {
				for j, d := range ev.dtau {
					ev.grad[j] += 2 * we * st.h * u * d
				}
			}
		}
		if lim := st.limits[a]; wl > 0 && lim > 0 {
			if ex := math.Abs(tau) - lim; ex > 0 {
				ev.terms.EffortLimit += wl * st.h * ex * ex
				if ev.grad != nil {
					sg := math.Copysign(1, tau)
					for j, d := range ev.dtau {
						ev.grad[j] += 2 * wl * st.h * ex * sg * d
					}
				}
			}
		}
	}
}

func (ev *tuneEval) pose(q []float64, dq [][]float64) {
	if !ev.hasPose {
		return
	}
	st := ev.st
	w := st.p.Weights.FinalPose
	target := [3]float64{st.p.Pose.Position.X, st.p.Pose.Position.Y, st.p.Pose.Position.Z}
	var e2 float64
	for c := 0; c < 3; c++ {
		e := q[ev.poseQOff+c] - target[c]
		e2 += e * e
		if ev.grad != nil {
			for j := range ev.grad {
				ev.grad[j] += 2 * w * e * dq[j][ev.poseQOff+c]
			}
		}
	}
	ev.terms.FinalPose = w * e2
	ev.terms.PoseError = math.Sqrt(e2)
}

// Evaluation is the cost of one gain vector over all samples.
type Evaluation struct {
	Gains []float64
	// Mean is the tuned cost, the mean of Samples' totals; Grad its
	// gradient with respect to the gains (nil when not asked for).
	Mean float64
	Grad []float64
	// Samples holds each sample's terms, in sample order.
	Samples []TermCosts
}

// Spread summarizes the totals over the samples.
type Spread struct {
	Mean, SD, Min, Max float64
	// Worst10 is the mean of the worst tenth of the samples (at least
	// one): the tail a robust tuning guards against.
	Worst10 float64
}

// Spread returns the spread of the evaluation's totals.
func (e *Evaluation) Spread() Spread {
	tot := make([]float64, len(e.Samples))
	for i, s := range e.Samples {
		tot[i] = s.Total()
	}
	return spreadOf(tot)
}

func spreadOf(tot []float64) Spread {
	n := len(tot)
	if n == 0 {
		return Spread{}
	}
	var sp Spread
	sp.Min, sp.Max = math.Inf(1), math.Inf(-1)
	for _, v := range tot {
		sp.Mean += v
		sp.Min, sp.Max = math.Min(sp.Min, v), math.Max(sp.Max, v)
	}
	sp.Mean /= float64(n)
	for _, v := range tot {
		sp.SD += (v - sp.Mean) * (v - sp.Mean)
	}
	if n > 1 {
		sp.SD = math.Sqrt(sp.SD / float64(n-1))
	} else {
		sp.SD = 0
	}
	s := slices.Clone(tot)
	slices.Sort(s)
	k := max(1, (n+9)/10)
	for _, v := range s[n-k:] {
		sp.Worst10 += v
	}
	sp.Worst10 /= float64(k)
	return sp
}

// Tuner evaluates and minimizes a tuning problem.
type Tuner struct {
	st *tuneSetup
	// Workers bounds the samples evaluated at once (default GOMAXPROCS).
	// Results do not depend on it.
	Workers int
	mu      sync.Mutex // one evaluation at a time: the sample models are shared
	evals   int
}

// NewTuner checks p and prepares its sample models.
func NewTuner(p *TuneProblem) (*Tuner, error) {
	st, err := p.setup()
	if err != nil {
		return nil, err
	}
	return &Tuner{st: st}, nil
}

// Initial returns the starting gains; Lower and Upper their bounds.
func (t *Tuner) Initial() []float64 { return slices.Clone(t.st.initial) }

// Bounds returns the lower and upper bounds of the gains.
func (t *Tuner) Bounds() (lower, upper []float64) {
	return slices.Clone(t.st.lower), slices.Clone(t.st.upper)
}

// Samples returns the number of parameter samples.
func (t *Tuner) Samples() int { return len(t.st.models) }

// Evaluate returns the cost of gains x over all samples and, if withGrad,
// its gradient. Samples run in parallel; the mean is summed in sample
// order, so the result does not depend on Workers.
func (t *Tuner) Evaluate(x []float64, withGrad bool) (*Evaluation, error) {
	st := t.st
	if len(x) != len(st.gains) {
		return nil, fmt.Errorf("tune: %d gains given, problem has %d", len(x), len(st.gains))
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	t.evals++
	n := len(st.models)
	terms := make([]TermCosts, n)
	grads := make([][]float64, n)
	errs := make([]error, n)
	workers := t.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = min(workers, n)
	next := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				var g []float64
				if withGrad {
					g = make([]float64, len(x))
				}
				terms[i], errs[i] = st.rollout(i, x, g)
				grads[i] = g
			}
		}()
	}
	for i := 0; i < n; i++ {
		next <- i
	}
	close(next)
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	ev := &Evaluation{Gains: slices.Clone(x), Samples: terms}
	if withGrad {
		ev.Grad = make([]float64, len(x))
	}
	for i := 0; i < n; i++ {
		ev.Mean += terms[i].Total()
		for j := range ev.Grad {
			ev.Grad[j] += grads[i][j]
		}
	}
	ev.Mean /= float64(n)
	for j := range ev.Grad {
		ev.Grad[j] /= float64(n)
	}
	return ev, nil
}

// TuneSettings control the minimization. The zero value is usable.
type TuneSettings struct {
	// Iterations bounds the accepted steps (default 60).
	Iterations int
	// GradTol: stop when the projected gradient step or an accepted step,
	// in units of each gain's bound range, is below this (default 1e-6).
	GradTol float64
	// CostTol: stop when an accepted step lowers the cost by less than
	// this fraction (default 1e-10).
	CostTol float64
	// Smoothing is a schedule of contact smoothing κ
	// (sim.Settings.Solver.Smoothing), large to small: one descent stage
	// per value, each starting where the last ended. Through stick/slip
	// and touch-down the exact (κ = 0) derivative ignores when contacts
	// switch, so its gradients can point the wrong way; a small κ gives
	// the smoothed cost's exact gradient. Nil keeps the problem's
	// setting. Costs before and after are reported at the last κ.
	Smoothing []float64
	// Progress, if not nil, is called after every accepted step.
	Progress func(TuneIteration)
}

// TuneIteration is one accepted step of the minimization.
type TuneIteration struct {
	Stage int       `json:"stage"`
	Kappa float64   `json:"smoothing"`
	Iter  int       `json:"iteration"`
	Cost  float64   `json:"cost"`
	Step  float64   `json:"step"` // max change of a gain, in units of its bound range
	Gains []float64 `json:"gains"`
	// Elapsed is the wall time since the start in seconds.
	Elapsed float64 `json:"-"`
	// Evaluations of the cost so far (line-search trials included).
	Evaluations int `json:"evaluations"`
}

// TuneResult is the outcome of Tune.
type TuneResult struct {
	Names   []string
	Lower   []float64
	Upper   []float64
	Initial []float64
	Tuned   []float64
	// Before and After are the evaluations at the initial and the tuned
	// gains.
	Before, After *Evaluation
	History       []TuneIteration
	// Status says why the minimization stopped; Converged whether that
	// was a convergence test rather than the iteration limit.
	Status      string
	Converged   bool
	Evaluations int
	Elapsed     float64
}

// Tune minimizes the mean cost over the gains within their bounds by the
// spectral projected gradient method (Birgin, Martínez and Raydan, 2000):
// projected steps along the negative gradient, with Barzilai–Borwein step
// lengths and an Armijo backtracking line search. It works in coordinates
// scaled so that every gain's bound range has unit length, since kp and
// kd differ in scale by orders of magnitude.
func (t *Tuner) Tune(set TuneSettings) (*TuneResult, error) {
	begin := time.Now()
	st := t.st
	if set.Iterations <= 0 {
		set.Iterations = 60
	}
	if set.GradTol <= 0 {
		set.GradTol = 1e-6
	}
	if set.CostTol <= 0 {
		set.CostTol = 1e-10
	}
	schedule := set.Smoothing
	if len(schedule) == 0 {
		schedule = []float64{st.kappa}
	}
	for i, k := range schedule {
		if !(k >= 0) || math.IsInf(k, 0) || (i > 0 && k > schedule[i-1]) {
			return nil, fmt.Errorf("smoothing schedule %v: want values ≥ 0 from large to small", schedule)
		}
	}
	defer func(k float64) { st.kappa = k }(st.kappa)
	n := len(st.gains)
	res := &TuneResult{Lower: slices.Clone(st.lower), Upper: slices.Clone(st.upper), Initial: slices.Clone(st.initial)}
	for _, g := range st.gains {
		res.Names = append(res.Names, g.Name)
	}
	span := make([]float64, n)
	for j := range span {
		span[j] = st.upper[j] - st.lower[j]
	}
	toGains := func(u []float64) []float64 {
		x := make([]float64, n)
		for j := range x {
			x[j] = st.lower[j] + u[j]*span[j]
		}
		return x
	}
	scaledGrad := func(ev *Evaluation) []float64 {
		g := make([]float64, n)
		for j := range g {
			g[j] = ev.Grad[j] * span[j]
		}
		return g
	}
	project := func(u []float64) {
		for j := range u {
			u[j] = math.Min(1, math.Max(0, u[j]))
		}
	}
	u := make([]float64, n)
	for j := range u {
		u[j] = (st.initial[j] - st.lower[j]) / span[j]
	}
	iter := 0
	var cur *Evaluation
	for stage, kappa := range schedule {
		st.kappa = kappa
		var err error
		cur, err = t.Evaluate(toGains(u), true)
		if err != nil {
			return nil, fmt.Errorf("smoothing %g: evaluating the starting gains: %w", kappa, err)
		}
		g := scaledGrad(cur)
		record := func(step float64) {
			it := TuneIteration{Stage: stage, Kappa: kappa, Iter: iter, Cost: cur.Mean, Step: step, Gains: slices.Clone(cur.Gains),
				Elapsed: time.Since(begin).Seconds(), Evaluations: t.evals}
			res.History = append(res.History, it)
			if set.Progress != nil {
				set.Progress(it)
			}
		}
		record(0)
		// First step length: a tenth of the range along the largest
		// component.
		alpha := 0.1 / math.Max(infNorm(g), 1e-300)
		const armijo = 1e-4
		res.Status, res.Converged = "iteration limit reached", false
		for k := 1; k <= set.Iterations; k++ {
			// Projected gradient test at unit step length.
			pg := make([]float64, n)
			for j := range pg {
				pg[j] = math.Min(1, math.Max(0, u[j]-g[j])) - u[j]
			}
			if infNorm(pg) < set.GradTol {
				res.Status, res.Converged = "projected gradient below tolerance", true
				break
			}
			d := make([]float64, n)
			trial := make([]float64, n)
			for j := range d {
				trial[j] = u[j] - alpha*g[j]
			}
			project(trial)
			for j := range d {
				d[j] = trial[j] - u[j]
			}
			gd := dot(g, d)
			lambda := 1.0
			var next *Evaluation
			accepted := false
			for ls := 0; ls < 30; ls++ {
				for j := range trial {
					trial[j] = u[j] + lambda*d[j]
				}
				project(trial)
				next, err = t.Evaluate(toGains(trial), true)
				if err != nil {
					return nil, fmt.Errorf("smoothing %g, iteration %d: %w", kappa, k, err)
				}
				if next.Mean <= cur.Mean+armijo*lambda*gd {
					accepted = true
					break
				}
				// Minimizer of the quadratic through f(0), f'(0) and
				// f(λ), safeguarded to [0.1λ, 0.5λ].
				den := 2 * (next.Mean - cur.Mean - lambda*gd)
				lt := 0.5 * lambda
				if den > 0 {
					lt = -gd * lambda * lambda / den
				}
				lambda = math.Min(0.5*lambda, math.Max(0.1*lambda, lt))
			}
			if !accepted {
				// The gradient promises a decrease the cost does not show:
				// the cost is not smooth here at this κ.
				res.Status = "line search found no decrease (the cost is not smooth here; a larger smoothing κ may help)"
				break
			}
			iter++
			gn := scaledGrad(next)
			s := make([]float64, n)
			y := make([]float64, n)
			for j := range s {
				s[j] = trial[j] - u[j]
				y[j] = gn[j] - g[j]
			}
			drop := cur.Mean - next.Mean
			copy(u, trial)
			cur, g = next, gn
			record(infNorm(s))
			if sy := dot(s, y); sy > 0 {
				alpha = math.Min(1e10, math.Max(1e-10, dot(s, s)/sy))
			} else {
				alpha = 1e10
			}
			if infNorm(s) < set.GradTol {
				res.Status, res.Converged = "step below tolerance", true
				break
			}
			if drop <= set.CostTol*math.Max(math.Abs(cur.Mean), 1e-300) {
				res.Status, res.Converged = "cost change below tolerance", true
				break
			}
		}
	}
	var err error
	res.Before, err = t.Evaluate(slices.Clone(st.initial), false)
	if err != nil {
		return nil, fmt.Errorf("evaluating the initial gains: %w", err)
	}
	res.Tuned = slices.Clone(cur.Gains)
	res.After = cur
	res.Evaluations = t.evals
	res.Elapsed = time.Since(begin).Seconds()
	return res, nil
}

func dot(a, b []float64) float64 {
	var s float64
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

func infNorm(a []float64) float64 {
	var m float64
	for _, v := range a {
		m = math.Max(m, math.Abs(v))
	}
	return m
}

// TuneTrace is a nominal rollout for plots: the joints of the actuators,
// their reference where tracked, and the commanded efforts.
type TuneTrace struct {
	Times  []float64
	Joints []string    // actuator names
	Q      [][]float64 // [joint][step]
	Ref    [][]float64 // [joint][step], nil for joints not tracked
	Effort [][]float64 // commanded, [joint][step]
}

// Trajectory simulates the nominal model (the problem's model, no
// parameter sample) with gains x over the horizon.
func (t *Tuner) Trajectory(x []float64) (*TuneTrace, error) {
	st := t.st
	m := sim.CopyModel(st.p.Model)
	for j, g := range st.gains {
		g.Set(m, x[j])
	}
	s, err := sim.New(m, st.p.Settings)
	if err != nil {
		return nil, err
	}
	na := len(m.Actuators)
	tr := &TuneTrace{Q: make([][]float64, na), Ref: make([][]float64, na), Effort: make([][]float64, na)}
	qOff, vOff, _, _ := s.Layout()
	ref := []float64(nil)
	if st.ref != nil {
		ref = make([]float64, len(st.ref.Values[0]))
	}
	in := sim.ControlInput{Q: make([]float64, na), QD: make([]float64, na)}
	out := sim.ControlOutput{Effort: make([]float64, na), Stiffness: make([]float64, na), Damping: make([]float64, na)}
	for _, a := range m.Actuators {
		tr.Joints = append(tr.Joints, a.Name)
	}
	for k := 0; k <= st.p.Steps; k++ {
		if k > 0 {
			if err := s.Step(); err != nil {
				return nil, err
			}
		}
		tt := float64(k) * st.h
		tr.Times = append(tr.Times, tt)
		q, v := s.Q(), s.V()
		in.T = tt
		for a, act := range m.Actuators {
			in.Q[a], in.QD[a] = q[qOff[act.Body]], v[vOff[act.Body]]
			out.Effort[a], out.Stiffness[a], out.Damping[a] = 0, 0, 0
			tr.Q[a] = append(tr.Q[a], in.Q[a])
		}
		m.Controller.Command(&in, &out)
		for a := range m.Actuators {
			tr.Effort[a] = append(tr.Effort[a], out.Effort[a])
		}
		if ref != nil {
			st.ref.At(tt, ref)
			for c, a := range st.trackAct {
				tr.Ref[a] = append(tr.Ref[a], ref[st.trackCol[c]])
			}
		}
	}
	return tr, nil
}

// TunedModel returns a copy of m with the tuned gains set.
func (r *TuneResult) TunedModel(m *sim.Model) (*sim.Model, error) {
	c := sim.CopyModel(m)
	for j, n := range r.Names {
		p, err := sim.ParseParam(c, n)
		if err != nil {
			return nil, err
		}
		p.Set(c, r.Tuned[j])
	}
	return c, nil
}
