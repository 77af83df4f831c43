package contact

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

// TestPointTangentAdjoint checks the transpose identity
// ⟨ā, ta⟩ + ⟨b̄, tb⟩ = ⟨p̄, dPos⟩ + ⟨n̄, dNormal⟩ + ḡ dGap (the dot-product
// test of adjoint codes) for every pair kind, random twists and cotangents.
func TestPointTangentAdjoint(t *testing.T) {
	dotT := func(a, b Twist) float64 { return r3.Dot(a.V, b.V) + r3.Dot(a.W, b.W) }
	for ci, tc := range tangentCases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(ci)+300, 5))
			n := 0
			for trial := 0; trial < 10; trial++ {
				a, b := tc.a, tc.b
				pa, pb := nearContact(rng, &a, &b, 0.02*(2*rng.Float64()-1))
				for _, pt := range Collide(&a, pa, &b, pb, 0.05, nil) {
					ta, tb := randTwist(rng), randTwist(rng)
					pBar, nBar, gBar := randUnit(rng), randUnit(rng), rng.NormFloat64()
					dp, dn, dg := PointTangent(&a, pa, &b, pb, pt, ta, tb)
					aBar, bBar := PointTangentAdjoint(&a, pa, &b, pb, pt, pBar, nBar, gBar)
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
