package contact

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/spatial/r3"
)

// fivePoint is the fourth-order central difference
// f'(x) ≈ (f(x−2h) − 8f(x−h) + 8f(x+h) − f(x+2h)) / 12h (textbook
// finite-difference stencil), run through gonum's diff/fd.
var fivePoint = fd.Formula{
	Stencil: []fd.Point{
		{Loc: -2, Coeff: 1.0 / 12}, {Loc: -1, Coeff: -8.0 / 12},
		{Loc: 1, Coeff: 8.0 / 12}, {Loc: 2, Coeff: -1.0 / 12},
	},
	Derivative: 1,
	Step:       1e-4,
}

func randUnit(rng *rand.Rand) r3.Vec {
	for {
		v := r3.Vec{X: rng.NormFloat64(), Y: rng.NormFloat64(), Z: rng.NormFloat64()}
		if n := r3.Norm(v); n > 1e-3 {
			return r3.Scale(1/n, v)
		}
	}
}

func randRot(rng *rand.Rand) Quat {
	return QuatFromAxisAngle(randUnit(rng), math.Pi*rng.Float64())
}

func randTwist(rng *rand.Rand) Twist {
	return Twist{
		V: r3.Vec{X: rng.NormFloat64(), Y: rng.NormFloat64(), Z: rng.NormFloat64()},
		W: r3.Vec{X: rng.NormFloat64(), Y: rng.NormFloat64(), Z: rng.NormFloat64()},
	}
}

// movePose is the pose reached along twist t after time e:
// (Pos + eV, exp(eW) R).
func movePose(p Pose, t Twist, e float64) Pose {
	return Pose{Pos: r3.Add(p.Pos, r3.Scale(e, t.V)), Rot: QuatExp(r3.Scale(e, t.W)).Mul(p.Rot)}
}

// tangentMinGap is the smallest gap of any point of the pair (or +Inf).
func tangentMinGap(a *Shape, pa Pose, b *Shape, pb Pose, buf []Point) float64 {
	g := math.Inf(1)
	for _, p := range Collide(a, pa, b, pb, 10, buf[:0]) {
		g = math.Min(g, p.Gap)
	}
	return g
}

// nearContact places b so that the pair's smallest gap is target: b
// moves from a's origin along a random direction (the plane normal when a
// is a plane) and the distance is found by bisection.
func nearContact(rng *rand.Rand, a, b *Shape, target float64) (Pose, Pose) {
	buf := make([]Point, 0, 16)
	for {
		pa := Pose{Rot: randRot(rng)}
		pb := Pose{Rot: randRot(rng)}
		var u, base r3.Vec
		if a.Kind == Plane {
			pa.Rot = QuatFromAxisAngle(randUnit(rng), 0.4*rng.Float64())
			u = pa.Rot.Rotate(r3.Vec{Z: 1})
			base = pa.Rot.Rotate(r3.Vec{X: rng.NormFloat64(), Y: rng.NormFloat64()})
		} else {
			u = randUnit(rng)
		}
		lo, hi := -2.0, 3.0
		if a.Kind != Plane {
			lo = 0
		}
		at := func(t float64) Pose { return Pose{Pos: r3.Add(base, r3.Scale(t, u)), Rot: pb.Rot} }
		if !(tangentMinGap(a, pa, b, at(lo), buf) < target) || !(tangentMinGap(a, pa, b, at(hi), buf) > target) {
			continue
		}
		for i := 0; i < 60; i++ {
			m := (lo + hi) / 2
			if tangentMinGap(a, pa, b, at(m), buf) < target {
				lo = m
			} else {
				hi = m
			}
		}
		return pa, at(lo)
	}
}

// fdPoint returns the central finite-difference derivative of point pt
// along twists ta, tb, following pt.Feature; ok is false when the
// feature does not persist over the stencil.
//
// With polish set, each perturbed point's position is first replaced by
// the closest-point solution that PointTangent differentiates (Newton's
// method from Collide's witnesses): the convex-distance route leaves its
// positions accurate only to about 1e-9 m where a witness is not a unique
// support (a line on a cylinder's side), and its normals at a rim only to
// the tolerance of its Newton polish, which the difference quotient would
// amplify past the tolerance.
func fdPoint(a *Shape, pa Pose, b *Shape, pb Pose, pt Point, ta, tb Twist, margin float64, polish bool) (dPos, dNormal r3.Vec, dGap float64, ok bool) {
	return fdPointWith(fivePoint, a, pa, b, pb, pt, ta, tb, margin, polish)
}

