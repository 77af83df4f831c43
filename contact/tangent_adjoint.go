package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// PointTangentAdjoint is the transpose of PointTangent: given the gradients
// posBar, normalBar and gapBar of a scalar with respect to the contact
// point's position, normal and gap, it returns the gradients with respect
// to the twists of the two shapes, so that
//
//	⟨taBar, ta⟩ + ⟨tbBar, tb⟩ = ⟨posBar, dPos⟩ + ⟨normalBar, dNormal⟩ + gapBar·dGap
//
// for every (ta, tb), where (dPos, dNormal, dGap) = PointTangent(…, ta, tb).
//
// The commonest pairs have hand-written adjoints of their closed forms (a
// plane under a sphere, a capsule end or a box corner; the points of box
// face manifolds). For the others, a contact point moves rigidly when both
// shapes move with the same rigid motion, so PointTangent(ta, tb) is the
// rigid motion of ta plus PointTangent(0, tb − ta carried to b's origin);
// the adjoint then needs PointTangent along only the six unit twists of b.
// Pairs with a cylinder, whose GJK points are in some cases approximate
// (and then not exactly rigid), take all twelve.
func PointTangentAdjoint(a *Shape, pa Pose, b *Shape, pb Pose, pt Point, posBar, normalBar r3.Vec, gapBar float64) (taBar, tbBar Twist) {
	if a.Kind > b.Kind {
		q := pt
		q.Normal = r3.Scale(-1, pt.Normal)
		q.Feature = swapFeature(pt.Feature)
		tbBar, taBar = adjointOrdered(b, pb, a, pa, q, posBar, r3.Scale(-1, normalBar), gapBar)
		return taBar, tbBar
	}
	return adjointOrdered(a, pa, b, pb, pt, posBar, normalBar, gapBar)
}

