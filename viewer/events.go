package viewer

import (
	"fmt"
	"math"

	"stickslip/sim"
)

// EventKind classifies a change in a contact between two frames.
type EventKind int

// The kinds of contact event. A contact is touching when it is sticking or
// sliding; a separating record (a pair within the solver's margin that
// carries no impulse) is not touching.
const (
	TouchDown     EventKind = iota // a contact starts touching
	LiftOff                        // a touching contact stops touching
	StartSliding                   // sticking → sliding
	StartSticking                  // sliding → sticking
)

var eventKindNames = [...]string{"touch-down", "lift-off", "slip", "stick"}

func (k EventKind) String() string {
	if k < 0 || int(k) >= len(eventKindNames) {
		return "unknown"
	}
	return eventKindNames[k]
}

// Event is a change of one contact, identified by its bodies and feature,
// at a frame.
type Event struct {
	Frame   int
	Kind    EventKind
	A, B    string
	Feature uint32
}

func (e Event) String() string {
	return fmt.Sprintf("frame %d: %s %s/%s #%d", e.Frame, e.Kind, e.A, e.B, e.Feature)
}

type contactKey struct {
	a, b    string
	feature uint32
}

func keyOf(c *sim.ContactRecord) contactKey { return contactKey{c.A, c.B, c.Feature} }

func touching(s sim.ContactState) bool { return s == sim.Sticking || s == sim.Sliding }

// ContactEvents returns the contact events of a run in frame order: a
// contact that touches in a frame and did not in the frame before (or is
// absent there) touches down; the reverse lifts off; a touching contact
// that changes between sticking and sliding starts sliding or sticking.
// Contacts touching in the first frame touch down there.
func ContactEvents(r *sim.Run) []Event {
	var events []Event
	prev := map[contactKey]sim.ContactState{}
	cur := map[contactKey]sim.ContactState{}
	for f := range r.Frames {
		clear(cur)
		recs := r.ContactsInFrame(f)
		for i := range recs {
			c := &recs[i]
			k := keyOf(c)
			cur[k] = c.State
			old, had := prev[k]
			switch {
			case touching(c.State) && (!had || !touching(old)):
				events = append(events, Event{f, TouchDown, c.A, c.B, c.Feature})
			case had && touching(old) && !touching(c.State):
				events = append(events, Event{f, LiftOff, c.A, c.B, c.Feature})
			case had && old == sim.Sticking && c.State == sim.Sliding:
				events = append(events, Event{f, StartSliding, c.A, c.B, c.Feature})
			case had && old == sim.Sliding && c.State == sim.Sticking:
				events = append(events, Event{f, StartSticking, c.A, c.B, c.Feature})
			}
		}
		// Contacts that vanished while touching lift off; walk the previous
		// frame's records, not the map, so the order is deterministic.
		if f > 0 {
			old := r.ContactsInFrame(f - 1)
			for i := range old {
				c := &old[i]
				if _, still := cur[keyOf(c)]; !still && touching(c.State) {
					events = append(events, Event{f, LiftOff, c.A, c.B, c.Feature})
				}
			}
		}
		prev, cur = cur, prev
	}
	return events
}

// EventFrames returns the frames of events, in order, without repeats.
func EventFrames(events []Event) []int {
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
