package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// faceSign returns the outward sign of box face id f (2·axis, +1 for the
// positive side).
func faceSign(f uint32) float64 {
	if f&1 != 0 {
		return 1
	}
	return -1
}

// tBoxBoxFace is a point of a box–box face manifold. The reference face's
// normal is fixed in the reference box. The clipped vertex is, by its
// kind: an incident-face corner, fixed in the incident box; the crossing
// of an incident edge with a reference side plane; or the point where two
// reference side planes (a line along the reference normal through a
// corner of the reference face) pierce the incident face's plane.
//
// pos and gap are the point's Pos and Gap from Collide: they place the
// point on an incident edge that lies in a reference side plane, where
// the crossing is not unique.
func tBoxBoxFace(a *Shape, fa *tframe, b *Shape, fb *tframe, feat uint32, pos r3.Vec, gap float64) (tvec, tvec, tnum) {
	rf, inf := fa, fb
	hr, hi := a.HalfExtents, b.HalfExtents
	if feat&featRefIsB != 0 {
		rf, inf = fb, fa
		hr, hi = hi, hr
	}
	refFace, incFace := feat&7, feat>>3&7
	kind, va, vb := feat>>6&3, int(feat>>8&7), int(feat>>11&7)
	k := int(refFace / 2)
	sr := faceSign(refFace)
	nRef := tScaleC(sr, rf.axis(k))
	cr := rf.point(r3.Scale(sr*vecAt(hr, k), unitAt(k)))

	var p tvec
	switch kind {
	case 0:
		p = incidentCorner(inf, hi, incFace, va)
	case 1:
		p0 := incidentCorner(inf, hi, incFace, va)
		p1 := incidentCorner(inf, hi, incFace, (va+1)%4)
		g0 := sidePlaneDist(rf, hr, k, vb, p0)
		g1 := sidePlaneDist(rf, hr, k, vb, p1)
		e := tSub(p1, p0)
		var lam tnum
		if den := nSub(g0, g1); !(math.Abs(den.v) <= edgeInPlaneTol*r3.Norm(e.v)) {
			lam = nDiv(g0, den)
		} else {
			// The edge lies in the side plane (two boxes side by side on
			// a floor: their top and bottom faces coplanar), so every point
			// of it is a crossing and Collide's pick is set by rounding.
			// Keep the point Collide gave as a point of the incident
			// edge. That is the limit of the exact derivative for every
			// motion that keeps the edge in the plane (for those g0' =
			// g1' = 0, so λ' = (g0 g1' − g1 g0')/(g0 − g1)² = 0); a
			// motion that tilts the edge out of the plane has no finite
			// derivative and ends the mode.
			x := r3.Add(pos, r3.Scale(gap/2, nRef.v))
			lam = nconst(r3.Dot(r3.Sub(x, p0.v), e.v) / r3.Dot(e.v, e.v))
		}
		p = tAdd(p0, tScale(lam, e))
	default:
		corner := rf.point(refCorner(hr, k, sr, va, vb))
		ki := int(incFace / 2)
		si := faceSign(incFace)
		nInc := tScaleC(si, inf.axis(ki))
		ci := inf.point(r3.Scale(si*vecAt(hi, ki), unitAt(ki)))
		mu := nDiv(tDot(nInc, tSub(ci, corner)), tDot(nInc, nRef))
		p = tAdd(corner, tScale(mu, nRef))
	}
	g := tDot(nRef, tSub(p, cr))
	n := nRef
	if feat&featRefIsB != 0 {
		n = tNeg(nRef)
	}
	return tSub(p, tScale(nScale(0.5, g), nRef)), n, g
}

