package contact

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/spatial/r3"
)

// forward3 is the second-order one-sided difference
// f'(x) ≈ (−3f(x) + 4f(x+h) − f(x+2h)) / 2h (textbook finite-difference
// stencil), run through gonum's diff/fd.
var forward3 = fd.Formula{
	Stencil:    []fd.Point{{Loc: 0, Coeff: -1.5}, {Loc: 1, Coeff: 2}, {Loc: 2, Coeff: -0.5}},
	Derivative: 1,
	Step:       1e-5,
}

// planarTwist is a random motion in the xy plane with a spin about z: it
// keeps boxes standing on a floor standing on it.
func planarTwist(rng *rand.Rand) Twist {
	return Twist{V: r3.Vec{X: rng.NormFloat64(), Y: rng.NormFloat64()}, W: r3.Vec{Z: rng.NormFloat64()}}
}

// boxEdgeInPlane reports whether box–box face point pt is the crossing of
// an incident edge with a reference side plane that it lies in: for two
// boxes standing side by side with their x faces touching, a horizontal
// edge (incident edge 0 or 2) meeting a horizontal side plane (2 or 3).
func boxEdgeInPlane(pt Point) bool {
	f := pt.Feature
	return f&featBoxEdge == 0 && f>>6&3 == 1 && (f>>8&7)%2 == 0 && f>>11&7 >= 2
}

// tiltedTwin tilts the incident box of face point pt by theta about its
// face normal through the point, so that the incident edge crosses the
// side plane at the point at the angle theta, and returns the new poses
// and the point Collide gives there with the same feature.
func tiltedTwin(t *testing.T, a *Shape, pa Pose, b *Shape, pb Pose, pt Point, theta, margin float64) (Pose, Pose, Point) {
	t.Helper()
	nRef := pt.Normal
	inc := &pb
	if pt.Feature&featRefIsB != 0 {
		nRef = r3.Scale(-1, nRef)
		inc = &pa
	}
	x := r3.Add(pt.Pos, r3.Scale(pt.Gap/2, nRef))
	q := QuatFromAxisAngle(nRef, theta)
	*inc = Pose{Pos: r3.Add(x, q.Rotate(r3.Sub(inc.Pos, x))), Rot: q.Mul(inc.Rot)}
	best, bd := Point{}, math.Inf(1)
	for _, p := range Collide(a, pa, b, pb, margin, nil) {
		if d := r3.Norm(r3.Sub(p.Pos, pt.Pos)); p.Feature == pt.Feature && d < bd {
			best, bd = p, d
		}
	}
	if bd > 1e-6 {
		t.Fatalf("feature %#x: no twin within 1e-6 m after tilting by %g (nearest %g)", pt.Feature, theta, bd)
	}
	return pa, pb, best
}

// checkBoxBoxPoint compares PointTangent for one point with central
// finite differences of Collide (gonum diff/fd, five-point stencil). An
// edge lying in a side plane has no unique crossing, so its reference is
// the well-posed neighbour: the same point after tilting the incident box
// by 1e-6 rad about the point, where the crossing is unique and Collide's
// finite differences are well conditioned; the derivative there differs
// from the limit by O(1e-6). It returns the relative error.
//
// With oneSided set, a point whose mode does not hold on both sides of
// the pose is compared with a one-sided difference on the side where it
// holds.
func checkBoxBoxPoint(t *testing.T, a *Shape, pa Pose, b *Shape, pb Pose, pt Point, ta, tb Twist, margin float64, oneSided bool) (float64, bool) {
	t.Helper()
	const floor = 1e-3
	dp, dn, dg := PointTangent(a, pa, b, pb, pt, ta, tb)
	for _, x := range []float64{dp.X, dp.Y, dp.Z, dn.X, dn.Y, dn.Z, dg} {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			t.Errorf("feature %#x: PointTangent not finite: dPos %v dNormal %v dGap %v", pt.Feature, dp, dn, dg)
			return math.Inf(1), true
		}
	}
	ra, rb, rpt := pa, pb, pt
	if boxEdgeInPlane(pt) {
		ra, rb, rpt = tiltedTwin(t, a, pa, b, pb, pt, 1e-6, margin)
	}
	fp, fn, fg, ok := fdPoint(a, ra, b, rb, rpt, ta, tb, margin, false)
	if !ok && oneSided {
		// The pose is on a mode boundary (two equal boxes with parallel
		// faces: which is the reference flips with the sign of the
		// relative spin), so the derivative is one-sided: take it on the
		// side where the mode holds.
		for _, sg := range [2]float64{1, -1} {
			sa, sb := Twist{V: r3.Scale(sg, ta.V), W: r3.Scale(sg, ta.W)}, Twist{V: r3.Scale(sg, tb.V), W: r3.Scale(sg, tb.W)}
			if fp, fn, fg, ok = fdPointWith(forward3, a, ra, b, rb, rpt, sa, sb, margin, false); ok {
				fp, fn, fg = r3.Scale(sg, fp), r3.Scale(sg, fn), sg*fg
				break
			}
		}
	}
	if !ok {
		return 0, false
	}
	e := math.Max(math.Max(relErr(dp, fp, floor), relErr(dn, fn, floor)), math.Abs(dg-fg)/math.Max(math.Abs(fg), floor))
	return e, true
}