// fdPointWith is fdPoint with the finite-difference formula given.
func fdPointWith(formula fd.Formula, a *Shape, pa Pose, b *Shape, pb Pose, pt Point, ta, tb Twist, margin float64, polish bool) (dPos, dNormal r3.Vec, dGap float64, ok bool) {
	buf := make([]Point, 0, 16)
	ok = true
	at := func(e float64) Point {
		pts := Collide(a, movePose(pa, ta, e), b, movePose(pb, tb, e), margin, buf[:0])
		best, bd := Point{}, math.Inf(1)
		for _, q := range pts {
			if q.Feature != pt.Feature {
				continue
			}
			if d := r3.Norm(r3.Sub(q.Pos, pt.Pos)); d < bd {
				best, bd = q, d
			}
		}
		if math.IsInf(bd, 1) || bd > 0.01 {
			ok = false
		}
		if polish && ok {
			qa, qb, sa, sb, q := movePose(pa, ta, e), movePose(pb, tb, e), a, b, best
			if sa.Kind > sb.Kind {
				qa, qb, sa, sb = qb, qa, sb, sa
				q.Normal = r3.Scale(-1, q.Normal)
				q.Feature = swapFeature(q.Feature)
			}
			fa, fb := makeFrame(qa, Twist{}), makeFrame(qb, Twist{})
			p, n, _, _ := tangentOrdered(sa, &fa, sb, &fb, q)
			best.Pos = p.v
			best.Normal = n.v
			if a.Kind > b.Kind {
				best.Normal = r3.Scale(-1, n.v)
			}
		}
		return best
	}
	s := &fd.Settings{Formula: formula}
	comp := func(f func(Point) float64) float64 {
		return fd.Derivative(func(e float64) float64 { return f(at(e)) }, 0, s)
	}
	dPos = r3.Vec{X: comp(func(p Point) float64 { return p.Pos.X }), Y: comp(func(p Point) float64 { return p.Pos.Y }), Z: comp(func(p Point) float64 { return p.Pos.Z })}
	dNormal = r3.Vec{X: comp(func(p Point) float64 { return p.Normal.X }), Y: comp(func(p Point) float64 { return p.Normal.Y }), Z: comp(func(p Point) float64 { return p.Normal.Z })}
	dGap = comp(func(p Point) float64 { return p.Gap })
	return dPos, dNormal, dGap, ok
}

// convexRoute reports whether Collide sends the pair to GJK/EPA.
func convexRoute(a, b *Shape) bool {
	return a.Kind != Plane && b.Kind != Plane && (a.Kind == Cylinder || b.Kind == Cylinder) && a.Kind != Sphere && b.Kind != Sphere
}

// relErr is ‖x − ref‖ / max(‖ref‖, floor): relative, with an absolute
// floor for derivatives that vanish.
func relErr(x, ref r3.Vec, floor float64) float64 {
	return r3.Norm(r3.Sub(x, ref)) / math.Max(r3.Norm(ref), floor)
}

var tangentCases = []struct {
	name string
	a, b Shape
}{
	{"plane-sphere", Shape{Kind: Plane}, Shape{Kind: Sphere, Radius: 0.3}},
	{"plane-capsule", Shape{Kind: Plane}, Shape{Kind: Capsule, Radius: 0.1, HalfLength: 0.3}},
	{"plane-box", Shape{Kind: Plane}, Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}}},
	{"plane-cylinder", Shape{Kind: Plane}, Shape{Kind: Cylinder, Radius: 0.2, HalfLength: 0.3}},
	{"sphere-sphere", Shape{Kind: Sphere, Radius: 0.2}, Shape{Kind: Sphere, Radius: 0.3}},
	{"sphere-capsule", Shape{Kind: Sphere, Radius: 0.2}, Shape{Kind: Capsule, Radius: 0.1, HalfLength: 0.3}},
	{"sphere-box", Shape{Kind: Sphere, Radius: 0.2}, Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}}},
	{"sphere-cylinder", Shape{Kind: Sphere, Radius: 0.2}, Shape{Kind: Cylinder, Radius: 0.2, HalfLength: 0.3}},
	{"capsule-capsule", Shape{Kind: Capsule, Radius: 0.1, HalfLength: 0.25}, Shape{Kind: Capsule, Radius: 0.15, HalfLength: 0.3}},
	{"capsule-box", Shape{Kind: Capsule, Radius: 0.1, HalfLength: 0.25}, Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.3, Y: 0.2, Z: 0.15}}},
	{"box-box", Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}}, Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.25, Y: 0.15, Z: 0.2}}},
	{"capsule-cylinder", Shape{Kind: Capsule, Radius: 0.1, HalfLength: 0.25}, Shape{Kind: Cylinder, Radius: 0.2, HalfLength: 0.3}},
	{"box-cylinder", Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}}, Shape{Kind: Cylinder, Radius: 0.2, HalfLength: 0.3}},
	{"cylinder-cylinder", Shape{Kind: Cylinder, Radius: 0.15, HalfLength: 0.25}, Shape{Kind: Cylinder, Radius: 0.2, HalfLength: 0.3}},
}

