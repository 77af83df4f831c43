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
