package contact

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/spatial/r3"
)

func sphere(r float64) *Shape { return &Shape{Kind: Sphere, Radius: r, Local: IdentityPose} }
func capsule(r, h float64) *Shape {
	return &Shape{Kind: Capsule, Radius: r, HalfLength: h, Local: IdentityPose}
}
func box(x, y, z float64) *Shape {
	return &Shape{Kind: Box, HalfExtents: r3.Vec{X: x, Y: y, Z: z}, Local: IdentityPose}
}
func cylinder(r, h float64) *Shape {
	return &Shape{Kind: Cylinder, Radius: r, HalfLength: h, Local: IdentityPose}
}
func plane() *Shape { return &Shape{Kind: Plane, Local: IdentityPose} }

func at(x, y, z float64) Pose { return Pose{Pos: r3.Vec{X: x, Y: y, Z: z}, Rot: IdentityQuat} }
func atRot(x, y, z float64, axis r3.Vec, angle float64) Pose {
	return Pose{Pos: r3.Vec{X: x, Y: y, Z: z}, Rot: QuatFromAxisAngle(axis, angle)}
}

var (
	ex = r3.Vec{X: 1}
	ey = r3.Vec{Y: 1}
	ez = r3.Vec{Z: 1}
)

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol*(1+math.Abs(b)) }

func vecNear(a, b r3.Vec, tol float64) bool { return r3.Norm(r3.Sub(a, b)) <= tol*(1+r3.Norm(b)) }

// minGap returns the deepest point of ps.
func minGap(ps []Point) Point {
	best := ps[0]
	for _, p := range ps[1:] {
		if p.Gap < best.Gap {
			best = p
		}
	}
	return best
}

