package sim

import "fmt"

// EventKind is a change of a contact's state between recorded frames.
type EventKind int

// The contact events.
const (
	TouchDown EventKind = iota // separating or absent → sticking or sliding
	LiftOff                    // sticking or sliding → separating or absent
	StickSlip                  // sticking → sliding
	SlipStick                  // sliding → sticking
)

var eventKindNames = [...]string{"touch-down", "lift-off", "stick→slip", "slip→stick"}

func (k EventKind) String() string {
	if k < 0 || int(k) >= len(eventKindNames) {
		return fmt.Sprintf("EventKind(%d)", int(k))
	}
	return eventKindNames[k]
}

// Event is a contact state change. For a lift-off, the record is the last
// one in which the contact was active.
type Event struct {
	Kind   EventKind
	Frame  int
	T      float64
	Record ContactRecord
}

type contactKey struct {
	a, b    string
	feature uint32
}

// Events returns the contact events of a run in frame order. A contact is
// followed from frame to frame by its bodies and feature pair.
func (r *Run) Events() []Event {
	var events []Event
	prev := map[contactKey]ContactRecord{}
	cur := map[contactKey]ContactRecord{}
	for f := range r.Frames {
		clear(cur)
		for _, c := range r.ContactsInFrame(f) {
			cur[contactKey{c.A, c.B, c.Feature}] = c
		}
		t := r.Frames[f].T
		// Walk this frame's records in file order for a deterministic result.
		for _, c := range r.ContactsInFrame(f) {
			k := contactKey{c.A, c.B, c.Feature}
			p, seen := prev[k]
			was := Separating
			if seen {
				was = p.State
			}
			if kind, ok := transition(was, c.State); ok {
				events = append(events, Event{Kind: kind, Frame: f, T: t, Record: c})
			}
		}
		for _, c := range lastFrameOrder(r, f) {
			k := contactKey{c.A, c.B, c.Feature}
			if _, still := cur[k]; !still && c.State != Separating {
				events = append(events, Event{Kind: LiftOff, Frame: f, T: t, Record: c})
			}
		}
		prev, cur = cur, prev
	}
	return events
}

// lastFrameOrder returns the records of the frame before f.
func lastFrameOrder(r *Run, f int) []ContactRecord {
	if f == 0 {
		return nil
	}
	return r.ContactsInFrame(f - 1)
}

func transition(was, is ContactState) (EventKind, bool) {
	switch {
	case was == is:
		return 0, false
	case was == Separating:
		return TouchDown, true
	case is == Separating:
		return LiftOff, true
	case was == Sticking:
		return StickSlip, true
	}
	return SlipStick, true
}