// adjointOrdered is PointTangentAdjoint for a.Kind ≤ b.Kind. The commonest
// pairs (a plane under a sphere, capsule end or box corner; box face
// manifolds) have hand-written adjoints of their closed forms; the others
// go through the forward tangent column by column.
func adjointOrdered(a *Shape, pa Pose, b *Shape, pb Pose, pt Point, posBar, normalBar r3.Vec, gapBar float64) (taBar, tbBar Twist) {
	fB := pt.Feature & 0xffff
	if a.Kind == Plane {
		var x r3.Vec
		switch b.Kind {
		case Sphere:
			return planePointAdjoint(pa, pb, pb.Pos, b.Radius, posBar, normalBar, gapBar)
		case Capsule:
			x.Z = b.HalfLength
			if fB == 0 {
				x.Z = -x.Z
			}
			return planePointAdjoint(pa, pb, pb.Apply(x), b.Radius, posBar, normalBar, gapBar)
		case Box:
			return planePointAdjoint(pa, pb, pb.Apply(boxCorner(b.HalfExtents, int(fB&7))), 0, posBar, normalBar, gapBar)
		}
	}
	if a.Kind == Box && b.Kind == Box && pt.Feature&featBoxEdge == 0 {
		return boxFaceAdjoint(a, pa, b, pb, pt.Feature, pt.Pos, pt.Gap, posBar, normalBar, gapBar)
	}
	// The frames' rotation matrices are built once for all the columns.
	fa, fb := makeFrame(pa, Twist{}), makeFrame(pb, Twist{})
	col := func(ta, tb Twist) float64 {
		fa.v, fa.w, fb.v, fb.w = ta.V, ta.W, tb.V, tb.W
		p, n, g, _ := tangentOrdered(a, &fa, b, &fb, pt)
		dp, dn, dg := p.d, n.d, g.d
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

// pointBar adds to t the twist bar of a frame-fixed point at world c for
// the bar cb of its position.
func (t *Twist) pointBar(origin, c, cb r3.Vec) {
	t.V = r3.Add(t.V, cb)
	t.W = r3.Add(t.W, r3.Cross(r3.Sub(c, origin), cb))
}

// dirBar adds to t the twist bar of a frame-fixed direction u for the bar
// ub of its direction.
func (t *Twist) dirBar(u, ub r3.Vec) { t.W = r3.Add(t.W, r3.Cross(u, ub)) }

// planePointAdjoint is the adjoint of tPlaneSphere for plane a and the
// point c (radius r) fixed in b: gap = n·(c − o) − r, Pos = c − (r + gap/2) n.
func planePointAdjoint(pa, pb Pose, c r3.Vec, r float64, posBar, normalBar r3.Vec, gapBar float64) (ta, tb Twist) {
	n := pa.Rot.Rotate(r3.Vec{Z: 1})
	o := pa.Pos
	gap := r3.Dot(n, r3.Sub(c, o)) - r
	gb := gapBar - 0.5*r3.Dot(n, posBar)
	nb := r3.Sub(normalBar, r3.Scale(0.5*gap+r, posBar))
	nb = r3.Add(nb, r3.Scale(gb, r3.Sub(c, o)))
	cb := r3.Add(posBar, r3.Scale(gb, n))
	ta.pointBar(o, o, r3.Scale(-gb, n))
	ta.dirBar(n, nb)
	tb.pointBar(pb.Pos, c, cb)
	return ta, tb
}

// boxFaceAdjoint is the adjoint of tBoxBoxFace (see there for the three
// kinds of point of a face manifold).
func boxFaceAdjoint(a *Shape, pa Pose, b *Shape, pb Pose, feat uint32, pos r3.Vec, gap float64, posBar, normalBar r3.Vec, gapBar float64) (ta, tb Twist) {
	rp, ip := pa, pb
	hr, hi := a.HalfExtents, b.HalfExtents
	refIsB := feat&featRefIsB != 0
	if refIsB {
		rp, ip = pb, pa
		hr, hi = hi, hr
	}
	var tr, ti Twist // bars of the reference and incident frames
	rm, im := rp.Rot.Mat(), ip.Rot.Mat()
	rAxis := func(i int) r3.Vec { return r3.Vec{X: rm[i], Y: rm[3+i], Z: rm[6+i]} }
	iAxis := func(i int) r3.Vec { return r3.Vec{X: im[i], Y: im[3+i], Z: im[6+i]} }
	rPoint := func(x r3.Vec) r3.Vec { return r3.Add(rp.Pos, rm.MulVec(x)) }
	iPoint := func(x r3.Vec) r3.Vec { return r3.Add(ip.Pos, im.MulVec(x)) }
	corner := func(f uint32, v int) r3.Vec { return iPoint(incidentCornerLocal(hi, f, v)) }

	refFace, incFace := feat&7, feat>>3&7
	kind, va, vb := feat>>6&3, int(feat>>8&7), int(feat>>11&7)
	k := int(refFace / 2)
	sr := faceSign(refFace)
	nRef := r3.Scale(sr, rAxis(k))
	cr := rPoint(r3.Scale(sr*vecAt(hr, k), unitAt(k)))

	// Primal point p, then the bars of the outputs pos = p − (g/2) nRef,
	// normal = ±nRef, g = nRef·(p − cr).
	var p r3.Vec
	var p0, p1, ns, e r3.Vec
	var g0, g1, lam, mu, den float64
	var crn, nInc, ci r3.Vec
	var lamFree bool
	switch kind {
	case 0:
		p = corner(incFace, va)
	case 1:
		p0, p1 = corner(incFace, va), corner(incFace, (va+1)%4)
		j := (k + 1 + vb/2) % 3
		ns = r3.Scale(sideSign(vb), rAxis(j))
		off := -vecAt(hr, j) - boxClipSlack
		g0 = r3.Dot(ns, r3.Sub(p0, rp.Pos)) + off
		g1 = r3.Dot(ns, r3.Sub(p1, rp.Pos)) + off
		e = r3.Sub(p1, p0)
		den = g0 - g1
		if lamFree = !(math.Abs(den) <= edgeInPlaneTol*r3.Norm(e)); lamFree {
			lam = g0 / den
		} else {
			x := r3.Add(pos, r3.Scale(gap/2, nRef))
			lam = r3.Dot(r3.Sub(x, p0), e) / r3.Dot(e, e)
		}
		p = r3.Add(p0, r3.Scale(lam, e))
	default:
		crn = rPoint(refCorner(hr, k, sr, va, vb))
		ki := int(incFace / 2)
		si := faceSign(incFace)
		nInc = r3.Scale(si, iAxis(ki))
		ci = iPoint(r3.Scale(si*vecAt(hi, ki), unitAt(ki)))
		den = r3.Dot(nInc, nRef)
		mu = r3.Dot(nInc, r3.Sub(ci, crn)) / den
		p = r3.Add(crn, r3.Scale(mu, nRef))
	}
	g := r3.Dot(nRef, r3.Sub(p, cr))

	nRefBar := r3.Scale(-0.5*g, posBar)
	if refIsB {
		nRefBar = r3.Sub(nRefBar, normalBar)
	} else {
		nRefBar = r3.Add(nRefBar, normalBar)
	}
	gb := gapBar - 0.5*r3.Dot(nRef, posBar)
	pBar := r3.Add(posBar, r3.Scale(gb, nRef))
	nRefBar = r3.Add(nRefBar, r3.Scale(gb, r3.Sub(p, cr)))
	tr.pointBar(rp.Pos, cr, r3.Scale(-gb, nRef))

	switch kind {
	case 0:
		ti.pointBar(ip.Pos, p, pBar)
	case 1:
		p0b := r3.Scale(1-lam, pBar)
		p1b := r3.Scale(lam, pBar)
		if lamFree {
			lb := r3.Dot(e, pBar)
			g0b, g1b := -lb*g1/(den*den), lb*g0/(den*den)
			nsb := r3.Add(r3.Scale(g0b, r3.Sub(p0, rp.Pos)), r3.Scale(g1b, r3.Sub(p1, rp.Pos)))
			p0b = r3.Add(p0b, r3.Scale(g0b, ns))
			p1b = r3.Add(p1b, r3.Scale(g1b, ns))
			tr.V = r3.Sub(tr.V, r3.Scale(g0b+g1b, ns))
			tr.dirBar(ns, nsb)
		}
		ti.pointBar(ip.Pos, p0, p0b)
		ti.pointBar(ip.Pos, p1, p1b)
	default:
		crnBar := pBar
		nRefBar = r3.Add(nRefBar, r3.Scale(mu, pBar))
		mub := r3.Dot(nRef, pBar)
		ab, bb := mub/den, -mub*mu/den
		nIncBar := r3.Add(r3.Scale(ab, r3.Sub(ci, crn)), r3.Scale(bb, nRef))
		nRefBar = r3.Add(nRefBar, r3.Scale(bb, nInc))
		crnBar = r3.Sub(crnBar, r3.Scale(ab, nInc))
		tr.pointBar(rp.Pos, crn, crnBar)
		ti.dirBar(nInc, nIncBar)
		ti.pointBar(ip.Pos, ci, r3.Scale(ab, nInc))
	}
	tr.dirBar(nRef, nRefBar)
	if refIsB {
		return ti, tr
	}
	return tr, ti
}