// TestClosedFormGaps checks each closed-form pair against distances worked
// out by hand from elementary analytic geometry (distance of a point to a
// plane, a line or a box; Pythagoras).
func TestClosedFormGaps(t *testing.T) {
	s2 := math.Sqrt2
	th := 0.3 // tilt used below
	tests := []struct {
		name   string
		a      *Shape
		pa     Pose
		b      *Shape
		pb     Pose
		n      int     // expected number of points with gap below the deepest + 0.02
		gap    float64 // expected deepest gap
		normal r3.Vec  // expected normal of the deepest point
	}{
		// Point–plane distance minus radius (analytic geometry).
		{"plane-sphere apart", plane(), IdentityPose, sphere(0.5), at(1, 2, 0.7), 1, 0.2, ez},
		{"plane-sphere deep", plane(), IdentityPose, sphere(0.5), at(0, 0, 0.3), 1, -0.2, ez},
		{"tilted plane-sphere", plane(), atRot(0, 0, 1, ex, math.Pi/2), sphere(0.25), at(0, -2, 1), 1, 1.75, r3.Vec{Y: -1}},
		// d − r1 − r2 (Pythagoras: d = 5 for offsets 3, 4).
		{"sphere-sphere apart", sphere(1), at(0, 0, 0), sphere(1.5), at(3, 4, 0), 1, 2.5, r3.Vec{X: 0.6, Y: 0.8}},
		{"sphere-sphere deep", sphere(1), at(0, 0, 0), sphere(1.5), at(0, 0, 2), 1, -0.5, ez},
		// Sphere beside the segment's interior: perpendicular distance.
		{"sphere-capsule side", sphere(0.5), at(1, 0, 0.3), capsule(0.2, 1), IdentityPose, 1, 0.3, r3.Vec{X: -1}},
		// Sphere beyond the end: distance to the end point, 3-4-5.
		{"sphere-capsule end", sphere(0.5), at(3, 0, 5), capsule(0.2, 1), IdentityPose, 1, 5 - 0.7, r3.Vec{X: -0.6, Y: 0, Z: -0.8}},
		// Crossed capsules: the common perpendicular is the offset.
		{"capsule-capsule crossed", capsule(0.1, 1), atRot(0, 0, 0, ex, math.Pi/2), capsule(0.2, 1), atRot(0.1, 0.2, 1, ey, math.Pi/2), 1, 1 - 0.3, ez},
		{"capsule-capsule parallel", capsule(0.1, 1), atRot(0, 0, 0, ex, math.Pi/2), capsule(0.2, 1), atRot(0, 0.5, 0.25, ex, math.Pi/2), 2, -0.05, ez},
		// Capsule tilted by th: lower end at z − h cos th.
		{"plane-capsule tilted", plane(), IdentityPose, capsule(0.1, 0.5), atRot(0, 0, 0.6, ex, th), 1, 0.6 - 0.5*math.Cos(th) - 0.1, ez},
		// Box tilted by th about x: lowest corner hy sin th + hz cos th below the centre.
		{"plane-box tilted", plane(), IdentityPose, box(0.3, 0.2, 0.1), atRot(0, 0, 0.15, ex, th), 2, 0.15 - 0.2*math.Sin(th) - 0.1*math.Cos(th), ez},
		{"plane-box flat", plane(), IdentityPose, box(0.3, 0.2, 0.1), at(5, 5, 0.09), 4, -0.01, ez},
		// Cylinder tilted by th: deepest rim point h cos th + r sin th below the centre.
		{"plane-cylinder tilted", plane(), IdentityPose, cylinder(0.2, 0.5), atRot(0, 0, 0.55, ey, th), 1, 0.55 - 0.5*math.Cos(th) - 0.2*math.Sin(th), ez},
		{"plane-cylinder standing", plane(), IdentityPose, cylinder(0.2, 0.5), at(0, 0, 0.5), cylinderRingN, 0, ez},
		{"plane-cylinder lying", plane(), IdentityPose, cylinder(0.2, 0.5), atRot(0, 0, 0.19, ex, math.Pi/2), 2, -0.01, ez},
		// Sphere over a face, beside an edge (Pythagoras), over a vertex, and inside.
		// Sphere over the cap, beside the side, by the rim (Pythagoras), and inside near the side.
		{"sphere-cylinder cap", sphere(0.1), at(0.1, 0.1, 0.5), cylinder(0.2, 0.3), IdentityPose, 1, 0.1, r3.Vec{Z: -1}},
		{"sphere-cylinder side", sphere(0.1), at(0, 0.5, 0.1), cylinder(0.2, 0.3), IdentityPose, 1, 0.2, r3.Vec{Y: -1}},
		{"sphere-cylinder rim", sphere(0.1), at(0.3*0.6+0.2*0.6, 0.3*0.8+0.2*0.8, -0.3-0.4), cylinder(0.2, 0.3), IdentityPose, 1, 0.5 - 0.1, r3.Vec{X: -0.6 * 0.6, Y: -0.6 * 0.8, Z: 0.8}},
		{"sphere-cylinder inside", sphere(0.1), at(0.15, 0, 0.1), cylinder(0.2, 0.3), IdentityPose, 1, -0.05 - 0.1, r3.Vec{X: -1}},
		{"sphere-box face", sphere(0.1), at(0.1, 0.1, 0.5), box(0.3, 0.2, 0.25), IdentityPose, 1, 0.15, r3.Vec{Z: -1}},
		{"sphere-box edge", sphere(0.1), at(0.6, 0, 0.65), box(0.3, 0.2, 0.25), IdentityPose, 1, 0.5 - 0.1, r3.Vec{X: -0.6, Z: -0.8}},
		{"sphere-box vertex", sphere(0.1), at(0.5, 0.4, 0.45), box(0.3, 0.2, 0.25), IdentityPose, 1, math.Sqrt(3)*0.2 - 0.1, r3.Scale(-1/math.Sqrt(3), r3.Vec{X: 1, Y: 1, Z: 1})},
		{"sphere-box inside", sphere(0.1), at(0.25, 0, 0), box(0.3, 0.2, 0.25), IdentityPose, 1, -0.05 - 0.1, r3.Vec{X: -1}},
		// Capsule lying on a box face: two points; crossing an edge; stuck in a face.
		{"capsule-box lying", capsule(0.1, 0.2), atRot(0, 0, 0.35, ey, math.Pi/2), box(0.5, 0.5, 0.25), IdentityPose, 2, 0, r3.Vec{Z: -1}},
		{"capsule-box edge", capsule(0.1, 0.2), atRot(0.5+0.3/s2, 0, 0.25+0.3/s2, ex, math.Pi/2), box(0.5, 0.5, 0.25), IdentityPose, 1, 0.2, r3.Vec{X: -1 / s2, Z: -1 / s2}},
		{"capsule-box standing deep", capsule(0.1, 0.2), at(0, 0, 0.4), box(0.5, 0.5, 0.25), IdentityPose, 1, 0.4 - 0.2 - 0.25 - 0.1, r3.Vec{Z: -1}},
		{"capsule-box core inside", capsule(0.1, 0.2), at(0.1, 0, 0.3), box(0.5, 0.5, 0.25), IdentityPose, 1, 0.3 - 0.2 - 0.25 - 0.1, r3.Vec{Z: -1}},
		// Equal boxes stacked and shifted: the overlap rectangle's 4 corners.
		{"box-box stacked", box(0.5, 0.5, 0.5), IdentityPose, box(0.5, 0.5, 0.5), at(0.3, 0.2, 0.99), 4, -0.01, ez},
		{"box-box turned", box(1, 1, 0.5), IdentityPose, box(0.3, 0.3, 0.2), atRot(0.1, 0, 0.7, ez, 0.7), 4, 0, ez},
		// Edge on edge: A turned 45° about y, B 45° about x; edges √2 from each centre.
		{"box-box edge-edge", box(1, 1, 1), atRot(0, 0, 0, ey, math.Pi/4), box(1, 1, 1), atRot(0.1, 0.2, 2*s2+0.1, ex, math.Pi/4), 1, 0.1, ez},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ps := Collide(tc.a, tc.pa, tc.b, tc.pb, tc.gap+0.02, nil)
			if len(ps) != tc.n {
				t.Fatalf("got %d points %+v, want %d", len(ps), ps, tc.n)
			}
			p := minGap(ps)
			if !near(p.Gap, tc.gap, 1e-12) {
				t.Errorf("gap = %.15g, want %.15g", p.Gap, tc.gap)
			}
			if !vecNear(p.Normal, tc.normal, 1e-12) {
				t.Errorf("normal = %v, want %v", p.Normal, tc.normal)
			}
			checkPoints(t, tc.a, tc.pa, tc.b, tc.pb, ps)
		})
	}
}

