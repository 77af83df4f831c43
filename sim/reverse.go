package sim

import (
	"fmt"
	"math"
	"sync"
	"unsafe"

	"stickslip/contact"
)

// Reverse sweeps: the gradient of a scalar loss of the final state by the
// adjoint through time,
//
//	ā_T = ∂L/∂x_T,  θ̄ += Φ_θ,kᵀ ā_k,  ā_{k−1} = Φ_x,kᵀ ā_k,
//
// where x_k = Φ(x_{k−1}, θ) is one step and x = (q, v). The products with
// the transposed step Jacobians are computed without forming them, by the
// adjoint of each stage of the step (adjoint_step.go, adjoint_kin.go): the
// integrator, the contact solve (one transposed solve with the reduced
// Jacobian of its optimality conditions, contact.Sensitivity), the contact
// geometry (contact.PointTangentAdjoint), the Delassus operator, the
// midpoint Newton–Euler passes, the controller, the mass matrix and the
// kinematics. The cost of a backward step is thus independent of the number
// of parameters.
//
// The tape keeps, per step, the start state, the midpoint velocities, the
// post-step velocity, the contacts and joint-limit rows with the shapes'
// poses and the contact solve's sensitivity record (the solution and the
// block-diagonal part of the reduced Jacobian) — never the solver's
// iterations — and, by default, what the backward pass would otherwise
// recompute: the factored reduced Jacobian (n² numbers for n contact rows),
// the factored mass matrix, the Jacobian rows and the Newton–Euler passes.
// ReverseOptions.Compact keeps only the O(rows) part; the backward pass then
// recomputes the smooth quantities, the Delassus operator and the
// factorization: less memory, more time. With checkpointing the tape keeps
// states every ⌈√T⌉ steps and re-records each segment during the backward
// pass, so memory grows like √T; the gradient is bit-identical.

// ReverseOptions configure a reverse sweep.
type ReverseOptions struct {
	// Checkpoint trades recomputation for memory (see above).
	Checkpoint bool
	// Compact keeps only O(rows) numbers per step on the tape and
	// recomputes the rest in the backward pass (see above).
	Compact bool
}

// ReverseResult is the outcome of a reverse sweep.
type ReverseResult struct {
	Gradient []float64
	// TapeBytes is the largest tape held during the sweep.
	TapeBytes int
}

// stepRecord is one step on the tape.
type stepRecord struct {
	q0, v0    []float64
	t         float64
	vpass     [midpointPasses + 1][]float64
	v         []float64 // after the contact solve
	contacts  []Contact
	limits    []limitRow
	geomPoses []contact.Pose
	sens      contact.Sensitivity
	solved    bool // whether the step had a contact problem
	// Unless compact, also A's factors, the Jacobian rows and the
	// Newton–Euler passes.
	kept   bool
	chol   []float64
	jac    []float64
	passes [midpointPasses + 1]*biasPrimal
}

var contactBytes = int(unsafe.Sizeof(Contact{}))

// tapePool holds reverse-sweep tapes (*[]stepRecord) for reuse.
var tapePool sync.Pool

func (r *stepRecord) bytes() int {
	b := 8 * (len(r.q0) + len(r.v0) + len(r.v) + 1)
	for _, p := range r.vpass {
		b += 8 * len(p)
	}
	b += len(r.contacts)*contactBytes + len(r.limits)*int(unsafe.Sizeof(limitRow{})) + len(r.geomPoses)*int(unsafe.Sizeof(contact.Pose{}))
	if r.solved {
		b += r.sens.Bytes()
	}
	if r.kept {
		b += 8 * (len(r.chol) + len(r.jac))
		for _, p := range r.passes {
			b += 3*len(p.bvel)*int(unsafe.Sizeof(motion{})) + 2*len(p.iv)*int(unsafe.Sizeof(force{}))
		}
	}
	return b
}

