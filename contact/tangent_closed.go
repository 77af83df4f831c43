package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// The tangents of the closed-form pairs repeat, with values and tangents,
// the formulas of collide.go and collide_box.go for the mode that
// pt.Feature names. Where a routine chose among sub-cases that its feature
// does not record (which clamp of an interval was active), the choice is
// made again on the values, as Collide made it at the same poses.

// tPlaneSphere is planeSphere: gap = n·(c − o) − r, Pos = c − (r + gap/2) n.
func tPlaneSphere(n, o, c tvec, r float64) (tvec, tvec, tnum) {
	gap := nAddC(tDot(n, tSub(c, o)), -r)
	pos := tSub(c, tScale(nAddC(nScale(0.5, gap), r), n))
	return pos, n, gap
}

// tPlaneVertex is planeVertex.
func tPlaneVertex(n, o, p tvec) (tvec, tvec, tnum) { return tPlaneSphere(n, o, p, 0) }

// tPlaneCylinder is planeCylinder: feature cap<<4 | k names ring point k
// of a cap lying flat (fixed in the cylinder), or with k = 0xf the deepest
// rim point cc + R·u/|u|, u = (n·ez) ez − n, which slides round the rim.
func tPlaneCylinder(n, o tvec, b *Shape, fb *tframe, f uint32) (tvec, tvec, tnum) {
	s := -1.0
	if f>>4&1 != 0 {
		s = 1
	}
	k := f & 0xf
	if k == 0xf {
		ez := fb.axis(2)
		u := tSub(tScale(tDot(n, ez), ez), n)
		p := tAdd(fb.point(r3.Vec{Z: s * b.HalfLength}), tScaleC(b.Radius, tUnit(u)))
		return tPlaneVertex(n, o, p)
	}
	sn, cs := math.Sincos(2 * math.Pi * float64(k) / cylinderRingN)
	return tPlaneVertex(n, o, fb.point(r3.Vec{X: b.Radius * cs, Y: b.Radius * sn, Z: s * b.HalfLength}))
}

// tSphereSphere is sphereSphere.
func tSphereSphere(ca tvec, ra float64, cb tvec, rb float64) (tvec, tvec, tnum) {
	d := tSub(cb, ca)
	dist := tNorm(d)
	n := tconst(r3.Vec{Z: 1})
	if dist.v > 0 {
		n = tUnit(d)
	}
	gap := nAddC(dist, -ra-rb)
	pos := tAdd(ca, tScale(nAddC(nScale(0.5, gap), ra), n))
	return pos, n, gap
}

// segEnd returns the end parameter of a segment of half length h for
// segment feature f (1 low end, 2 high end).
func segEnd(f uint32, h float64) tnum {
	if f == 1 {
		return nconst(-h)
	}
	return nconst(h)
}

func tSphereCapsule(a *Shape, fa *tframe, b *Shape, fb *tframe, f uint32) (tvec, tvec, tnum) {
	w := fb.axis(2)
	cb := fb.origin()
	var t tnum
	if f == 0 {
		t = tDot(tSub(fa.origin(), cb), w)
	} else {
		t = segEnd(f, b.HalfLength)
	}
	q := tAdd(cb, tScale(t, w))
	return tSphereSphere(fa.origin(), a.Radius, q, b.Radius)
}

// tClosestSegments is closestSegments with the features fa, fb of its
// answer held: ends are fixed, an interior parameter is the stationary
// point of the squared distance given the other.
func tClosestSegments(ca, wa tvec, ha float64, cb, wb tvec, hb float64, fa, fb uint32) (s, t tnum) {
	r := tSub(ca, cb)
	b := tDot(wa, wb)
	c := tDot(wa, r)
	f := tDot(wb, r)
	switch {
	case fa != 0 && fb != 0:
		return segEnd(fa, ha), segEnd(fb, hb)
	case fa != 0:
		s = segEnd(fa, ha)
		return s, nAdd(nMul(b, s), f)
	case fb != 0:
		t = segEnd(fb, hb)
		return nSub(nMul(b, t), c), t
	}
	den := nSub(nconst(1), nMul(b, b))
	if den.v > 1e-12 {
		s = nDiv(nSub(nMul(b, f), c), den)
	}
	return s, nAdd(nMul(b, s), f)
}

// tClamp is clampSeg on values, keeping the tangent of the chosen branch.
func tClamp(x tnum, h float64) tnum {
	switch {
	case x.v < -h:
		return nconst(-h)
	case x.v > h:
		return nconst(h)
	}
	return x
}

