package sim

import "gonum.org/v1/gonum/spatial/r3"

// Sample runs the simulator from its current state through each of times
// (increasing, not before the current time) and returns the frames there
// with their derivatives with respect to params (resolved against this
// simulator's model), by a forward tangent sweep: one tangent column per
// parameter carried through every step (see tangent.go). Parameters of the
// initial state (start.*) seed the tangent of the current state.
func (s *Sim) Sample(params []Param, times []float64) (*Samples, error) {
	s.tan = newTangents(s, params)
	defer func() { s.tan = nil }()
	nb, np := len(s.model.Bodies), len(params)
	out := &Samples{Params: params, Times: times,
		Frames: make([]Frame, len(times)),
		DPos:   make([][][]r3.Vec, len(times)),
		DRot:   make([][][]r3.Vec, len(times)),
		DJoint: make([][][]float64, len(times)),
	}
	zero := newModelTangent(s.model, s.lay.nq, s.lay.nv)
	for k, t := range times {
		if err := s.runTo(t); err != nil {
			return nil, err
		}
		out.Frames[k] = s.frame()
		out.DPos[k] = make([][]r3.Vec, nb)
		out.DRot[k] = make([][]r3.Vec, nb)
		for b := 0; b < nb; b++ {
			out.DPos[k][b] = make([]r3.Vec, np)
			out.DRot[k][b] = make([]r3.Vec, np)
		}
		joints := s.singleDOFJoints()
		out.DJoint[k] = make([][]float64, len(joints))
		for i := range joints {
			out.DJoint[k][i] = make([]float64, np)
		}
		for j := 0; j < np; j++ {
			s.tan.kt.update(s.model, s.lay, s.kin, s.q, s.v, s.tan.dq[j], s.tan.dv[j], zero)
			for b := 0; b < nb; b++ {
				out.DPos[k][b][j] = s.tan.kt.dp[b]
				out.DRot[k][b][j] = s.tan.kt.dphi[b]
			}
			for i, b := range joints {
				out.DJoint[k][i][j] = s.tan.dq[j][s.lay.bodies[b].qOff]
			}
		}
	}
	return out, nil
}

// singleDOFJoints returns the bodies whose joints are revolute or
// prismatic, in run-file joint order.
func (s *Sim) singleDOFJoints() []int {
	var js []int
	for i, b := range s.model.Bodies {
		if k := b.Joint.Kind; k == Revolute || k == Prismatic {
			js = append(js, i)
		}
	}
	return js
}

// Trace steps the simulator steps times from its current state with a
// forward tangent sweep over params, calling visit after every step with
// the step count, the generalized state and its tangents (dq[j], dv[j] are
// ∂q/∂θ_j and ∂v/∂θ_j). The slices are reused between calls. A running cost
// Σ ℓ(q_k, v_k) and its gradient Σ ∂ℓ/∂x · dx/dθ are built this way.
func (s *Sim) Trace(params []Param, steps int, visit func(step int, q, v []float64, dq, dv [][]float64) error) error {
	s.tan = newTangents(s, params)
	defer func() { s.tan = nil }()
	for k := 1; k <= steps; k++ {
		if err := s.Step(); err != nil {
			return err
		}
		if err := visit(k, s.q, s.v, s.tan.dq, s.tan.dv); err != nil {
			return err
		}
	}
	return nil
}

// Layout describes where each body's joint coordinates sit in the
// generalized state: QOffset and VOffset per body, and the sizes.
func (s *Sim) Layout() (qOff, vOff []int, nq, nv int) {
	for i := range s.lay.bodies {
		qOff = append(qOff, s.lay.bodies[i].qOff)
		vOff = append(vOff, s.lay.bodies[i].vOff)
	}
	return qOff, vOff, s.lay.nq, s.lay.nv
}
