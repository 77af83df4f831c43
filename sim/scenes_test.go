package sim

import (
	"math"
	"testing"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// Test scenes are built here directly from handbook mass properties, so that
// the physics tests depend on nothing but this package and contact.

var down = r3.Vec{Z: -StandardGravity}

// boxBody returns a solid box of full extents (a, b, c) and mass m, its
// inertia from the handbook table m(b²+c²)/12 and cyclic.
func boxBody(name string, m float64, size r3.Vec, pose contact.Pose) Body {
	a, b, c := size.X, size.Y, size.Z
	return Body{
		Name: name, Mass: m, Material: "test",
		Inertia: contact.Diag3(r3.Vec{X: m * (b*b + c*c) / 12, Y: m * (a*a + c*c) / 12, Z: m * (a*a + b*b) / 12}),
		Shapes:  []contact.Shape{{Kind: contact.Box, HalfExtents: r3.Scale(0.5, size), Local: contact.IdentityPose}},
		Joint:   Joint{Kind: Free, Parent: -1},
		Start:   BodyStart{Pose: pose},
	}
}

// sphereBody returns a solid sphere, inertia 2/5 m r² (handbook table).
func sphereBody(name string, m, r float64, pos r3.Vec) Body {
	i := 0.4 * m * r * r
	return Body{
		Name: name, Mass: m, Material: "test",
		Inertia: contact.Diag3(r3.Vec{X: i, Y: i, Z: i}),
		Shapes:  []contact.Shape{{Kind: contact.Sphere, Radius: r, Local: contact.IdentityPose}},
		Joint:   Joint{Kind: Free, Parent: -1},
		Start:   BodyStart{Pose: contact.Pose{Pos: pos, Rot: contact.IdentityQuat}},
	}
}

// floor returns a level plane through the origin, or one tilted by angle
// about the world x axis (an incline descending towards −y... see slopeDir).
func floor(tilt float64) StaticShape {
	return StaticShape{
		Name:     "floor",
		Material: "ground",
		Shape:    contact.Shape{Kind: contact.Plane, Local: contact.Pose{Rot: contact.QuatFromAxisAngle(r3.Vec{X: 1}, tilt)}},
	}
}

// slopeDir is the downhill unit direction of floor(tilt).
func slopeDir(tilt float64) r3.Vec {
	// The tilted plane's normal is R_x(tilt) ẑ = (0, −sin, cos); downhill
	// along the plane is R_x(tilt) (−ŷ) = (0, −cos, −sin).
	return r3.Vec{Y: -math.Cos(tilt), Z: -math.Sin(tilt)}
}

func materials(mu, e float64) Materials {
	return Materials{Default: PairProps{Friction: mu, Restitution: e}}
}

func mustSim(t testing.TB, m *Model, set Settings) *Sim {
	t.Helper()
	s, err := New(m, set)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func run(t testing.TB, s *Sim, duration float64) {
	t.Helper()
	n := int(duration/s.set.TimeStep + 0.5)
	for i := 0; i < n; i++ {
		if err := s.Step(); err != nil {
			t.Fatal(err)
		}
	}
}

// onIncline places a body's frame so that its lowest point (at local offset
// −depth·ẑ from the frame origin) touches the tilted plane, offset by along
// metres downhill.
func onIncline(tilt, depth, along float64) contact.Pose {
	rot := contact.QuatFromAxisAngle(r3.Vec{X: 1}, tilt)
	n := rot.Rotate(r3.Vec{Z: 1})
	return contact.Pose{Pos: r3.Add(r3.Scale(depth, n), r3.Scale(along, slopeDir(tilt))), Rot: rot}
}