// checkPoints checks properties every point must have: a unit normal, and
// surface points Pos ∓ Gap/2·Normal that lie in or on A and B
// respectively; for the deepest point of separated shapes they must lie
// on the surfaces (it is then the closest pair).
// (Other points of a manifold may sit inside a shape: the upper end of a
// tilted capsule, for one.) The convex-distance fallback on curved
// cylinders is held to a looser tolerance.
func checkPoints(t *testing.T, a *Shape, pa Pose, b *Shape, pb Pose, ps []Point) {
	t.Helper()
	tol := 1e-9
	if a.Kind == Cylinder || b.Kind == Cylinder {
		tol = 1e-4
	}
	if a.Kind == Box && b.Kind == Box {
		// Clipped points may lie outside the reference face by
		// boxClipSlack along each of its two side axes.
		tol = math.Sqrt2*boxClipSlack + 1e-9
	}
	deepest := minGap(ps)
	for i, p := range ps {
		if !near(r3.Norm(p.Normal), 1, 1e-12) {
			t.Errorf("%v-%v point %d: |normal| = %v", a.Kind, b.Kind, i, r3.Norm(p.Normal))
		}
		sa := r3.Sub(p.Pos, r3.Scale(p.Gap/2, p.Normal))
		sb := r3.Add(p.Pos, r3.Scale(p.Gap/2, p.Normal))
		da, db := surfaceDistance(a, pa, sa), surfaceDistance(b, pb, sb)
		exact := p == deepest && p.Gap >= 0
		if da > tol || db > tol || exact && (math.Abs(da) > tol || math.Abs(db) > tol) {
			t.Errorf("%v-%v point %d of %d: surface points %g off A, %g off B", a.Kind, b.Kind, i, len(ps), da, db)
		}
	}
}

// surfaceDistance returns the signed distance of the world point x from
// the surface of s at p, computed directly from the definitions (the
// independent oracle the tests use).
func surfaceDistance(s *Shape, p Pose, x r3.Vec) float64 {
	l := p.ApplyInv(x)
	switch s.Kind {
	case Plane:
		return l.Z
	case Sphere:
		return r3.Norm(l) - s.Radius
	case Capsule:
		z := math.Max(-s.HalfLength, math.Min(s.HalfLength, l.Z))
		return math.Hypot(math.Hypot(l.X, l.Y), l.Z-z) - s.Radius
	case Box:
		q := r3.Vec{X: math.Abs(l.X) - s.HalfExtents.X, Y: math.Abs(l.Y) - s.HalfExtents.Y, Z: math.Abs(l.Z) - s.HalfExtents.Z}
		out := r3.Vec{X: math.Max(q.X, 0), Y: math.Max(q.Y, 0), Z: math.Max(q.Z, 0)}
		return r3.Norm(out) + math.Min(math.Max(q.X, math.Max(q.Y, q.Z)), 0)
	case Cylinder:
		dr := math.Hypot(l.X, l.Y) - s.Radius
		dz := math.Abs(l.Z) - s.HalfLength
		return math.Hypot(math.Max(dr, 0), math.Max(dz, 0)) + math.Min(math.Max(dr, dz), 0)
	}
	return math.NaN()
}

// TestBoxBoxManifold checks the four clipped points of a box resting on a
// larger one against the corners worked out by hand.
func TestBoxBoxManifold(t *testing.T) {
	// B (half 0.2) rests 0.001 deep on A's top face (half height 0.5),
	// shifted so that it overhangs A's +x edge by 0.1: the contact is the
	// rectangle x ∈ [0.7, 1], y ∈ [−0.2, 0.2] on z = 0.5, its x = 1 side
	// cut where boxBox clips, at the side plane widened by boxClipSlack.
	a, b := box(1, 1, 0.5), box(0.2, 0.2, 0.2)
	pb := at(0.9, 0, 0.5+0.2-0.001)
	ps := Collide(a, IdentityPose, b, pb, 0.01, nil)
	x1 := 1 + boxClipSlack
	want := []r3.Vec{{X: 0.7, Y: -0.2}, {X: 0.7, Y: 0.2}, {X: x1, Y: -0.2}, {X: x1, Y: 0.2}}
	if len(ps) != 4 {
		t.Fatalf("got %d points, want 4", len(ps))
	}
	got := make([]r3.Vec, len(ps))
	for i, p := range ps {
		if !near(p.Gap, -0.001, 1e-12) || p.Normal != ez {
			t.Errorf("point %d: gap %v normal %v, want −0.001 and +z", i, p.Gap, p.Normal)
		}
		got[i] = r3.Vec{X: p.Pos.X, Y: p.Pos.Y}
		if !near(p.Pos.Z, 0.5-0.0005, 1e-12) {
			t.Errorf("point %d: z = %v, want midway 0.4995", i, p.Pos.Z)
		}
	}
	sort.Slice(got, func(i, j int) bool { return got[i].X < got[j].X || got[i].X == got[j].X && got[i].Y < got[j].Y })
	for i := range want {
		if !vecNear(got[i], want[i], 1e-12) {
			t.Errorf("corner %d = %v, want %v", i, got[i], want[i])
		}
	}
	// Distinct features: each point names its own vertex.
	seen := map[uint32]bool{}
	for _, p := range ps {
		if seen[p.Feature] {
			t.Errorf("feature %#x repeated", p.Feature)
		}
		seen[p.Feature] = true
	}
}