func tCapsuleCapsule(a *Shape, fa *tframe, b *Shape, fb *tframe, fA, fB uint32) (tvec, tvec, tnum) {
	wa, wb := fa.axis(2), fb.axis(2)
	ca, cb := fa.origin(), fb.origin()
	ha, hb := a.HalfLength, b.HalfLength
	if fA >= 8 {
		// Parallel branch: both ends of the overlap of the two segments
		// along A's axis.
		o := tDot(tSub(cb, ca), wa)
		ab := tDot(wa, wb)
		if ab.v < 0 {
			ab = nScale(-1, ab)
		}
		e := nScale(hb, ab)
		var s tnum
		if fA == 8 {
			s = nSub(o, e)
			if s.v < -ha {
				s = nconst(-ha)
			}
		} else {
			s = nAdd(o, e)
			if s.v > ha {
				s = nconst(ha)
			}
		}
		p := tAdd(ca, tScale(s, wa))
		t := tClamp(tDot(tSub(p, cb), wb), hb)
		q := tAdd(cb, tScale(t, wb))
		return tSphereSphere(p, a.Radius, q, b.Radius)
	}
	s, t := tClosestSegments(ca, wa, ha, cb, wb, hb, fA, fB)
	p := tAdd(ca, tScale(s, wa))
	q := tAdd(cb, tScale(t, wb))
	return tSphereSphere(p, a.Radius, q, b.Radius)
}

// tClampCode is clampBox for a known clamp code (base 3 per axis: 0 free,
// 1 low face, 2 high face).
func tClampCode(x tvec, h r3.Vec, code uint32) tvec {
	for i := 0; i < 3; i++ {
		switch code % 3 {
		case 1:
			tSetAt(&x, i, nconst(-vecAt(h, i)))
		case 2:
			tSetAt(&x, i, nconst(vecAt(h, i)))
		}
		code /= 3
	}
	return x
}

// tBoxResult maps a contact found in box B's frame (surface point q of
// the box, its outward normal nOut towards A, the gap) to the world.
func tBoxResult(fb *tframe, q, nOut tvec, gap tnum) (tvec, tvec, tnum) {
	pos := fb.toWorld(tAdd(q, tScale(nScale(0.5, gap), nOut)))
	return pos, tNeg(fb.dirToWorld(nOut)), gap
}

// tSphereBox is sphereBox: code < 27 is a clamp code (the centre is
// outside); 27 + 2i (+1 for the high side) pushes an inside centre out
// through face i.
func tSphereBox(a *Shape, fa *tframe, b *Shape, fb *tframe, code uint32) (tvec, tvec, tnum) {
	h := b.HalfExtents
	c := fb.toLocal(fa.origin())
	if code < 27 {
		q := tClampCode(c, h, code)
		d := tSub(c, q)
		return tBoxResult(fb, q, tUnit(d), nAddC(tNorm(d), -a.Radius))
	}
	i := int(code-27) / 2
	s := -1.0
	if (code-27)&1 != 0 {
		s = 1
	}
	q := c
	tSetAt(&q, i, nconst(s*vecAt(h, i)))
	gap := nAddC(nScale(s, tAt(c, i)), -vecAt(h, i)-a.Radius)
	return tBoxResult(fb, q, tconst(r3.Scale(s, unitAt(i))), gap)
}

// tSphereCylinder is sphereCylinder: feature 1, 2 cap (low, high), 3
// side, 5, 6 rim; bit 8 marks a centre inside, which changes nothing in
// the formulas.
func tSphereCylinder(a *Shape, fa *tframe, b *Shape, fb *tframe, f uint32) (tvec, tvec, tnum) {
	c := fb.toLocal(fa.origin())
	R, h := b.Radius, b.HalfLength
	cx, cy := tAt(c, 0), tAt(c, 1)
	rho := nHypot(cx, cy)
	radial := tconst(r3.Vec{X: 1})
	if rho.v > 0 {
		radial = tvec{}
		tSetAt(&radial, 0, nDiv(cx, rho))
		tSetAt(&radial, 1, nDiv(cy, rho))
	}
	var q, nOut tvec
	var dist tnum
	switch base := f & 7; base {
	case 5, 6:
		sz := 2*float64(base-4) - 3
		q = tAdd(tScaleC(R, radial), tconst(r3.Vec{Z: sz * h}))
		d := tSub(c, q)
		dist, nOut = tNorm(d), tUnit(d)
	case 1, 2:
		sz := 2*float64(base) - 3
		q = c
		tSetAt(&q, 2, nconst(sz*h))
		nOut = tconst(r3.Vec{Z: sz})
		dist = nAddC(nScale(sz, tAt(c, 2)), -h)
	default:
		q = tScaleC(R, radial)
		tSetAt(&q, 2, tAt(c, 2))
		nOut = radial
		dist = nAddC(rho, -R)
	}
	return tBoxResult(fb, q, nOut, nAddC(dist, -a.Radius))
}

