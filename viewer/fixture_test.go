package viewer

import (
	"math"
	"os"
	"testing"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

// needDisplay skips a test that opens a GL context when no X display is
// set; under make test (xvfb-run) it always runs.
func needDisplay(t testing.TB) {
	t.Helper()
	if os.Getenv("DISPLAY") == "" {
		t.Skip("no DISPLAY: run under xvfb-run (make test does)")
	}
}

// boxOnFloor is a red box (body 0), 0.4 × 0.4 × 0.2 m, resting on the
// floor plane z = 0 with four sticking corner contacts, then sliding along
// +x at speed v from frame slideFrom on (contacts sliding).
func boxOnFloor(frames int, v float64, slideFrom int) (*sim.Model, *sim.Run) {
	he := r3.Vec{X: 0.2, Y: 0.2, Z: 0.1}
	m := &sim.Model{
		Gravity: r3.Vec{Z: -sim.StandardGravity},
		Bodies: []sim.Body{{
			Name: "crate", Mass: 2,
			Inertia: contact.Identity3,
			Shapes:  []contact.Shape{{Kind: contact.Box, HalfExtents: he, Local: contact.IdentityPose}},
			Joint:   sim.Joint{Kind: sim.Free, Parent: -1},
		}},
		Static: []sim.StaticShape{{Name: "floor", Shape: contact.Shape{Kind: contact.Plane, Local: contact.IdentityPose}}},
	}
	h := 1e-3
	r := &sim.Run{TimeStep: h, BodyNames: []string{"crate"}}
	weight := 2 * sim.StandardGravity * h // N·s per step
	for f := 0; f < frames; f++ {
		t := float64(f) * h
		x := 0.0
		state := sim.Sticking
		var fr r3.Vec
		if f >= slideFrom {
			x = v * float64(f-slideFrom) * h
			state = sim.Sliding
			fr = r3.Vec{X: -0.3 * weight / 4}
		}
		pos := r3.Vec{X: x, Z: he.Z}
		r.Frames = append(r.Frames, sim.Frame{Step: f, T: t, Bodies: []sim.BodyFrame{{
			Pose: contact.Pose{Pos: pos, Rot: contact.IdentityQuat},
		}}})
		for k, c := range [4][2]float64{{-1, -1}, {1, -1}, {1, 1}, {-1, 1}} {
			r.Contacts = append(r.Contacts, sim.ContactRecord{
				Frame: f, T: t, A: "floor", B: "crate", Feature: uint32(k),
				Point:  r3.Vec{X: x + c[0]*he.X, Y: c[1] * he.Y},
				Normal: r3.Vec{Z: 1}, NormalImpulse: weight / 4, FrictionImpulse: fr, State: state,
			})
		}
	}
	return m, r
}

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }
