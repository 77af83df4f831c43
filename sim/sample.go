package sim

import (
	"fmt"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// Samples are a rollout's outputs at chosen times, with their derivatives
// with respect to a list of parameters.
type Samples struct {
	Params []Param
	Times  []float64
	Frames []Frame
	// DPos[k][b][j] is ∂(position of body b at Times[k])/∂θ_j, and
	// DRot[k][b][j] the derivative of its orientation as a world rotation
	// vector δφ (δR = [δφ]× R). DJoint[k][i][j] is ∂q/∂θ_j of the i-th
	// single-DOF joint (run-file joint order).
	DPos   [][][]r3.Vec
	DRot   [][][]r3.Vec
	DJoint [][][]float64
}

// SetFrame sets the simulator's time and state from a recorded frame (bodies
// in model order, single-DOF joints in run-file order). Free bodies take the
// frame's pose and velocity; joints take their position and velocity.
// Bodies on other joints follow from their joints.
func (s *Sim) SetFrame(f *Frame) error {
	m := s.model
	if len(f.Bodies) != len(m.Bodies) {
		return fmt.Errorf("frame has %d bodies, model %d", len(f.Bodies), len(m.Bodies))
	}
	j := 0
	for i := range m.Bodies {
		bl := &s.lay.bodies[i]
		q := s.q[bl.qOff : bl.qOff+bl.nq]
		v := s.v[bl.vOff : bl.vOff+bl.nv]
		switch m.Bodies[i].Joint.Kind {
		case Free:
			b := f.Bodies[i]
			rot := b.Pose.Rot.Normalize()
			w := rot.InvRotate(b.Angular)
			copy(q, []float64{b.Pose.Pos.X, b.Pose.Pos.Y, b.Pose.Pos.Z, rot.W, rot.X, rot.Y, rot.Z})
			copy(v, []float64{w.X, w.Y, w.Z, b.Linear.X, b.Linear.Y, b.Linear.Z})
		case Revolute, Prismatic:
			if j >= len(f.Joints) {
				return fmt.Errorf("frame has %d joints, model more", len(f.Joints))
			}
			q[0], v[0] = f.Joints[j].Q, f.Joints[j].QD
			j++
		}
	}
	s.t = f.T
	s.step = int(f.T/s.set.TimeStep + 0.5)
	s.contacts = s.contacts[:0]
	s.kin.update(m, s.lay, s.q, s.v)
	return nil
}

// frame returns the current state as a frame.
func (s *Sim) frame() Frame {
	m := s.model
	f := Frame{Step: s.step, T: s.t, Bodies: make([]BodyFrame, len(m.Bodies))}
	for i := range m.Bodies {
		f.Bodies[i] = s.Body(i)
		if k := m.Bodies[i].Joint.Kind; k == Revolute || k == Prismatic {
			bl := &s.lay.bodies[i]
			applied, cmd := s.AppliedEffort(bl.vOff)
			f.Joints = append(f.Joints, JointFrame{Q: s.q[bl.qOff], QD: s.v[bl.vOff], Tau: cmd, Effort: applied})
		}
	}
	return f
}

// runTo steps until the simulated time reaches t (to within half a step).
func (s *Sim) runTo(t float64) error {
	for s.t < t-s.set.TimeStep/2 {
		if err := s.Step(); err != nil {
			return err
		}
	}
	return nil
}

// rotDiff returns the world rotation vector φ with exp([φ]×) a = b, for
// nearby orientations.
func rotDiff(a, b contact.Quat) r3.Vec {
	d := b.Mul(a.Conj())
	if d.W < 0 {
		d = contact.Quat{W: -d.W, X: -d.X, Y: -d.Y, Z: -d.Z}
	}
	return r3.Scale(2, r3.Vec{X: d.X, Y: d.Y, Z: d.Z})
}

// sampleFrames runs to each of times and returns the frames there.
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
