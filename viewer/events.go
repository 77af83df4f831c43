package viewer

import (
	"math"

	"stickslip/sim"
)

// eventLabel names an event kind in the ASCII that the on-screen font has.
func eventLabel(k sim.EventKind) string {
	switch k {
	case sim.TouchDown:
		return "touch-down"
	case sim.LiftOff:
		return "lift-off"
	case sim.StickSlip:
		return "stick->slip"
	case sim.SlipStick:
		return "slip->stick"
	}
	return "event"
}

// EventFrames returns the frames of events, in order, without repeats.
func EventFrames(events []sim.Event) []int {
	var fr []int
	for _, e := range events {
		if n := len(fr); n == 0 || fr[n-1] != e.Frame {
			fr = append(fr, e.Frame)
		}
	}
	return fr
}

// FirstSlipFrame returns the first frame with a sliding contact.
func FirstSlipFrame(r *sim.Run) (int, bool) {
	for i := range r.Contacts {
		if r.Contacts[i].State == sim.Sliding {
			return r.Contacts[i].Frame, true
		}
	}
	return 0, false
}

// LargestImpulseFrame returns the frame of the largest normal impulse
// (the first such frame on ties).
func LargestImpulseFrame(r *sim.Run) (int, bool) {
	best, frame := 0.0, -1
	for i := range r.Contacts {
		if c := &r.Contacts[i]; c.NormalImpulse > best {
			best, frame = c.NormalImpulse, c.Frame
		}
	}
	return frame, frame >= 0
}

// maxContactForce returns the largest normal or friction force (impulse
// over the time step) of a run, in newtons.
func maxContactForce(r *sim.Run) float64 {
	if !(r.TimeStep > 0) {
		return 0
	}
	m := 0.0
	for i := range r.Contacts {
		c := &r.Contacts[i]
		m = math.Max(m, math.Abs(c.NormalImpulse))
		m = math.Max(m, math.Hypot(math.Hypot(c.FrictionImpulse.X, c.FrictionImpulse.Y), c.FrictionImpulse.Z))
	}
	return m / r.TimeStep
}
