package contact

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

// TestPointTangentAdjoint checks the transpose identity
// ⟨ā, ta⟩ + ⟨b̄, tb⟩ = ⟨p̄, dPos⟩ + ⟨n̄, dNormal⟩ + ḡ dGap (the dot-product
// test of adjoint codes) for every pair kind in both orders, random twists and cotangents.
func TestPointTangentAdjoint(t *testing.T) {
	dotT := func(a, b Twist) float64 { return r3.Dot(a.V, b.V) + r3.Dot(a.W, b.W) }
	for ci, tc := range tangentCases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(ci)+300, 5))
			n := 0
			for trial := 0; trial < 10; trial++ {
				a, b := tc.a, tc.b
				pa, pb := nearContact(rng, &a, &b, 0.02*(2*rng.Float64()-1))
				pts := Collide(&a, pa, &b, pb, 0.05, nil)
				nab := len(pts)
				pts = Collide(&b, pb, &a, pa, 0.05, pts)
				for i, pt := range pts {
					sa, sb, qa, qb := &a, &b, pa, pb
					if i >= nab { // the swapped order
						sa, sb, qa, qb = &b, &a, pb, pa
					}
					ta, tb := randTwist(rng), randTwist(rng)
					pBar, nBar, gBar := randUnit(rng), randUnit(rng), rng.NormFloat64()
					dp, dn, dg := PointTangent(sa, qa, sb, qb, pt, ta, tb)
					aBar, bBar := PointTangentAdjoint(sa, qa, sb, qb, pt, pBar, nBar, gBar)
					lhs := dotT(aBar, ta) + dotT(bBar, tb)
					rhs := r3.Dot(pBar, dp) + r3.Dot(nBar, dn) + gBar*dg
					scale := 1 + math.Abs(rhs) + r3.Norm(dp) + r3.Norm(dn) + math.Abs(dg)
					if math.Abs(lhs-rhs) > 1e-11*scale {
						t.Errorf("feature %#x: ⟨adjoint, twist⟩ = %.15g, ⟨cotangent, tangent⟩ = %.15g", pt.Feature, lhs, rhs)
					}
					n++
				}
			}
			if n < 5 {
				t.Errorf("only %d points", n)
			}
		})
	}
}

// TestPointTangentAdjointFaceManifolds checks the adjoint on the points of
// box face manifolds of every kind (incident corners, incident edges
// crossing side planes, reference corners), with stacked boxes turned and
// tilted a little: small on large, large on small, and two alike turned
// well apart.
func TestPointTangentAdjointFaceManifolds(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 8))
	small := Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.15, Y: 0.1, Z: 0.05}}
	large := Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.3, Y: 0.25, Z: 0.1}}
	var kinds [3]int
	for trial := 0; trial < 60; trial++ {
		lower, upper, angle := &large, &small, 0.4
		switch trial % 3 {
		case 1:
			lower, upper = &small, &large
		case 2:
			lower, upper, angle = &small, &small, 1.2
		}
		tilt := QuatFromAxisAngle(randUnit(rng), 0.005*rng.Float64())
		turn := QuatFromAxisAngle(r3.Vec{Z: 1}, angle*rng.Float64())
		pl := Pose{Pos: r3.Vec{X: 0.01 * rng.NormFloat64()}, Rot: IdentityQuat}
		z := lower.HalfExtents.Z + upper.HalfExtents.Z - 0.002
		pu := Pose{Pos: r3.Vec{X: 0.02 * rng.NormFloat64(), Y: 0.02 * rng.NormFloat64(), Z: z}, Rot: turn.Mul(tilt)}
		for _, pt := range Collide(lower, pl, upper, pu, 0.01, nil) {
			if pt.Feature&featBoxEdge != 0 {
				continue
			}
			kinds[min(pt.Feature>>6&3, 2)]++
			ta, tb := randTwist(rng), randTwist(rng)
			pBar, nBar, gBar := randUnit(rng), randUnit(rng), rng.NormFloat64()
			dp, dn, dg := PointTangent(lower, pl, upper, pu, pt, ta, tb)
			aBar, bBar := PointTangentAdjoint(lower, pl, upper, pu, pt, pBar, nBar, gBar)
			lhs := r3.Dot(aBar.V, ta.V) + r3.Dot(aBar.W, ta.W) + r3.Dot(bBar.V, tb.V) + r3.Dot(bBar.W, tb.W)
			rhs := r3.Dot(pBar, dp) + r3.Dot(nBar, dn) + gBar*dg
			if math.Abs(lhs-rhs) > 1e-11*(1+math.Abs(rhs)+r3.Norm(dp)+r3.Norm(dn)+math.Abs(dg)) {
				t.Errorf("trial %d, feature %#x: ⟨adjoint, twist⟩ = %.15g, ⟨cotangent, tangent⟩ = %.15g", trial, pt.Feature, lhs, rhs)
			}
		}
	}
	for k, n := range kinds {
		if n == 0 {
			t.Errorf("no face-manifold point of kind %d", k)
		}
	}
}