// TestPointTangentBoxBoxSideRegression is a side contact between two
// equal boxes standing on a floor, one pushing the other, taken from a
// simulation: the top and bottom faces are coplanar, so the bottom edge
// of the incident face lay in the reference face's bottom side plane
// (feature 0x20001a41), where the crossing parameter was 0/0 and the
// tangent NaN. Since boxBox widens the side planes by boxClipSlack that
// edge lies inside them, and the point is the crossing of the same edge
// with the y side plane (0x20000241), unique and well posed. Reference:
// central finite differences of Collide (gonum diff/fd).
func TestPointTangentBoxBoxSideRegression(t *testing.T) {
	const margin = 0.01
	a := Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.1, Y: 0.075, Z: 0.05}, Local: IdentityPose}
	pa := Pose{Pos: r3.Vec{X: -0.1473755995964493, Y: -0.002524090813722428, Z: 0.05}, Rot: Quat{W: 0.9998197225364712, X: 4.868937585569351e-19, Y: -5.502776007980018e-19, Z: 0.01898742813267985}}
	b := a
	pb := Pose{Pos: r3.Vec{X: 0.051341199192898715, Y: 0.035048181627444816, Z: 0.05}, Rot: Quat{W: 0.9998197225364712, X: 6.697670108970049e-19, Y: -2.930913489966604e-18, Z: 0.018987428132679857}}
	want := map[uint32]bool{0x20000041: true, 0x20000101: true, 0x20000201: true, 0x20000241: true}
	pts := Collide(&a, pa, &b, pb, margin, nil)
	if len(pts) != len(want) {
		t.Fatalf("Collide gave %d points, want %d", len(pts), len(want))
	}
	rng := rand.New(rand.NewPCG(41, 1))
	worst := 0.0
	defer func() { t.Logf("worst rel err %.2g", worst) }()
	for _, pt := range pts {
		if !want[pt.Feature] {
			t.Fatalf("unexpected feature %#x", pt.Feature)
		}
		for trial := 0; trial < 10; trial++ {
			ta, tb := planarTwist(rng), planarTwist(rng)
			e, ok := checkBoxBoxPoint(t, &a, pa, &b, pb, pt, ta, tb, margin, true)
			if !ok {
				t.Errorf("feature %#x: mode changed within the stencil", pt.Feature)
				continue
			}
			worst = math.Max(worst, e)
			if e > 1e-5 {
				t.Errorf("feature %#x: rel err %.3g against finite differences", pt.Feature, e)
			}
		}
		// A motion that tilts the edge out of the plane still gets a
		// finite answer.
		dp, dn, dg := PointTangent(&a, pa, &b, pb, pt, randTwist(rng), randTwist(rng))
		if !finiteVec(dp) || !finiteVec(dn) || math.IsNaN(dg) || math.IsInf(dg, 0) {
			t.Errorf("feature %#x: tilting twist gives dPos %v dNormal %v dGap %v", pt.Feature, dp, dn, dg)
		}
	}
}

func finiteVec(v r3.Vec) bool {
	return !math.IsNaN(v.X+v.Y+v.Z) && !math.IsInf(v.X+v.Y+v.Z, 0)
}

