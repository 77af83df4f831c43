package contact

import "gonum.org/v1/gonum/spatial/r3"

// PointTangentAdjoint is the transpose of PointTangent: given the gradients
// posBar, normalBar and gapBar of a scalar with respect to the contact
// point's position, normal and gap, it returns the gradients with respect
// to the twists of the two shapes, so that
//
//	⟨taBar, ta⟩ + ⟨tbBar, tb⟩ = ⟨posBar, dPos⟩ + ⟨normalBar, dNormal⟩ + gapBar·dGap
//
// for every (ta, tb), where (dPos, dNormal, dGap) = PointTangent(…, ta, tb).
//
// A contact point moves rigidly when both shapes move with the same rigid
// motion, so PointTangent(ta, tb) is the rigid motion of ta plus
// PointTangent(0, tb − ta carried to b's origin); the adjoint therefore
// needs PointTangent along only the six unit twists of b. Pairs with a
// cylinder, whose GJK points are in some cases approximate (and then not
// exactly rigid), take all twelve.
func PointTangentAdjoint(a *Shape, pa Pose, b *Shape, pb Pose, pt Point, posBar, normalBar r3.Vec, gapBar float64) (taBar, tbBar Twist) {
	// The frames' rotation matrices are built once for all the columns.
	fa, fb := makeFrame(pa, Twist{}), makeFrame(pb, Twist{})
	col := func(ta, tb Twist) float64 {
		fa.v, fa.w, fb.v, fb.w = ta.V, ta.W, tb.V, tb.W
		dp, dn, dg := pointTangentFrames(a, &fa, b, &fb, pt)
		return r3.Dot(posBar, dp) + r3.Dot(normalBar, dn) + gapBar*dg
	}
	unit := func(i int) Twist {
		var t Twist
		if i < 3 {
			setAt(&t.V, i, 1)
		} else {
			setAt(&t.W, i-3, 1)
		}
		return t
	}
	for i := range 6 {
		x := col(Twist{}, unit(i))
		if i < 3 {
			setAt(&tbBar.V, i, x)
		} else {
			setAt(&tbBar.W, i-3, x)
		}
	}
	if a.Kind == Cylinder || b.Kind == Cylinder {
		for i := range 6 {
			x := col(unit(i), Twist{})
			if i < 3 {
				setAt(&taBar.V, i, x)
			} else {
				setAt(&taBar.W, i-3, x)
			}
		}
		return taBar, tbBar
	}
	// Rigid part of ta = (V, W): dPos = V + W × (p − pa.Pos), dNormal =
	// W × n, dGap = 0; b's share of that rigid motion is (V + W × (pb.Pos −
	// pa.Pos), W), which the b columns must not count again.
	r := r3.Sub(pt.Pos, pa.Pos)
	d := r3.Sub(pb.Pos, pa.Pos)
	taBar.V = r3.Sub(posBar, tbBar.V)
	taBar.W = r3.Add(r3.Cross(r, posBar), r3.Cross(pt.Normal, normalBar))
	taBar.W = r3.Sub(taBar.W, r3.Add(r3.Cross(d, tbBar.V), tbBar.W))
	return taBar, tbBar
}