// TestPointTangentFiniteDifferences checks PointTangent against central
// finite differences of Collide (gonum diff/fd with the five-point
// stencil) under poses moved along random twists, for every pair kind at
// random poses near contact (gaps within ±2 cm), for both orders of the
// pair. Reference: the definition of the derivative, evaluated by
// gonum's diff/fd (REFERENCE-CHECKS: every derivative against central
// finite differences).
func TestPointTangentFiniteDifferences(t *testing.T) {
	const (
		margin = 0.05
		tol    = 1e-6
		floor  = 1e-3 // derivatives below this are compared absolutely
	)
	for ci, tc := range tangentCases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(ci)+1, 7))
			var checked, skipped, approx int
			worst, rawWorst := 0.0, 0.0
			for trial := 0; trial < 60; trial++ {
				a, b := tc.a, tc.b
				pa, pb := nearContact(rng, &a, &b, 0.02*(2*rng.Float64()-1))
				for swap := 0; swap < 2; swap++ {
					sa, sb, qa, qb := &a, &b, pa, pb
					if swap == 1 {
						sa, sb, qa, qb = &b, &a, pb, pa
					}
					for _, pt := range Collide(sa, qa, sb, qb, margin, nil) {
						if !tangentExact(sa, qa, sb, qb, pt) {
							approx++
							continue
						}
						ta, tb := randTwist(rng), randTwist(rng)
						polish := convexRoute(sa, sb)
						fp, fn, fg, ok := fdPoint(sa, qa, sb, qb, pt, ta, tb, margin, polish)
						if !ok {
							skipped++
							continue
						}
						dp, dn, dg := PointTangent(sa, qa, sb, qb, pt, ta, tb)
						if polish {
							// Measured only: Collide's own positions on this
							// route, differenced directly.
							rp, rn, _, _ := fdPoint(sa, qa, sb, qb, pt, ta, tb, margin, false)
							rawWorst = math.Max(rawWorst, math.Max(relErr(dp, rp, floor), relErr(dn, rn, floor)))
						}
						ep := relErr(dp, fp, floor)
						en := relErr(dn, fn, floor)
						eg := math.Abs(dg-fg) / math.Max(math.Abs(fg), floor)
						e := math.Max(ep, math.Max(en, eg))
						worst = math.Max(worst, e)
						checked++
						if e > tol {
							t.Errorf("feature %#x (swap %d): rel err pos %.2g normal %.2g gap %.2g\n  dPos %v fd %v\n  dNormal %v fd %v\n  dGap %v fd %v",
								pt.Feature, swap, ep, en, eg, dp, fp, dn, fn, dg, fg)
						}
						if math.Abs(r3.Dot(dn, pt.Normal)) > 1e-9*math.Max(1, r3.Norm(dn)) {
							t.Errorf("feature %#x: dNormal·Normal = %g, want 0", pt.Feature, r3.Dot(dn, pt.Normal))
						}
					}
				}
			}
			t.Logf("%s: %d points checked, worst rel err %.2g; %d skipped (mode changes within the stencil), %d approximate", tc.name, checked, worst, skipped, approx)
			if rawWorst > 0 {
				t.Logf("%s: positions and normals against Collide's unpolished ones: worst rel err %.2g", tc.name, rawWorst)
			}
			if checked < 20 {
				t.Errorf("only %d points checked", checked)
			}
		})
	}
}

