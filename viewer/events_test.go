package viewer

import (
	"reflect"
	"testing"

	"stickslip/sim"
)

// runWithStates builds a run whose frame f holds one record per entry of
// states[f] (feature = entry index; "-" means no record).
func runWithStates(states [][]string) *sim.Run {
	r := &sim.Run{TimeStep: 1e-3, BodyNames: []string{}}
	for f, row := range states {
		r.Frames = append(r.Frames, sim.Frame{Step: f, T: float64(f) * 1e-3})
		for k, s := range row {
			if s == "-" {
				continue
			}
			st, ok := sim.ParseContactState(s)
			if !ok {
				panic(s)
			}
			imp := 0.0
			if st != sim.Separating {
				imp = 1e-3
			}
			r.Contacts = append(r.Contacts, sim.ContactRecord{Frame: f, A: "floor", B: "puck", Feature: uint32(k), State: st, NormalImpulse: imp * float64(f+1)})
		}
	}
	return r
}

func TestEventFramesAndKeyFrames(t *testing.T) {
	r := runWithStates([][]string{
		/* 0 */ {"-", "separating"},
		/* 1 */ {"sticking", "separating"}, // 0 touches down
		/* 2 */ {"sticking", "sticking"}, // 1 touches down
		/* 3 */ {"sliding", "sticking"}, // 0 slips
		/* 4 */ {"sliding", "separating"}, // 1 lifts off
		/* 5 */ {"sticking", "-"}, // 0 sticks
		/* 6 */ {"-", "-"}, // 0 vanishes while touching: lifts off
		/* 7 */ {"sliding", "-"}, // 0 touches down sliding
		/* 8 */ {"sliding", "separating"}, // nothing touches down or changes
	})
	if fr := EventFrames(r.Events()); !reflect.DeepEqual(fr, []int{1, 2, 3, 4, 5, 6, 7}) {
		t.Errorf("event frames %v, want 1 to 7", fr)
	}
	if f, ok := FirstSlipFrame(r); !ok || f != 3 {
		t.Errorf("first slip frame %d %v, want 3", f, ok)
	}
	// Impulses grow with the frame index in this fixture; the largest
	// touching one is in frame 8.
	if f, ok := LargestImpulseFrame(r); !ok || f != 8 {
		t.Errorf("largest impulse frame %d %v, want 8", f, ok)
	}
	if _, ok := FirstSlipFrame(runWithStates([][]string{{"sticking"}})); ok {
		t.Error("a run without sliding has no first slip")
	}
	if _, ok := LargestImpulseFrame(runWithStates([][]string{{"separating"}})); ok {
		t.Error("a run without impulses has no largest impulse")
	}
	for k, want := range map[sim.EventKind]string{sim.TouchDown: "touch-down", sim.LiftOff: "lift-off", sim.StickSlip: "stick->slip", sim.SlipStick: "slip->stick"} {
		if eventLabel(k) != want {
			t.Errorf("label of %v: %q, want %q", k, eventLabel(k), want)
		}
	}
}