// randomPose returns a pose with a uniformly random rotation and a
// position in the cube [−s, s]³.
func randomPose(rng *rand.Rand, s float64) Pose {
	q := Quat{W: rng.NormFloat64(), X: rng.NormFloat64(), Y: rng.NormFloat64(), Z: rng.NormFloat64()}.Normalize()
	return Pose{Pos: r3.Vec{X: s * (2*rng.Float64() - 1), Y: s * (2*rng.Float64() - 1), Z: s * (2*rng.Float64() - 1)}, Rot: q}
}

var testShapes = []*Shape{
	plane(), sphere(0.3), capsule(0.2, 0.4), box(0.3, 0.2, 0.4), cylinder(0.25, 0.35),
}

// TestSymmetryInvarianceDeterminism checks, for every pair of kinds over
// random poses: swapping A and B flips the normal and keeps the gaps
// (definition of the signed distance); moving both shapes by one rigid
// motion moves the points with it and keeps the gaps (distances are
// invariant under rigid motions); and repeated calls agree bit for bit.
func TestSymmetryInvarianceDeterminism(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, a := range testShapes {
		for _, b := range testShapes {
			if a.Kind == Plane && b.Kind == Plane {
				continue
			}
			hits := 0
			for trial := 0; trial < 300; trial++ {
				pa, pb := randomPose(rng, 0.4), randomPose(rng, 0.4)
				ab := Collide(a, pa, b, pb, 0.05, nil)
				again := Collide(a, pa, b, pb, 0.05, nil)
				if len(ab) != len(again) {
					t.Fatalf("%v-%v: not deterministic", a.Kind, b.Kind)
				}
				for i := range ab {
					if ab[i] != again[i] {
						t.Fatalf("%v-%v: not deterministic: %+v vs %+v", a.Kind, b.Kind, ab[i], again[i])
					}
				}
				ba := Collide(b, pb, a, pa, 0.05, nil)
				if (len(ab) == 0) != (len(ba) == 0) {
					t.Fatalf("%v-%v: %d points one way, %d the other", a.Kind, b.Kind, len(ab), len(ba))
				}
				if len(ab) == 0 {
					continue
				}
				hits++
				p, q := minGap(ab), minGap(ba)
				if !near(p.Gap, q.Gap, 1e-9) && !(sameKindTie(a, b) && math.Abs(p.Gap-q.Gap) <= boxTieRel*math.Max(math.Abs(p.Gap), math.Abs(q.Gap))+boxTieAbs) {
					t.Errorf("%v-%v: gap %v swapped %v", a.Kind, b.Kind, p.Gap, q.Gap)
				}
				if p.Gap < -1e-6 && !vecNear(p.Normal, r3.Scale(-1, q.Normal), 1e-6) && !sameKindTie(a, b) {
					t.Errorf("%v-%v: normal %v swapped %v", a.Kind, b.Kind, p.Normal, q.Normal)
				}
				// A rigid motion of the whole scene.
				m := randomPose(rng, 3)
				moved := Collide(a, m.Mul(pa), b, m.Mul(pb), 0.05, nil)
				if len(moved) != len(ab) {
					t.Errorf("%v-%v: %d points after a rigid motion, %d before", a.Kind, b.Kind, len(moved), len(ab))
					continue
				}
				mp := minGap(moved)
				if !near(mp.Gap, p.Gap, 1e-7) {
					t.Errorf("%v-%v: gap %v after a rigid motion, %v before", a.Kind, b.Kind, mp.Gap, p.Gap)
				}
				if !vecNear(mp.Normal, m.Rot.Rotate(p.Normal), 1e-6) {
					t.Errorf("%v-%v: normal %v after a rigid motion, want %v", a.Kind, b.Kind, mp.Normal, m.Rot.Rotate(p.Normal))
				}
				checkPoints(t, a, pa, b, pb, ab)
			}
			if hits < 20 {
				t.Errorf("%v-%v: only %d of 300 random poses touched; the test is too weak", a.Kind, b.Kind, hits)
			}
		}
	}
}

