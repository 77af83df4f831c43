package sim

import (
	"fmt"
	"math"
)

// Reverse sweeps: the gradient of a scalar loss of the final state by the
// adjoint through time,
//
//	ā_T = ∂L/∂x_T,  θ̄ += Φ_θ,kᵀ ā_k,  ā_{k−1} = Φ_x,kᵀ ā_k,
//
// where Φ_x,k and Φ_θ,k are the step Jacobians of x_k = Φ(x_{k−1}, θ), and
// x = (q, v). Each step's Jacobians are built by the exact tangent step
// (tangent.go) seeded with the state basis and the parameter directions,
// and kept on a tape; the backward pass then needs only matrix–vector
// products. With checkpointing the tape keeps states every ⌈√T⌉ steps and
// rebuilds each segment's Jacobians during the backward pass, so memory
// grows like √T; the gradient is bit-identical.

// ReverseOptions configure a reverse sweep.
type ReverseOptions struct {
	// Checkpoint trades recomputation for memory (see above).
	Checkpoint bool
}

// ReverseResult is the outcome of a reverse sweep.
type ReverseResult struct {
	Gradient []float64
	// TapeBytes is the largest tape held during the sweep.
	TapeBytes int
}

// stepJac is one step's Jacobians, column major: column c of Φ_x (c < nx)
// and of Φ_θ (c ≥ nx), each nx long.
type stepJac []float64

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

// localSweep returns tangent machinery whose columns are the nx state basis
// directions followed by the parameters.
func (s *Sim) localSweep(params []Param) *tangentSweep {
	return newTangentColumns(s, s.lay.nq+s.lay.nv, params)
}

// reseed resets the columns to the state basis and the parameter seeds.
func (t *tangentSweep) reseed(nq, nv int) {
	nx := nq + nv
	for c := range t.dq {
		clear(t.dq[c])
		clear(t.dv[c])
		if c < nq {
			t.dq[c][c] = 1
		} else if c < nx {
			t.dv[c][c-nq] = 1
		}
	}
}

// stepWithJacobian takes one step and returns its Jacobians.
func (s *Sim) stepWithJacobian(t *tangentSweep) (stepJac, error) {
	nq, nv := s.lay.nq, s.lay.nv
	t.reseed(nq, nv)
	s.tan = t
	err := s.Step()
	s.tan = nil
	if err != nil {
		return nil, err
	}
	nx := nq + nv
	jac := make(stepJac, nx*len(t.dq))
	for c := range t.dq {
		copy(jac[c*nx:], t.dq[c])
		copy(jac[c*nx+nq:], t.dv[c])
	}
	return jac, nil
}

// ReverseGradient runs steps time steps from the current state and returns
// the gradient of L(q_T, v_T) with respect to params, given dL, which
// writes ∂L/∂q and ∂L/∂v at the final state into gq and gv.
func (s *Sim) ReverseGradient(params []Param, steps int, dL func(q, v, gq, gv []float64), opt ReverseOptions) (*ReverseResult, error) {
	nq, nv := s.lay.nq, s.lay.nv
	nx := nq + nv
	np := len(params)
	t := s.localSweep(params)
	// The initial state's dependence on start.* parameters.
	seeds := newTangents(s, params)
	res := &ReverseResult{Gradient: make([]float64, np)}
	jacBytes := 8 * nx * (nx + np)

	seg := steps
	if opt.Checkpoint {
		seg = int(math.Ceil(math.Sqrt(float64(steps))))
		if seg < 1 {
			seg = 1
		}
	}
	var checkpoints []stateCopy
	var tape []stepJac
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
		j, err := s.stepWithJacobian(t)
		if err != nil {
			return nil, err
		}
		tape = append(tape, j)
	}
	if !opt.Checkpoint {
		res.TapeBytes = len(tape) * jacBytes
	}
	adj := make([]float64, nx)
	dL(s.q, s.v, adj[:nq], adj[nq:])
	next := make([]float64, nx)
	back := func(j stepJac) {
		// θ̄ += Φ_θᵀ ā;  ā ← Φ_xᵀ ā.
		for p := 0; p < np; p++ {
			col := j[(nx+p)*nx : (nx+p+1)*nx]
			var sum float64
			for i, a := range adj {
				sum += col[i] * a
			}
			res.Gradient[p] += sum
		}
		for c := 0; c < nx; c++ {
			col := j[c*nx : (c+1)*nx]
			var sum float64
			for i, a := range adj {
				sum += col[i] * a
			}
			next[c] = sum
		}
		copy(adj, next)
	}
	if opt.Checkpoint {
		end := s.saveState()
		for c := len(checkpoints) - 1; c >= 0; c-- {
			s.restoreState(checkpoints[c])
			n := min(seg, steps-c*seg)
			segTape := make([]stepJac, 0, n)
			for k := 0; k < n; k++ {
				j, err := s.stepWithJacobian(t)
				if err != nil {
					return nil, fmt.Errorf("recomputing checkpoint segment %d: %w", c, err)
				}
				segTape = append(segTape, j)
			}
			res.TapeBytes = max(res.TapeBytes, len(segTape)*jacBytes+len(checkpoints)*8*nx)
			for k := len(segTape) - 1; k >= 0; k-- {
				back(segTape[k])
			}
		}
		s.restoreState(end)
	} else {
		for k := len(tape) - 1; k >= 0; k-- {
			back(tape[k])
		}
	}
	// Initial-state seeds of start.* parameters.
	for p := 0; p < np; p++ {
		var sum float64
		for i := 0; i < nq; i++ {
			sum += seeds.dq[p][i] * adj[i]
		}
		for i := 0; i < nv; i++ {
			sum += seeds.dv[p][i] * adj[nq+i]
		}
		res.Gradient[p] += sum
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