// TestPointTangentLinearAndSwap checks that the tangent is linear in the
// twists and that swapping A and B keeps dPos and dGap and flips dNormal
// (the package convention: swapping flips Normal, keeps Gap and Pos).
func TestPointTangentLinearAndSwap(t *testing.T) {
	for ci, tc := range tangentCases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(ci)+100, 3))
			n := 0
			for trial := 0; trial < 20; trial++ {
				a, b := tc.a, tc.b
				pa, pb := nearContact(rng, &a, &b, 0.02*(2*rng.Float64()-1))
				pts := Collide(&a, pa, &b, pb, 0.05, nil)
				swapped := Collide(&b, pb, &a, pa, 0.05, nil)
				for _, pt := range pts {
					t1a, t1b, t2a, t2b := randTwist(rng), randTwist(rng), randTwist(rng), randTwist(rng)
					al, be := rng.NormFloat64(), rng.NormFloat64()
					comb := func(x, y Twist) Twist {
						return Twist{V: r3.Add(r3.Scale(al, x.V), r3.Scale(be, y.V)), W: r3.Add(r3.Scale(al, x.W), r3.Scale(be, y.W))}
					}
					p1, n1, g1 := PointTangent(&a, pa, &b, pb, pt, t1a, t1b)
					p2, n2, g2 := PointTangent(&a, pa, &b, pb, pt, t2a, t2b)
					p3, n3, g3 := PointTangent(&a, pa, &b, pb, pt, comb(t1a, t2a), comb(t1b, t2b))
					wantP := r3.Add(r3.Scale(al, p1), r3.Scale(be, p2))
					wantN := r3.Add(r3.Scale(al, n1), r3.Scale(be, n2))
					wantG := al*g1 + be*g2
					scale := math.Max(1, math.Abs(al)+math.Abs(be)) * (1 + r3.Norm(p1) + r3.Norm(p2) + r3.Norm(n1) + r3.Norm(n2) + math.Abs(g1) + math.Abs(g2))
					if r3.Norm(r3.Sub(p3, wantP)) > 1e-12*scale || r3.Norm(r3.Sub(n3, wantN)) > 1e-12*scale || math.Abs(g3-wantG) > 1e-12*scale {
						t.Errorf("feature %#x: not linear in the twists", pt.Feature)
					}
					// Swap: Collide(b, a) gives the same point with the
					// normal flipped (for two shapes of one kind the
					// reference face may differ: then there is no twin).
					j := -1
					for k, q := range swapped {
						if r3.Norm(r3.Sub(q.Pos, pt.Pos)) < 1e-9 && r3.Norm(r3.Add(q.Normal, pt.Normal)) < 1e-9 {
							j = k
						}
					}
					if j < 0 {
						continue
					}
					ps, ns, gs := PointTangent(&b, pb, &a, pa, swapped[j], t1b, t1a)
					if r3.Norm(r3.Sub(ps, p1)) > 1e-9*scale || r3.Norm(r3.Add(ns, n1)) > 1e-9*scale || math.Abs(gs-g1) > 1e-9*scale {
						t.Errorf("feature %#x: swapping A and B: dPos %v vs %v, dNormal %v vs −%v, dGap %v vs %v", pt.Feature, ps, p1, ns, n1, gs, g1)
					}
					n++
				}
			}
			if n < 10 {
				t.Errorf("only %d points", n)
			}
		})
	}
}

// TestPointTangentDeterministic checks bit-identical repeats.
func TestPointTangentDeterministic(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	for _, tc := range tangentCases {
		a, b := tc.a, tc.b
		pa, pb := nearContact(rng, &a, &b, 0)
		ta, tb := randTwist(rng), randTwist(rng)
		for _, pt := range Collide(&a, pa, &b, pb, 0.05, nil) {
			p1, n1, g1 := PointTangent(&a, pa, &b, pb, pt, ta, tb)
			p2, n2, g2 := PointTangent(&a, pa, &b, pb, pt, ta, tb)
			if p1 != p2 || n1 != n2 || math.Float64bits(g1) != math.Float64bits(g2) {
				t.Errorf("%s: repeated call differs", tc.name)
			}
		}
	}
}

func TestPointTangentAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	for _, tc := range tangentCases {
		a, b := tc.a, tc.b
		pa, pb := nearContact(rng, &a, &b, 0)
		pts := Collide(&a, pa, &b, pb, 0.05, nil)
		ta, tb := randTwist(rng), randTwist(rng)
		allocs := testing.AllocsPerRun(100, func() {
			for _, pt := range pts {
				PointTangent(&a, pa, &b, pb, pt, ta, tb)
			}
		})
		if allocs != 0 {
			t.Errorf("%s: %v allocations per call, want 0", tc.name, allocs)
		}
	}
}

func BenchmarkPointTangent(b *testing.B) {
	for ci, tc := range tangentCases {
		b.Run(tc.name, func(b *testing.B) {
			rng := rand.New(rand.NewPCG(uint64(ci)+50, 1))
			sa, sb := tc.a, tc.b
			pa, pb := nearContact(rng, &sa, &sb, -0.005)
			pts := Collide(&sa, pa, &sb, pb, 0.05, nil)
			if len(pts) == 0 {
				b.Skip("no contact")
			}
			ta, tb := randTwist(rng), randTwist(rng)
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				PointTangent(&sa, pa, &sb, pb, pts[i%len(pts)], ta, tb)
			}
		})
	}
}

func ExamplePointTangent() {
	// A unit-radius sphere resting on the ground plane and rising at 2 m/s:
	// its gap grows at 2 m/s and the contact point follows at half speed
	// (it is the midpoint between the surfaces).
	ground := Shape{Kind: Plane}
	ball := Shape{Kind: Sphere, Radius: 1}
	pb := Pose{Pos: r3.Vec{Z: 1}, Rot: IdentityQuat}
	pts := Collide(&ground, IdentityPose, &ball, pb, 0.01, nil)
	dPos, dNormal, dGap := PointTangent(&ground, IdentityPose, &ball, pb, pts[0], Twist{}, Twist{V: r3.Vec{Z: 2}})
	fmt.Println(dPos, dNormal, dGap)
	// Output: {0 0 1} {0 0 0} 2
}