// sameKindTie: for two boxes the deepest points may come from different
// but equally deep features when swapped, and since A's face stays the
// reference unless B's is better by the tie margin (boxTieRel, boxTieAbs),
// the deepest gaps may differ by up to that margin.
func sameKindTie(a, b *Shape) bool { return a.Kind == b.Kind && a.Kind == Box }

// TestGapGradientIsNormal checks, by central differences (gonum diff/fd),
// that the gradient of a point's gap with respect to B's position is the
// contact normal, a defining property of the signed distance (within a
// contact mode, i.e. with the feature held).
func TestGapGradientIsNormal(t *testing.T) {
	tests := []struct {
		name string
		a    *Shape
		pa   Pose
		b    *Shape
		pb   Pose
	}{
		{"plane-box", plane(), atRot(0, 0, 0, ey, 0.2), box(0.3, 0.2, 0.1), atRot(0, 0, 0.12, ex, 0.4)},
		{"plane-cylinder", plane(), IdentityPose, cylinder(0.2, 0.5), atRot(0, 0, 0.55, ey, 0.3)},
		{"sphere-capsule", sphere(0.3), at(0.2, 0.1, 0.1), capsule(0.1, 0.5), atRot(0.4, 0, 0, ey, 0.3)},
		{"capsule-capsule", capsule(0.1, 1), atRot(0, 0, 0, ex, 1), capsule(0.2, 1), atRot(0.1, 0.2, 0.3, ey, 1.2)},
		{"sphere-box", sphere(0.2), at(0.35, 0.3, 0.3), box(0.3, 0.2, 0.25), atRot(0, 0, 0, ez, 0.2)},
		{"capsule-box edge", capsule(0.1, 0.2), atRot(0.55, 0.1, 0.4, ey, 1.2), box(0.5, 0.5, 0.25), atRot(0, 0, 0, ex, 0.1)},
		{"capsule-box deep", capsule(0.1, 0.2), atRot(0.1, 0, 0.3, ey, 0.3), box(0.5, 0.5, 0.25), IdentityPose},
		{"box-box edge", box(1, 1, 1), atRot(0, 0, 0, ey, math.Pi/4), box(1, 1, 1), atRot(0.1, 0.2, 2*math.Sqrt2-0.05, ex, math.Pi/4)},
		{"box-box face", box(1, 1, 0.5), atRot(0, 0, 0, ex, 0.05), box(0.3, 0.3, 0.2), atRot(0.1, 0, 0.69, ez, 0.7)},
		{"box-cylinder", box(0.3, 0.3, 0.3), IdentityPose, cylinder(0.2, 0.3), atRot(0.2, 0.1, 0.7, ex, 0.8)},
		{"cylinder-cylinder", cylinder(0.2, 0.3), atRot(0, 0, 0, ey, 0.4), cylinder(0.2, 0.3), atRot(0.1, 0.1, 0.6, ex, 0.8)},
		{"sphere-cylinder", sphere(0.2), at(0.3, 0.2, 0.45), cylinder(0.2, 0.3), IdentityPose},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ps := Collide(tc.a, tc.pa, tc.b, tc.pb, 0.1, nil)
			if len(ps) == 0 {
				t.Fatal("no contact")
			}
			// The property holds for a closest pair, i.e. the deepest point;
			// clipped points of a manifold slide along their edges.
			for k, p := range []Point{minGap(ps)} {
				gap := func(x []float64) float64 {
					pb := tc.pb
					pb.Pos = r3.Add(pb.Pos, r3.Vec{X: x[0], Y: x[1], Z: x[2]})
					for _, q := range Collide(tc.a, tc.pa, tc.b, pb, 0.1, nil) {
						if q.Feature == p.Feature {
							return q.Gap
						}
					}
					t.Fatalf("point %d: feature %#x vanished under a small move", k, p.Feature)
					return 0
				}
				g := fd.Gradient(nil, gap, make([]float64, 3), &fd.Settings{Formula: fd.Central, Step: 1e-6})
				if !vecNear(r3.Vec{X: g[0], Y: g[1], Z: g[2]}, p.Normal, 1e-6) {
					t.Errorf("point %d: ∇gap = %v, normal %v", k, g, p.Normal)
				}
			}
		})
	}
}

// TestCollideAllocs checks that no pair allocates once dst has room.
func TestCollideAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	dst := make([]Point, 0, 64)
	for _, a := range testShapes {
		for _, b := range testShapes {
			pa, pb := randomPose(rng, 0.2), randomPose(rng, 0.2)
			allocs := testing.AllocsPerRun(20, func() {
				dst = Collide(a, pa, b, pb, 0.05, dst[:0])
			})
			if allocs != 0 {
				t.Errorf("%v-%v: %v allocations per call", a.Kind, b.Kind, allocs)
			}
		}
	}
}

func benchCollide(b *testing.B, sa *Shape, pa Pose, sb *Shape, pb Pose) {
	dst := make([]Point, 0, 16)
	b.ReportAllocs()
	for b.Loop() {
		dst = Collide(sa, pa, sb, pb, 0.01, dst[:0])
	}
	if len(dst) == 0 {
		b.Fatal("no contact")
	}
}