// TestPointTangentBoxBoxSideContacts checks every point of box–box side
// contacts with small yaw against central finite differences of Collide
// (gonum diff/fd, five-point stencil): two equal boxes standing side by
// side on a floor (coplanar top and bottom faces), and a thin bar at mid
// height pushing a box, in both orders of the pair. Half the trials carry
// roll and pitch of order 1e-18 in their quaternions, as simulated poses
// do, which is what puts incident edges exactly in side planes. Motions
// are planar (what standing boxes do) or, for the bar, general.
func TestPointTangentBoxBoxSideContacts(t *testing.T) {
	const (
		margin = 0.01
		tol    = 1e-5 // the in-plane edges' reference is 1e-6 rad away
	)
	cases := []struct {
		name    string
		a, b    r3.Vec  // half extents
		zb      float64 // height of b's centre (a's is its half height)
		general bool    // general twists as well as planar ones
	}{
		{"equal boxes side by side", r3.Vec{X: 0.1, Y: 0.075, Z: 0.05}, r3.Vec{X: 0.1, Y: 0.075, Z: 0.05}, 0.05, false},
		{"bar pushing a box", r3.Vec{X: 0.1, Y: 0.075, Z: 0.05}, r3.Vec{X: 0.02, Y: 0.175, Z: 0.02}, 0.06, true},
	}
	for ci, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(ci)+17, 3))
			a := Shape{Kind: Box, HalfExtents: tc.a, Local: IdentityPose}
			b := Shape{Kind: Box, HalfExtents: tc.b, Local: IdentityPose}
			var checked, skipped, inPlane int
			worst := 0.0
			buf := make([]Point, 0, 16)
			for trial := 0; trial < 200; trial++ {
				pa := Pose{Pos: r3.Vec{X: 0.1 * rng.NormFloat64(), Y: 0.1 * rng.NormFloat64(), Z: tc.a.Z}, Rot: QuatFromAxisAngle(r3.Vec{Z: 1}, 0.05*(2*rng.Float64()-1))}
				rb := QuatFromAxisAngle(r3.Vec{Z: 1}, 0.05*(2*rng.Float64()-1)).Mul(pa.Rot)
				if trial%2 == 0 {
					pa.Rot.X, pa.Rot.Y = 1e-18*rng.NormFloat64(), 1e-18*rng.NormFloat64()
					rb.X, rb.Y = 1e-18*rng.NormFloat64(), 1e-18*rng.NormFloat64()
				}
				// b slides in along a's x axis until the smallest gap is
				// within ±1 mm (bisection).
				dir := pa.Rot.Rotate(r3.Vec{X: 1})
				base := r3.Add(pa.Pos, pa.Rot.Rotate(r3.Vec{Y: 0.1 * (2*rng.Float64() - 1)}))
				base.Z = tc.zb
				at := func(s float64) Pose { return Pose{Pos: r3.Add(base, r3.Scale(s, dir)), Rot: rb} }
				lo, hi, target := 0.0, 0.5, 1e-3*(2*rng.Float64()-1)
				for i := 0; i < 60; i++ {
					m := (lo + hi) / 2
					if tangentMinGap(&a, pa, &b, at(m), buf) < target {
						lo = m
					} else {
						hi = m
					}
				}
				pb := at(lo)
				for swap := 0; swap < 2; swap++ {
					sa, sb, qa, qb := &a, &b, pa, pb
					if swap == 1 {
						sa, sb, qa, qb = &b, &a, pb, pa
					}
					for _, pt := range Collide(sa, qa, sb, qb, margin, nil) {
						ta, tb := planarTwist(rng), planarTwist(rng)
						if tc.general && trial%4 >= 2 {
							ta, tb = randTwist(rng), randTwist(rng)
						}
						if boxEdgeInPlane(pt) {
							inPlane++
						}
						e, ok := checkBoxBoxPoint(t, sa, qa, sb, qb, pt, ta, tb, margin, false)
						if !ok {
							skipped++
							continue
						}
						checked++
						worst = math.Max(worst, e)
						if e > tol {
							t.Errorf("feature %#x (swap %d): rel err %.3g", pt.Feature, swap, e)
						}
					}
				}
			}
			t.Logf("%s: %d points checked (%d with an edge in a side plane), worst rel err %.2g; %d skipped (mode changes within the stencil)", tc.name, checked, inPlane, worst, skipped)
			if checked < 200 {
				t.Errorf("only %d points checked", checked)
			}
		})
	}
}
