package contact

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

// TestConvexPairAgreesWithClosedForm runs the general GJK/EPA route on
// pairs that also have a closed form, over random poses, and requires the
// same deepest gap and normal to 1e-6. Each closed form is itself checked
// against hand-worked distances in TestClosedFormGaps.
func TestConvexPairAgreesWithClosedForm(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	pairs := [][2]*Shape{
		{sphere(0.3), sphere(0.2)},
		{sphere(0.3), capsule(0.2, 0.4)},
		{capsule(0.1, 0.3), capsule(0.2, 0.4)},
		{sphere(0.3), box(0.3, 0.2, 0.4)},
		{capsule(0.2, 0.4), box(0.3, 0.2, 0.4)},
		{sphere(0.3), cylinder(0.25, 0.35)},
	}
	for _, pr := range pairs {
		a, b := pr[0], pr[1]
		compared, deep := 0, 0
		for trial := 0; trial < 2000; trial++ {
			pa, pb := randomPose(rng, 0.5), randomPose(rng, 0.5)
			closed := Collide(a, pa, b, pb, 0.1, nil)
			general := convexPair(a, pa, b, pb, 0.1, nil)
			if len(closed) == 0 || len(general) == 0 {
				if len(closed) != len(general) && math.Abs(minGapOr(closed, general)-0.1) > 1e-9 {
					t.Errorf("%v-%v: %d closed-form points, %d general", a.Kind, b.Kind, len(closed), len(general))
				}
				continue
			}
			c, g := minGap(closed), general[0]
			coreOverlap := c.Gap < -(a.Radius + b.Radius)
			if a.Kind == Capsule && b.Kind == Box && coreOverlap {
				// The closed form prefers a face axis unless an edge axis
				// is clearly better (it keeps resting contacts from
				// flickering), so it may report up to 5 % more
				// penetration than the true minimum found by EPA.
				deep++
				if c.Gap > g.Gap+1e-6 || c.Gap < 1.05*(g.Gap+a.Radius)-a.Radius-1e-6 {
					t.Errorf("%v-%v: closed-form gap %v outside [1.05, 1]× EPA's %v", a.Kind, b.Kind, c.Gap, g.Gap)
				}
				continue
			}
			compared++
			if math.Abs(c.Gap-g.Gap) > 1e-6 {
				t.Errorf("%v-%v: closed-form gap %.12g, GJK/EPA %.12g", a.Kind, b.Kind, c.Gap, g.Gap)
			}
			if !vecNear(c.Normal, g.Normal, 1e-6) && !parallelContact(closed) {
				t.Errorf("%v-%v: closed-form normal %v, GJK/EPA %v (gap %v)", a.Kind, b.Kind, c.Normal, g.Normal, c.Gap)
			}
			// The point itself may differ where the contact is a line or
			// an area; otherwise it must agree too.
			if len(closed) == 1 && !vecNear(c.Pos, g.Pos, 1e-6) && c.Gap > -(a.Radius+b.Radius) {
				t.Errorf("%v-%v: closed-form point %v, GJK/EPA %v", a.Kind, b.Kind, c.Pos, g.Pos)
			}
		}
		if compared < 100 {
			t.Errorf("%v-%v: only %d comparisons (%d deep)", a.Kind, b.Kind, compared, deep)
		}
	}
}

func minGapOr(a, b []Point) float64 {
	if len(a) > 0 {
		return minGap(a).Gap
	}
	return minGap(b).Gap
}

// parallelContact reports a two-point (line) contact, where the normal of
// the deepest point is shared by a whole segment.
func parallelContact(ps []Point) bool { return len(ps) > 1 }

// TestConvexPairAnalytic checks the pairs that only the general route
// handles against distances worked out by hand.
func TestConvexPairAnalytic(t *testing.T) {
	s2 := math.Sqrt2
	tests := []struct {
		name   string
		a      *Shape
		pa     Pose
		b      *Shape
		pb     Pose
		gap    float64
		normal r3.Vec
	}{
		// Cylinder standing on a box face, apart and sunk in.
		{"box-cylinder cap apart", box(0.5, 0.5, 0.1), IdentityPose, cylinder(0.2, 0.3), at(0.1, 0, 0.45), 0.05, ez},
		{"box-cylinder cap deep", box(0.5, 0.5, 0.1), IdentityPose, cylinder(0.2, 0.3), at(0.1, 0, 0.38), -0.02, ez},
		// Cylinder lying on a box face: side line at distance r.
		{"box-cylinder side", box(0.5, 0.5, 0.1), IdentityPose, cylinder(0.2, 0.3), atRot(0, 0.1, 0.31, ey, math.Pi/2), 0.01, ez},
		// Cylinder resting on its rim, tilted 45° about x: lowest rim point
		// (h + r)/√2 below the centre.
		{"box-cylinder rim", box(0.5, 0.5, 0.1), IdentityPose, cylinder(0.2, 0.3), atRot(0, 0, 0.1+0.5/s2+0.02, ex, math.Pi/4), 0.02, ez},
		{"box-cylinder rim deep", box(0.5, 0.5, 0.1), IdentityPose, cylinder(0.2, 0.3), atRot(0, 0, 0.1+0.5/s2-0.01, ex, math.Pi/4), -0.01, ez},
		// Box corner pointing into the cylinder's side: distance along the radius.
		{"cylinder-box corner", cylinder(0.2, 0.3), IdentityPose, box(0.1, 0.1, 0.1), Pose{Pos: r3.Vec{X: 0.2 + 0.1*math.Sqrt(3) + 0.03}, Rot: turn(r3.Vec{X: 1, Y: 1, Z: 1}, r3.Vec{X: -1})}, 0.03, ex},
		// Two cylinders crossed on their sides; and stacked coaxially.
		{"cylinder-cylinder crossed", cylinder(0.2, 0.5), atRot(0, 0, 0, ex, math.Pi/2), cylinder(0.1, 0.5), atRot(0, 0, 0.32, ey, math.Pi/2), 0.02, ez},
		{"cylinder-cylinder crossed deep", cylinder(0.2, 0.5), atRot(0, 0, 0, ex, math.Pi/2), cylinder(0.1, 0.5), atRot(0, 0, 0.29, ey, math.Pi/2), -0.01, ez},
		{"cylinder-cylinder stacked deep", cylinder(0.2, 0.3), IdentityPose, cylinder(0.1, 0.2), at(0.05, 0, 0.49), -0.01, ez},
		// Capsule crossing a lying cylinder; capsule end on a cap.
		{"capsule-cylinder crossed", capsule(0.1, 0.5), atRot(0, 0, 0.33, ey, math.Pi/2), cylinder(0.2, 0.5), atRot(0, 0, 0, ex, math.Pi/2), 0.03, r3.Vec{Z: -1}},
		{"capsule-cylinder end on cap", capsule(0.1, 0.5), at(0.05, 0, 0.88), cylinder(0.2, 0.3), IdentityPose, -0.02, r3.Vec{Z: -1}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ps := Collide(tc.a, tc.pa, tc.b, tc.pb, 0.1, nil)
			if len(ps) == 0 {
				t.Fatal("no contact")
			}
			p := minGap(ps)
			if math.Abs(p.Gap-tc.gap) > 1e-9 {
				t.Errorf("gap = %.15g, want %.15g", p.Gap, tc.gap)
			}
			if !vecNear(p.Normal, tc.normal, 1e-9) {
				t.Errorf("normal = %v, want %v", p.Normal, tc.normal)
			}
			checkPoints(t, tc.a, tc.pa, tc.b, tc.pb, ps)
		})
	}
}

