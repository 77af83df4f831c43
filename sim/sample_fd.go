package sim

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// Sample runs the simulator from its current state through each of times
// (increasing, not before the current time) and returns the frames there
// with their derivatives with respect to params (resolved against this
// simulator's model).
//
// TEMPORARY: the derivatives here come from central differences of whole
// rollouts while the forward tangent sweep is being written; they will be
// replaced by it, with the same signature and results.
func (s *Sim) Sample(params []Param, times []float64) (*Samples, error) {
	start := s.frame()
	out := &Samples{Params: params, Times: times}
	frames, err := s.sampleFrames(times)
	if err != nil {
		return nil, err
	}
	out.Frames = frames
	nb, np := len(s.model.Bodies), len(params)
	out.DPos = make([][][]r3.Vec, len(times))
	out.DRot = make([][][]r3.Vec, len(times))
	out.DJoint = make([][][]float64, len(times))
	for k := range times {
		out.DPos[k] = make([][]r3.Vec, nb)
		out.DRot[k] = make([][]r3.Vec, nb)
		for b := 0; b < nb; b++ {
			out.DPos[k][b] = make([]r3.Vec, np)
			out.DRot[k][b] = make([]r3.Vec, np)
		}
		out.DJoint[k] = make([][]float64, len(frames[k].Joints))
		for j := range out.DJoint[k] {
			out.DJoint[k][j] = make([]float64, np)
		}
	}
	for j := range params {
		p := &params[j]
		v := p.Get(s.model)
		d := 1e-6 * math.Max(1, math.Abs(v))
		var side [2][]Frame
		for i, sign := range [2]float64{1, -1} {
			m := CopyModel(s.model)
			p.Set(m, v+sign*d)
			o, err := New(m, s.set)
			if err != nil {
				return nil, err
			}
			if err := o.SetFrame(&start); err != nil {
				return nil, err
			}
			if side[i], err = o.sampleFrames(times); err != nil {
				return nil, err
			}
		}
		for k := range times {
			for b := 0; b < nb; b++ {
				a, c := side[0][k].Bodies[b].Pose, side[1][k].Bodies[b].Pose
				out.DPos[k][b][j] = r3.Scale(1/(2*d), r3.Sub(a.Pos, c.Pos))
				out.DRot[k][b][j] = r3.Scale(1/(2*d), rotDiff(c.Rot, a.Rot))
			}
			for i := range side[0][k].Joints {
				out.DJoint[k][i][j] = (side[0][k].Joints[i].Q - side[1][k].Joints[i].Q) / (2 * d)
			}
		}
	}
	return out, nil
}

func (s *Sim) sampleFrames(times []float64) ([]Frame, error) {
	frames := make([]Frame, len(times))
	for k, t := range times {
		if err := s.runTo(t); err != nil {
			return nil, err
		}
		frames[k] = s.frame()
	}
	return frames, nil
}
