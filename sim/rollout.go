package sim

import "sort"

// Rollout simulates the model from its initial state for set.Duration and
// records every set.FrameEvery-th step as a frame, with that step's
// contacts. Scene is stored verbatim in the run. The error, if any, is a
// *StepError; the run holds the frames recorded before it.
func Rollout(m *Model, set Settings, scene []byte) (*Run, error) {
	s, err := New(m, set)
	if err != nil {
		return nil, err
	}
	return s.Record(scene, nil)
}

// Record runs the simulator from its current state to the settings'
// duration and returns the recorded run. If progress is not nil it is
// called every 100 steps with the step count.
func (s *Sim) Record(scene []byte, progress func(step int)) (*Run, error) {
	set := s.set
	m := s.model
	run := &Run{TimeStep: set.TimeStep, Scene: scene}
	for _, b := range m.Bodies {
		run.BodyNames = append(run.BodyNames, b.Name)
	}
	var joints []int
	for i, b := range m.Bodies {
		if k := b.Joint.Kind; k == Revolute || k == Prismatic {
			run.JointNames = append(run.JointNames, b.Joint.Name)
			joints = append(joints, i)
		}
	}
	steps := int(set.Duration/set.TimeStep + 0.5)
	var iters []int
	record := func() {
		f := Frame{Step: s.step, T: s.t, Bodies: make([]BodyFrame, len(m.Bodies)), Joints: make([]JointFrame, len(joints))}
		for i := range m.Bodies {
			f.Bodies[i] = s.Body(i)
		}
		for k, i := range joints {
			bl := &s.lay.bodies[i]
			applied, cmd := s.AppliedEffort(bl.vOff)
			f.Joints[k] = JointFrame{Q: s.q[bl.qOff], QD: s.v[bl.vOff], Tau: cmd, Effort: applied}
		}
		frame := len(run.Frames)
		run.Frames = append(run.Frames, f)
		for i := range s.contacts {
			c := &s.contacts[i]
			run.Contacts = append(run.Contacts, ContactRecord{
				Frame: frame, T: s.t, A: c.NameA, B: c.NameB, Feature: c.Point.Feature,
				Point: c.Point.Pos, Normal: c.Point.Normal, Gap: c.Point.Gap,
				NormalImpulse: c.Impulse[0], FrictionImpulse: c.FrictionImpulse(),
				Slip: c.Slip(), State: c.State(),
			})
		}
	}
	record()
	lastSig := s.contactSignature()
	var err error
	for s.step < steps {
		if err = s.Step(); err != nil {
			break
		}
		st := s.lastStats
		iters = append(iters, st.Iterations)
		if st.Residual > run.Stats.MaxResidual {
			run.Stats.MaxResidual = st.Residual
		}
		// Frames are decimated, but a step whose contact states changed is
		// always recorded, so no touch-down or stick/slip event is lost.
		sig := s.contactSignature()
		if s.step%set.FrameEvery == 0 || sig != lastSig {
			record()
		}
		lastSig = sig
		if progress != nil && s.step%100 == 0 {
			progress(s.step)
		}
	}
	run.Stats.Steps = s.step
	if len(iters) > 0 {
		sort.Ints(iters)
		run.Stats.SolverIterMedian = iters[len(iters)/2]
		run.Stats.SolverIterMax = iters[len(iters)-1]
	}
	return run, err
}

// contactSignature hashes the active contacts and their states (FNV-1a), to
// notice steps where the contact mode changed.
func (s *Sim) contactSignature() uint64 {
	h := uint64(14695981039346656037)
	mix := func(x uint64) {
		h ^= x
		h *= 1099511628211
	}
	for i := range s.contacts {
		c := &s.contacts[i]
		st := c.State()
		if st == Separating {
			continue
		}
		mix(uint64(c.A + 1))
		mix(uint64(c.B + 1))
		mix(uint64(c.Point.Feature))
		mix(uint64(st))
	}
	return h
}