func BenchmarkGJKBoxCylinder(b *testing.B) {
	benchCollide(b, box(0.5, 0.5, 0.1), IdentityPose, cylinder(0.2, 0.3), atRot(0.05, 0.02, 0.1+0.5/math.Sqrt2+0.005, r3.Vec{X: 1, Y: 0.3}, math.Pi/4))
}

func BenchmarkEPACylinderCylinder(b *testing.B) {
	benchCollide(b, cylinder(0.2, 0.5), atRot(0, 0, 0, ex, math.Pi/2), cylinder(0.1, 0.5), atRot(0, 0, 0.29, r3.Vec{X: 0.2, Y: 1}, math.Pi/2))
}

// turn returns the rotation taking the direction of u to that of v.
func turn(u, v r3.Vec) Quat {
	u, v = r3.Unit(u), r3.Unit(v)
	return QuatFromAxisAngle(r3.Cross(u, v), math.Acos(r3.Dot(u, v)))
}

// TestFlatManifolds checks that flat-on-flat contacts handled by the
// convex-distance route get a manifold that holds the shape up, with every
// point's gap the hand-worked face-to-face distance.
func TestFlatManifolds(t *testing.T) {
	tests := []struct {
		name string
		a    *Shape
		pa   Pose
		b    *Shape
		pb   Pose
		n    int
		gap  float64
	}{
		// The cap's ring of rim points, all inside the box face.
		{"cylinder standing on box", box(0.5, 0.5, 0.1), IdentityPose, cylinder(0.2, 0.3), atRot(0.1, 0, 0.399, ez, 0.3), cylinderRingN, -0.001},
		// The small box face lies inside the cap's ring.
		{"box on cylinder cap", cylinder(0.2, 0.3), IdentityPose, box(0.1, 0.1, 0.05), atRot(0, 0.02, 0.352, ez, 0.4), 4, 0.002},
		// Line contact: both ends of the side line.
		{"cylinder lying on box", box(0.5, 0.5, 0.1), IdentityPose, cylinder(0.2, 0.3), atRot(0, 0.1, 0.299, ey, math.Pi/2), 2, -0.001},
		{"cylinders stacked", cylinder(0.3, 0.2), IdentityPose, cylinder(0.1, 0.2), at(0.05, 0, 0.4), cylinderRingN, 0},
		{"cylinders side by side", cylinder(0.2, 0.5), atRot(0, 0, 0, ex, math.Pi/2), cylinder(0.1, 0.3), atRot(0, 0.1, 0.3, ex, math.Pi/2), 2, 0},
		{"capsule on cylinder cap", cylinder(0.2, 0.3), IdentityPose, capsule(0.05, 0.1), atRot(0, 0, 0.34, ex, math.Pi/2), 2, -0.01},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			for swap := 0; swap < 2; swap++ {
				var ps []Point
				if swap == 0 {
					ps = Collide(tc.a, tc.pa, tc.b, tc.pb, 0.005, nil)
				} else {
					ps = Collide(tc.b, tc.pb, tc.a, tc.pa, 0.005, nil)
				}
				if len(ps) != tc.n {
					t.Fatalf("swap %d: %d points, want %d", swap, len(ps), tc.n)
				}
				want := ez
				if swap == 1 {
					want = r3.Scale(-1, ez)
				}
				for i, p := range ps {
					if math.Abs(p.Gap-tc.gap) > 1e-12 || !vecNear(p.Normal, want, 1e-12) {
						t.Errorf("swap %d point %d: gap %v normal %v, want %v %v", swap, i, p.Gap, p.Normal, tc.gap, want)
					}
				}
				if swap == 0 {
					checkPoints(t, tc.a, tc.pa, tc.b, tc.pb, ps)
				}
			}
		})
	}
}