// refCorner returns, in the reference box's frame, the corner of reference
// face (axis k, sign sr) on side planes va and vb, widened by boxClipSlack
// as boxBox clips.
func refCorner(hr r3.Vec, k int, sr float64, va, vb int) r3.Vec {
	var x r3.Vec
	setAt(&x, k, sr*vecAt(hr, k))
	for _, s := range [2]int{va, vb} {
		j := (k + 1 + s/2) % 3
		setAt(&x, j, sideSign(s)*(vecAt(hr, j)+boxClipSlack))
	}
	return x
}

// edgeInPlaneTol is the sine of the angle between an incident edge and a
// reference side plane below which the edge counts as lying in the plane.
// At 1e-9 the exact derivative of the crossing would already be about 1e9
// times the twist, and the distances that set it are within a few hundred
// roundoffs of zero for boxes of unit size.
const edgeInPlaneTol = 1e-9

// sideSign is the sign of reference side plane s along its axis: even
// planes bound the positive side.
func sideSign(s int) float64 {
	if s&1 != 0 {
		return -1
	}
	return 1
}

// sidePlaneDist is the signed distance of p outside reference side plane
// s (planes 0, 1 bound axis k+1, planes 2, 3 axis k+2, in boxBox's order),
// widened by boxClipSlack as boxBox clips.
func sidePlaneDist(rf *tframe, hr r3.Vec, k, s int, p tvec) tnum {
	j := (k + 1 + s/2) % 3
	n := tScaleC(sideSign(s), rf.axis(j))
	return nAddC(tDot(n, tSub(p, rf.origin())), -vecAt(hr, j)-boxClipSlack)
}

// incidentCorner returns corner v of incident face f in boxBox's order:
// (+u, +v), (−u, +v), (−u, −v), (+u, −v) on the face's two other axes.
func incidentCorner(inf *tframe, hi r3.Vec, f uint32, v int) tvec {
	return inf.point(incidentCornerLocal(hi, f, v))
}

// incidentCornerLocal is incidentCorner in the incident box's frame.
func incidentCornerLocal(hi r3.Vec, f uint32, v int) r3.Vec {
	ki := int(f / 2)
	var x r3.Vec
	setAt(&x, ki, faceSign(f)*vecAt(hi, ki))
	u1, u2 := (ki+1)%3, (ki+2)%3
	su := [4]float64{1, -1, -1, 1}[v]
	sv := [4]float64{1, 1, -1, -1}[v]
	setAt(&x, u1, su*vecAt(hi, u1))
	setAt(&x, u2, sv*vecAt(hi, u2))
	return x
}

// tBoxBoxEdge is boxBoxEdge: the normal is the unit cross product of the
// two edge directions, oriented from A to B, and the points are the
// closest points of the two edges.
func tBoxBoxEdge(a *Shape, fa *tframe, b *Shape, fb *tframe, feat uint32) (tvec, tvec, tnum) {
	e := int(feat & 15)
	i, j := e/3, e%3
	ai, bj := fa.axis(i), fb.axis(j)
	l := tUnit(tCross(ai, bj))
	if r3.Dot(r3.Sub(fb.pos, fa.pos), l.v) < 0 {
		l = tNeg(l)
	}
	var xa, xb r3.Vec
	for k := 0; k < 3; k++ {
		if k != i {
			s := -1.0
			if feat&(1<<(4+k)) != 0 {
				s = 1
			}
			setAt(&xa, k, s*vecAt(a.HalfExtents, k))
		}
		if k != j {
			s := -1.0
			if feat&(1<<(8+k)) != 0 {
				s = 1
			}
			setAt(&xb, k, s*vecAt(b.HalfExtents, k))
		}
	}
	ca, cb := fa.point(xa), fb.point(xb)
	s, t := tClosestSegments(ca, ai, vecAt(a.HalfExtents, i), cb, bj, vecAt(b.HalfExtents, j), feat>>12&3, feat>>14&3)
	qa := tAdd(ca, tScale(s, ai))
	qb := tAdd(cb, tScale(t, bj))
	return tScaleC(0.5, tAdd(qa, qb)), l, tDot(l, tSub(qb, qa))
}