func BenchmarkBoxPlane(b *testing.B) {
	benchCollide(b, plane(), IdentityPose, box(0.3, 0.2, 0.1), atRot(0, 0, 0.099, ez, 0.3))
}

func BenchmarkBoxBox(b *testing.B) {
	benchCollide(b, box(1, 1, 0.5), IdentityPose, box(0.3, 0.3, 0.2), atRot(0.1, 0, 0.699, ez, 0.7))
}

func BenchmarkSpherePlane(b *testing.B) {
	benchCollide(b, plane(), IdentityPose, sphere(0.3), at(0, 0, 0.299))
}

func BenchmarkCapsuleBox(b *testing.B) {
	benchCollide(b, capsule(0.1, 0.2), atRot(0.1, 0, 0.34, ey, 1.5), box(0.5, 0.5, 0.25), IdentityPose)
}

// TestCollideDegenerateInput feeds degenerate shapes and poses (zero
// sizes, NaN and infinite positions, unnormalised and zero rotations,
// coincident centres) to every pair: Collide must return without
// panicking, and for unit rotations every point must have a unit normal.
func TestCollideDegenerateInput(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	shapes := append([]*Shape{sphere(0), capsule(0, 0), box(0, 0, 0), cylinder(0, 0), box(0.1, 0, 0.1), cylinder(0.1, 0)}, testShapes...)
	poses := []Pose{
		IdentityPose, at(0, 0, 0), at(nan, 0, 0), at(inf, 0, 0), at(0, -inf, 0),
		{Rot: Quat{}}, {Rot: Quat{W: 2, X: 1}}, {Pos: r3.Vec{Z: 1e-300}, Rot: IdentityQuat},
	}
	for _, a := range shapes {
		for _, b := range shapes {
			for _, pa := range poses {
				for _, pb := range poses {
					unit := math.Abs(pa.Rot.Norm()-1) < 1e-12 && math.Abs(pb.Rot.Norm()-1) < 1e-12
					for _, p := range Collide(a, pa, b, pb, 0.1, nil) {
						if n := r3.Norm(p.Normal); unit && !(math.Abs(n-1) < 1e-9) {
							t.Errorf("%v-%v at %v, %v: normal %v with gap %v", a.Kind, b.Kind, pa, pb, p.Normal, p.Gap)
						}
					}
				}
			}
		}
	}
}

// TestGapRotationDerivative checks the deepest point's position as well
// as its normal: turning B by a small angle about a world axis ω through
// its centre moves B's surface point x_B with velocity ω × (x_B − c_B),
// so the gap changes at the rate n·(ω × (x_B − c_B)) (rigid-body
// kinematics; central differences by gonum diff/fd).
func TestGapRotationDerivative(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	for _, a := range testShapes {
		for _, b := range testShapes[1:] {
			checked := 0
			for trial := 0; trial < 400 && checked < 10; trial++ {
				pa, pb := randomPose(rng, 0.4), randomPose(rng, 0.4)
				ps := Collide(a, pa, b, pb, 0.05, nil)
				if len(ps) != 1 || ps[0].Gap < 0 {
					continue // one separated closest pair
				}
				p := ps[0]
				xb := r3.Add(p.Pos, r3.Scale(p.Gap/2, p.Normal))
				ok := true
				gap := func(x []float64) float64 {
					q := pb
					q.Rot = QuatExp(r3.Vec{X: x[0], Y: x[1], Z: x[2]}).Mul(pb.Rot)
					for _, r := range Collide(a, pa, b, q, 0.05, nil) {
						if r.Feature == p.Feature {
							return r.Gap
						}
					}
					ok = false
					return 0
				}
				g := fd.Gradient(nil, gap, make([]float64, 3), &fd.Settings{Formula: fd.Central, Step: 1e-6})
				if !ok {
					continue // a mode boundary within the step
				}
				checked++
				// n·(ω × r) = ω·(r × n)
				want := r3.Cross(r3.Sub(xb, pb.Pos), p.Normal)
				if !vecNear(r3.Vec{X: g[0], Y: g[1], Z: g[2]}, want, 1e-5) {
					t.Errorf("%v-%v: ∂gap/∂ω = %v, want %v", a.Kind, b.Kind, g, want)
				}
			}
			if checked < 3 {
				t.Errorf("%v-%v: only %d cases checked", a.Kind, b.Kind, checked)
			}
		}
	}
}

func ExampleCollide() {
	ground := &Shape{Kind: Plane, Local: IdentityPose}
	crate := &Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.2, Y: 0.1, Z: 0.05}, Local: IdentityPose}
	// The crate rests 1 mm deep in the ground.
	pts := Collide(ground, IdentityPose, crate, Pose{Pos: r3.Vec{Z: 0.049}, Rot: IdentityQuat}, 0.01, nil)
	for _, p := range pts {
		fmt.Printf("at (%+.2f, %+.2f) gap %.4f normal %v\n", p.Pos.X, p.Pos.Y, p.Gap, p.Normal)
	}
	// Output:
	// at (-0.20, -0.10) gap -0.0010 normal {0 0 1}
	// at (+0.20, -0.10) gap -0.0010 normal {0 0 1}
	// at (-0.20, +0.10) gap -0.0010 normal {0 0 1}
	// at (+0.20, +0.10) gap -0.0010 normal {0 0 1}
}