// recordStep takes one step and writes what its adjoint needs into r.
func (s *Sim) recordStep(r *stepRecord, keep bool) error {
	r.q0 = append(r.q0[:0], s.q...)
	r.v0 = append(r.v0[:0], s.v...)
	r.t = s.t
	r.kept = keep
	if keep {
		nb, nv := len(s.model.Bodies), s.lay.nv
		for p, bp := range r.passes {
			// Pooled records may come from another model.
			if bp == nil || len(bp.bvel) != nb || len(bp.c) != nv {
				r.passes[p] = newBiasPrimal(nb, nv)
			}
		}
		s.passRec = &r.passes
	}
	err := s.Step()
	s.passRec = nil
	if err != nil {
		return err
	}
	for p := range r.vpass {
		r.vpass[p] = append(r.vpass[p][:0], s.vpass[p]...)
	}
	r.v = append(r.v[:0], s.v...)
	r.contacts = append(r.contacts[:0], s.contacts...)
	r.limits = append(r.limits[:0], s.limits...)
	r.geomPoses = append(r.geomPoses[:0], s.geomPoses...)
	n := 3*len(s.contacts) + len(s.limits)
	r.solved = n > 0
	if r.solved {
		if err := s.solver.Record(&r.sens, keep); err != nil {
			return s.stepError(err)
		}
	}
	if keep {
		r.chol = append(r.chol[:0], s.chol...)
		r.jac = append(r.jac[:0], s.jac[:n*s.lay.nv]...)
	}
	return nil
}

// prime restores the primal intermediates of the recorded step into s, as
// Step left them before its integration, for the step's adjoint.
func (s *Sim) prime(r *stepRecord) error {
	copy(s.q, r.q0)
	copy(s.v, r.v0)
	copy(s.q0, r.q0)
	copy(s.v0, r.v0)
	s.t = r.t
	s.kin.update(s.model, s.lay, s.q, s.v)
	if r.kept {
		s.control()
		s.kin.composite(s.model, s.lay)
		copy(s.chol, r.chol)
	} else if err := s.factorMass(); err != nil {
		return err
	}
	for p := range r.vpass {
		copy(s.vpass[p], r.vpass[p])
	}
	copy(s.vfree, r.vpass[midpointPasses])
	s.contacts = append(s.contacts[:0], r.contacts...)
	s.limits = append(s.limits[:0], r.limits...)
	copy(s.geomPoses, r.geomPoses)
	if r.solved {
		n := 3*len(s.contacts) + len(s.limits)
		if r.kept {
			s.restoreRows(n, r.jac)
		} else {
			s.buildRows(n)
		}
		copy(s.lambda, r.sens.Lambda())
		if n0, _ := r.sens.Size(); n0 != n {
			return fmt.Errorf("tape: step at t = %g has %d rows, its record %d", r.t, n, n0)
		}
		if !r.sens.HasFactors() {
			// The VJP assembles and factors W + K afresh.
			s.buildDelassus(n)
		}
	}
	copy(s.v, r.v)
	return nil
}

type stateCopy struct {
	q, v []float64
	t    float64
	step int
}

func (s *Sim) saveState() stateCopy {
	return stateCopy{q: append([]float64(nil), s.q...), v: append([]float64(nil), s.v...), t: s.t, step: s.step}
}

func (s *Sim) restoreState(c stateCopy) {
	copy(s.q, c.q)
	copy(s.v, c.v)
	s.t, s.step = c.t, c.step
	s.contacts = s.contacts[:0]
	s.kin.update(s.model, s.lay, s.q, s.v)
}