// tClipSegmentToFace is clipSegmentToFace with tangents; the slab that
// sets each end is chosen on the values.
func tClipSegmentToFace(p0, d tvec, h r3.Vec, k int) (lo, hi tnum) {
	lo, hi = nconst(0), nconst(1)
	for i := 0; i < 3; i++ {
		if i == k {
			continue
		}
		pi, di, hh := tAt(p0, i), tAt(d, i), vecAt(h, i)
		if di.v == 0 {
			continue
		}
		t0 := nDiv(nScale(-1, nAddC(pi, hh)), di)
		t1 := nDiv(nScale(-1, nAddC(pi, -hh)), di)
		if t0.v > t1.v {
			t0, t1 = t1, t0
		}
		if t0.v > lo.v {
			lo = t0
		}
		if t1.v < hi.v {
			hi = t1
		}
	}
	return lo, hi
}

// tCapsuleBox is capsuleBox in the box's frame. Features: A half 4 or 5
// with B half 32 + face is an end of the segment clipped to a face's
// prism; A half 16 + f with B half 64 + edge<<2 | g is a segment–edge
// point found by separating axes; otherwise A half is the segment
// feature and B half the clamp code of the closest box point.
func tCapsuleBox(a *Shape, fa *tframe, b *Shape, fb *tframe, fA, fB uint32) (tvec, tvec, tnum) {
	h := b.HalfExtents
	r := a.Radius
	wl := fb.dirToLocal(tScaleC(a.HalfLength, fa.axis(2)))
	cl := fb.toLocal(fa.origin())
	p0 := tSub(cl, wl)
	d := tScaleC(2, wl)
	switch {
	case fA == 4 || fA == 5:
		face := fB - 33
		k := int(face / 2)
		s := -1.0
		if face&1 != 0 {
			s = 1
		}
		t, hi := tClipSegmentToFace(p0, d, h, k)
		if fA == 5 {
			t = hi
		}
		x := tAdd(p0, tScale(t, d))
		height := nAddC(nScale(s, tAt(x, k)), -vecAt(h, k))
		nOut := tconst(r3.Scale(s, unitAt(k)))
		mid := tSub(x, tScale(nScale(0.5, nAddC(height, r)), nOut))
		return fb.toWorld(mid), tNeg(fb.dirToWorld(nOut)), nAddC(height, -r)
	case fA >= 16:
		edge := (fB - 64) >> 2
		k := int(edge & 3)
		var ec r3.Vec
		for i := 0; i < 3; i++ {
			if i == k {
				continue
			}
			s := -1.0
			if edge&(4<<uint(i)) != 0 {
				s = 1
			}
			setAt(&ec, i, s*vecAt(h, i))
		}
		ek := tconst(unitAt(k))
		l := tUnit(tCross(wl, ek))
		if r3.Dot(cl.v, l.v) < 0 {
			l = tNeg(l)
		}
		lw := tNorm(wl)
		u := tScale(nDiv(nconst(1), lw), wl)
		sp, tq := tClosestSegments(cl, u, lw.v, tconst(ec), ek, vecAt(h, k), fA-16, fB&3)
		xs := tAdd(cl, tScale(sp, u))
		xq := tAdd(tconst(ec), tScale(tq, ek))
		gap := nAddC(tDot(l, tSub(xs, xq)), -r)
		mid := tScaleC(0.5, tAdd(xq, tSub(xs, tScaleC(r, l))))
		return fb.toWorld(mid), tNeg(fb.dirToWorld(l)), gap
	}
	// Closest points of the segment and an edge or vertex of the box: an
	// interior segment parameter minimises the squared distance to the
	// box faces clamped in code.
	var t tnum
	switch fA {
	case 1:
		t = nconst(0)
	case 2:
		t = nconst(1)
	default:
		var num, den tnum
		code := fB
		for i := 0; i < 3; i++ {
			var bound float64
			switch code % 3 {
			case 1:
				bound = -vecAt(h, i)
			case 2:
				bound = vecAt(h, i)
			default:
				code /= 3
				continue
			}
			code /= 3
			di := tAt(d, i)
			num = nAdd(num, nMul(di, nAddC(tAt(p0, i), -bound)))
			den = nAdd(den, nMul(di, di))
		}
		if den.v > 0 {
			t = nScale(-1, nDiv(num, den))
		}
	}
	x := tAdd(p0, tScale(t, d))
	q := tClampCode(x, h, fB)
	dv := tSub(x, q)
	return tBoxResult(fb, q, tUnit(dv), nAddC(tNorm(dv), -r))
}