// perturbations are the twelve ±1e-6 moves of a pose used by
// TestBoxBoxManifoldStable: a turn of ±1e-6 rad about each world axis
// through the shape's centre, and a shift of ±1e-6 m along each axis.
func perturbations(p Pose) []Pose {
	const d = 1e-6
	var out []Pose
	for _, ax := range []r3.Vec{ex, ey, ez} {
		for _, s := range []float64{-d, d} {
			q := p
			q.Rot = QuatFromAxisAngle(ax, s).Mul(p.Rot)
			out = append(out, q)
			q = p
			q.Pos = r3.Add(p.Pos, r3.Scale(s, ax))
			out = append(out, q)
		}
	}
	return out
}

// TestBoxBoxManifoldStable checks that box–box contacts lying flat face to
// face keep their contact mode under tiny pose perturbations: each of the
// twelve ±1e-6 moves of either box gives the same number of points with
// the same Feature codes, and every point's gap and normal move by
// O(1e-6). Within one mode the points are smooth functions of the poses
// (package doc), so a change bounded by a few times the move (lever arms
// below 0.5 m) is the Lipschitz bound of that smooth map; a mode flip
// shows as a changed Feature set or a jump far above it.
func TestBoxBoxManifoldStable(t *testing.T) {
	carton := box(0.1, 0.075, 0.05) // 0.2 × 0.15 × 0.1
	bar := box(0.175, 0.02, 0.02)   // 0.35 × 0.04 × 0.04
	yawed := func(x, y, z, yaw float64) Pose { return atRot(x, y, z, ez, yaw) }
	tests := []struct {
		name string
		a    *Shape
		pa   Pose
		b    *Shape
		pb   Pose
		n    int // expected point count
	}{
		// (a) Equal boxes side by side on a table (bottoms at z = 0, so
		// the tops and bottoms are coplanar), 0.5 mm deep.
		{"equal aligned", carton, yawed(0, 0, 0.05, 0), carton, yawed(0.1995*2/2*1, 0.03, 0.05, 0), 4},
		{"equal aligned no offset", carton, yawed(0, 0, 0.05, 0), carton, yawed(0.1995, 0, 0.05, 0), 4},
		{"equal same yaw", carton, yawed(0, 0, 0.05, 0.01), carton, yawed(0.1995*math.Cos(0.01), 0.1995*math.Sin(0.01), 0.05, 0.01), 4},
		{"equal same yaw -", carton, yawed(0, 0, 0.05, -0.02), carton, yawed(0.1995*math.Cos(-0.02)+0.0001, 0.1995*math.Sin(-0.02), 0.05, -0.02), 4},
		{"equal small yaws", carton, yawed(0, 0, 0.05, 0.003), carton, yawed(0.199, 0.02, 0.05, -0.004), 4},
		// (b) A thin bar, level on the table, pressing the side of a
		// carton: its long side, then its end.
		{"bar side", carton, yawed(0, 0, 0.05, 0), bar, yawed(0.1+0.02-0.0004, 0.05, 0.02, math.Pi/2), 4},
		{"bar side yawed", carton, yawed(0, 0, 0.05, 0.002), bar, yawed(0.1+0.02-0.0004, 0.05, 0.02, math.Pi/2), 4},
		{"bar end", carton, yawed(0, 0, 0.05, 0), bar, yawed(0.1+0.175-0.0004, 0.01, 0.02, 0), 4},
		{"bar end swapped", bar, yawed(0.1+0.175-0.0004, 0.01, 0.02, 0), carton, yawed(0, 0, 0.05, 0), 4},
		// The bar's end turned by −0.001 rad, 0.3 mm deep: its four
		// corners press the carton's side, and the edge–edge axis of the
		// bar's vertical edge and the carton's horizontal one is the
		// carton's face normal, winning the tie by rounding alone.
		{"bar end yawed", carton, yawed(0, 0, 0.05, 0), bar, yawed(0.1+0.175*math.Cos(0.001)+0.02*math.Sin(0.001)-0.0003, -0.033, 0.02, -0.001), 4},
		{"bar end yawed swapped", bar, yawed(0.1+0.175*math.Cos(0.001)+0.02*math.Sin(0.001)-0.0003, -0.033, 0.02, -0.001), carton, yawed(0, 0, 0.05, 0), 4},
	}
	features := func(ps []Point) []uint32 {
		f := make([]uint32, len(ps))
		for i, p := range ps {
			f[i] = p.Feature
		}
		sort.Slice(f, func(i, j int) bool { return f[i] < f[j] })
		return f
	}
	const margin = 0.005
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ps := Collide(tc.a, tc.pa, tc.b, tc.pb, margin, nil)
			if len(ps) != tc.n {
				t.Fatalf("got %d points %+v, want %d", len(ps), ps, tc.n)
			}
			checkPoints(t, tc.a, tc.pa, tc.b, tc.pb, ps)
			want := features(ps)
			byFeat := map[uint32]Point{}
			for _, p := range ps {
				if _, dup := byFeat[p.Feature]; dup {
					t.Fatalf("feature %#x repeated", p.Feature)
				}
				byFeat[p.Feature] = p
			}
			for side := 0; side < 2; side++ {
				base := tc.pa
				if side == 1 {
					base = tc.pb
				}
				for k, q := range perturbations(base) {
					pa, pb := tc.pa, tc.pb
					if side == 0 {
						pa = q
					} else {
						pb = q
					}
					qs := Collide(tc.a, pa, tc.b, pb, margin, nil)
					got := features(qs)
					if fmt.Sprint(got) != fmt.Sprint(want) {
						t.Errorf("move %d of shape %d: features %#x, want %#x", k, side, got, want)
						continue
					}
					for _, r := range qs {
						p := byFeat[r.Feature]
						if d := math.Abs(r.Gap - p.Gap); d > 2e-6 {
							t.Errorf("move %d of shape %d: feature %#x gap moved %g", k, side, r.Feature, d)
						}
						if d := r3.Norm(r3.Sub(r.Normal, p.Normal)); d > 2e-6 {
							t.Errorf("move %d of shape %d: feature %#x normal moved %g", k, side, r.Feature, d)
						}
						if d := r3.Norm(r3.Sub(r.Pos, p.Pos)); d > 2e-6 {
							t.Errorf("move %d of shape %d: feature %#x position moved %g", k, side, r.Feature, d)
						}
					}
				}
			}
		})
	}
}