// ReverseGradient runs steps time steps from the current state and returns
// the gradient of L(q_T, v_T) with respect to params, given dL, which
// writes ∂L/∂q and ∂L/∂v at the final state into gq and gv. The simulator
// ends in the final state.
func (s *Sim) ReverseGradient(params []Param, steps int, dL func(q, v, gq, gv []float64), opt ReverseOptions) (*ReverseResult, error) {
	np := len(params)
	// The initial state's dependence on start.* parameters and each
	// parameter's direction in the model.
	seeds := newTangents(s, params)
	adj := newStepAdjoint(s, params)
	res := &ReverseResult{Gradient: make([]float64, np)}

	seg := steps
	if opt.Checkpoint {
		seg = max(int(math.Ceil(math.Sqrt(float64(steps)))), 1)
	}
	var checkpoints []stateCopy
	// Tapes are pooled, so that repeated sweeps (an optimization loop)
	// reuse their storage.
	tp, _ := tapePool.Get().(*[]stepRecord)
	if tp == nil {
		tp = new([]stepRecord)
	}
	defer tapePool.Put(tp)
	if n := min(seg, steps); len(*tp) < n {
		*tp = append(*tp, make([]stepRecord, n-len(*tp))...)
	}
	tape := *tp
	tapeBytes := func(n int) int {
		b := 0
		for k := range n {
			b += tape[k].bytes()
		}
		return b
	}
	for k := 0; k < steps; k++ {
		if opt.Checkpoint {
			if k%seg == 0 {
				checkpoints = append(checkpoints, s.saveState())
			}
			if err := s.Step(); err != nil {
				return nil, err
			}
			continue
		}
		if err := s.recordStep(&tape[k], !opt.Compact); err != nil {
			return nil, err
		}
	}
	end := s.saveState()
	dL(s.q, s.v, adj.qBar, adj.vBar)
	back := func(n int) error {
		for k := n - 1; k >= 0; k-- {
			if err := s.prime(&tape[k]); err != nil {
				return err
			}
			if err := adj.step(s, &tape[k]); err != nil {
				return s.stepError(err)
			}
		}
		return nil
	}
	if opt.Checkpoint {
		for c := len(checkpoints) - 1; c >= 0; c-- {
			s.restoreState(checkpoints[c])
			n := min(seg, steps-c*seg)
			for k := 0; k < n; k++ {
				if err := s.recordStep(&tape[k], !opt.Compact); err != nil {
					return nil, fmt.Errorf("recomputing checkpoint segment %d: %w", c, err)
				}
			}
			res.TapeBytes = max(res.TapeBytes, tapeBytes(n)+len(checkpoints)*8*(len(s.q)+len(s.v)))
			if err := back(n); err != nil {
				return nil, err
			}
		}
	} else {
		res.TapeBytes = tapeBytes(steps)
		if err := back(steps); err != nil {
			return nil, err
		}
	}
	s.restoreState(end)
	for p := 0; p < np; p++ {
		g := adj.ctlBar[p] + seeds.dm[p].dot(adj.gb)
		for i, x := range seeds.dq[p] {
			g += x * adj.qBar[i]
		}
		for i, x := range seeds.dv[p] {
			g += x * adj.vBar[i]
		}
		res.Gradient[p] = g
	}
	return res, nil
}

// ForwardGradient returns the same gradient as ReverseGradient by a forward
// tangent sweep: one column per parameter, dL/dθ = ∂L/∂x · dx/dθ.
func (s *Sim) ForwardGradient(params []Param, steps int, dL func(q, v, gq, gv []float64)) ([]float64, error) {
	s.tan = newTangents(s, params)
	defer func() { s.tan = nil }()
	for k := 0; k < steps; k++ {
		if err := s.Step(); err != nil {
			return nil, err
		}
	}
	nq, nv := s.lay.nq, s.lay.nv
	g := make([]float64, nq+nv)
	dL(s.q, s.v, g[:nq], g[nq:])
	grad := make([]float64, len(params))
	for p := range params {
		var sum float64
		for i := 0; i < nq; i++ {
			sum += g[i] * s.tan.dq[p][i]
		}
		for i := 0; i < nv; i++ {
			sum += g[nq+i] * s.tan.dv[p][i]
		}
		grad[p] = sum
	}
	return grad, nil
}