// TestFlatManifoldFeatures decodes the Feature codes of flat-on-flat
// manifolds (flatManifold's layout): each half carries the tag and the id
// of its own flat feature (box face 2·axis + 1 for the positive side,
// cylinder cap 8 below and 9 above, side 10), the reference half carries
// flatRef and nothing else, and the points of one manifold have distinct
// codes. The ids expected are read off the geometry of each scene.
func TestFlatManifoldFeatures(t *testing.T) {
	tests := []struct {
		name      string
		a         *Shape
		pa        Pose
		b         *Shape
		pb        Pose
		idA, idB  uint32
		refIsA    bool
		minPoints int
	}{
		// A cylinder standing 1 mm deep on a box: box top (+z, id 5)
		// against the cylinder's lower cap (id 8); the box face is the
		// reference, and the eight rim points lie inside it.
		{"cylinder standing on box", box(0.3, 0.3, 0.1), IdentityPose, cylinder(0.1, 0.2), at(0.05, 0, 0.1+0.2-0.001), 5, 8, true, cylinderRingN},
		// Lying on it: the side line (id 10) clipped to the face.
		{"cylinder lying on box", box(0.3, 0.3, 0.1), IdentityPose, cylinder(0.1, 0.2), atRot(0, 0.05, 0.1+0.1-0.001, ex, math.Pi/2), 5, 10, true, 2},
		// The same pair passed the other way round: halves swap.
		{"box under cylinder, swapped", cylinder(0.1, 0.2), at(0.05, 0, 0.1+0.2-0.001), box(0.3, 0.3, 0.1), IdentityPose, 8, 5, false, cylinderRingN},
		// Two cylinders stacked, offset: upper cap (9) of A, lower (8) of B.
		{"cylinders stacked", cylinder(0.1, 0.2), IdentityPose, cylinder(0.1, 0.2), at(0.05, 0.02, 0.4-0.001), 9, 8, true, 3},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ps := Collide(tc.a, tc.pa, tc.b, tc.pb, 0.005, nil)
			if len(ps) < tc.minPoints {
				t.Fatalf("got %d points, want at least %d", len(ps), tc.minPoints)
			}
			seen := map[uint32]bool{}
			for _, p := range ps {
				if seen[p.Feature] {
					t.Errorf("feature %#x repeated", p.Feature)
				}
				seen[p.Feature] = true
				fA, fB := p.Feature>>16, p.Feature&0xffff
				for _, h := range []struct {
					f, id uint32
					ref   bool
				}{{fA, tc.idA, tc.refIsA}, {fB, tc.idB, !tc.refIsA}} {
					if h.f&flatTag == 0 || h.f&0x4000 != 0 {
						t.Errorf("feature %#x: half %#x lacks the flat tag", p.Feature, h.f)
					}
					if got := h.f >> flatIDShift & 15; got != h.id {
						t.Errorf("feature %#x: half %#x has id %d, want %d", p.Feature, h.f, got, h.id)
					}
					if (h.f&flatRef != 0) != h.ref {
						t.Errorf("feature %#x: half %#x: reference bit %v, want %v", p.Feature, h.f, h.f&flatRef != 0, h.ref)
					}
					if h.ref && h.f&0xff != 0 {
						t.Errorf("feature %#x: reference half %#x carries a clipped vertex", p.Feature, h.f)
					}
				}
			}
		})
	}
}
