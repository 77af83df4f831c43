package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// flatTol is the sine of the angle within which a box face, a cylinder cap
// or side, or a capsule's segment counts as lying flat against the contact
// normal, so that the convex-distance route gives a manifold instead of a
// single point.
const flatTol = 0.02

// Feature layout of flatManifold's points, in each shape's 16-bit half
// (packFeature):
//
//	bit 13      flatTag, set in both halves (0x4000, the convex-distance
//	            route's tag, stays clear)
//	bit 12      flatRef: this shape holds the reference feature
//	bits 8–11   the flat feature's id (flatFeature.id, 0–11)
//
// and in the incident shape's half only, the clipped vertex (clipVert):
//
//	bits 6–7    its kind
//	bits 3–5    its first id a (incident vertex or edge, or side plane)
//	bits 0–2    its second id b (side plane)
//
// The fields do not overlap (ids < 16, vertex and plane numbers <
// cylinderRingN = 8), so equal codes mean equal features.
const (
	flatTag       = 1 << 13
	flatRef       = 1 << 12
	flatIDShift   = 8
	flatKindShift = 6
	flatAShift    = 3
)

// flatFeature is a flat part of a core facing the other shape: a convex
// polygon (n ≥ 3, in cyclic order) or a segment (n = 2).
type flatFeature struct {
	p  [cylinderRingN]r3.Vec
	n  int
	id uint32
}

// flat fills f with the flat feature of the core facing the unit
// direction d, if any.
func (c *convexShape) flat(d r3.Vec, f *flatFeature) {
	f.n = 0
	cosTol := math.Sqrt(1 - flatTol*flatTol)
	col := func(i int) r3.Vec { return r3.Vec{X: c.m[i], Y: c.m[3+i], Z: c.m[6+i]} }
	switch c.kind {
	case Box:
		l := c.m.MulVecT(d)
		for i := 0; i < 3; i++ {
			li := vecAt(l, i)
			if math.Abs(li) < cosTol {
				continue
			}
			s := math.Copysign(1, li)
			j, k := (i+1)%3, (i+2)%3
			fc := r3.Add(c.pos, r3.Scale(s*vecAt(c.half, i), col(i)))
			u, v := r3.Scale(vecAt(c.half, j), col(j)), r3.Scale(vecAt(c.half, k), col(k))
			f.p[0] = r3.Add(fc, r3.Add(u, v))
			f.p[1] = r3.Add(fc, r3.Sub(v, u))
			f.p[2] = r3.Sub(fc, r3.Add(u, v))
			f.p[3] = r3.Add(fc, r3.Sub(u, v))
			f.n = 4
			f.id = uint32(2 * i)
			if s > 0 {
				f.id++
			}
			return
		}
	case Cylinder:
		l := c.m.MulVecT(d)
		ax := col(2)
		if math.Abs(l.Z) >= cosTol {
			s := math.Copysign(1, l.Z)
			cc := r3.Add(c.pos, r3.Scale(s*c.halfLen, ax))
			ex, ey := col(0), col(1)
			for k := 0; k < cylinderRingN; k++ {
				sn, cs := math.Sincos(2 * math.Pi * float64(k) / cylinderRingN)
				f.p[k] = r3.Add(cc, r3.Add(r3.Scale(c.radius*cs, ex), r3.Scale(c.radius*sn, ey)))
			}
			f.n = cylinderRingN
			f.id = 8
			if s > 0 {
				f.id++
			}
			return
		}
		if rho := planarNorm(l); math.Abs(l.Z) <= flatTol && rho > 0 {
			rim := c.m.MulVec(r3.Vec{X: c.radius * l.X / rho, Y: c.radius * l.Y / rho})
			w := r3.Scale(c.halfLen, ax)
			f.p[0] = r3.Add(c.pos, r3.Sub(rim, w))
			f.p[1] = r3.Add(c.pos, r3.Add(rim, w))
			f.n = 2
			f.id = 10
		}
	case Capsule:
		ax := c.axis()
		if math.Abs(r3.Dot(d, ax)) <= flatTol {
			w := r3.Scale(c.halfLen, ax)
			f.p[0] = r3.Sub(c.pos, w)
			f.p[1] = r3.Add(c.pos, w)
			f.n = 2
			f.id = 11
		}
	}
}

// flatManifold builds a contact manifold for two flat features facing
// each other across the normal n (from A to B): the incident feature is
// clipped against the side planes of the reference one (Sutherland–Hodgman
// for a polygon, a parameter interval for a segment), and each clipped
// point's gap is its distance from the reference plane along the
// reference face's normal (along n for two parallel segments). It reports
// false when the shapes do not meet flat-on-flat, or when no clipped point
// is within the margin.
func flatManifold(sa, sb *convexShape, n r3.Vec, margin float64, dst []Point) ([]Point, bool) {
	var fa, fb flatFeature
	sa.flat(n, &fa)
	sb.flat(r3.Scale(-1, n), &fb)
	if fa.n < 2 || fb.n < 2 {
		return dst, false
	}
	ref, inc := &fa, &fb
	refIsA := true
	if fa.n < 3 && fb.n >= 3 {
		ref, inc, refIsA = &fb, &fa, false
	}
	if ref.n == 2 {
		// Two segments make a line contact only when parallel.
		ea, eb := r3.Sub(fa.p[1], fa.p[0]), r3.Sub(fb.p[1], fb.p[0])
		if r3.Norm(r3.Cross(ea, eb)) > flatTol*r3.Norm(ea)*r3.Norm(eb) {
			return dst, false
		}
	} else {
		// Measure gaps from the reference face's own plane, so that the
		// points are exact for a face within flatTol of the normal.
		nr := r3.Unit(r3.Cross(r3.Sub(ref.p[1], ref.p[0]), r3.Sub(ref.p[2], ref.p[0])))
		if r3.Dot(nr, n) < 0 {
			nr = r3.Scale(-1, nr)
		}
		n = nr
	}
	// Side planes of the reference feature, outward: s·x ≤ off inside.
	var sides [cylinderRingN]r3.Vec
	var offs [cylinderRingN]float64
	ns := 0
	if ref.n >= 3 {
		var c r3.Vec
		for i := 0; i < ref.n; i++ {
			c = r3.Add(c, ref.p[i])
		}
		c = r3.Scale(1/float64(ref.n), c)
		for i := 0; i < ref.n; i++ {
			p, q := ref.p[i], ref.p[(i+1)%ref.n]
			s := r3.Cross(r3.Sub(q, p), n)
			if r3.Dot(s, r3.Sub(c, p)) > 0 {
				s = r3.Scale(-1, s)
			}
			sides[ns], offs[ns] = s, r3.Dot(s, p)
			ns++
		}
	} else {
		e := r3.Sub(ref.p[1], ref.p[0])
		sides[0], offs[0] = r3.Scale(-1, e), -r3.Dot(e, ref.p[0])
		sides[1], offs[1] = e, r3.Dot(e, ref.p[1])
		ns = 2
	}

	var poly, tmp clipPoly
	if inc.n >= 3 {
		poly.n = inc.n
		for i := 0; i < inc.n; i++ {
			poly.v[i] = clipVert{p: inc.p[i], a: uint8(i), edge: uint8(i)}
		}
		in, out := &poly, &tmp
		for k := 0; k < ns && in.n > 0; k++ {
			clipAgainst(in, out, sides[k], offs[k], uint8(k))
			in, out = out, in
		}
		if in != &poly {
			poly = *in
		}
	} else {
		// Segment: clip its parameter interval.
		p0, p1 := inc.p[0], inc.p[1]
		lo, hi := 0.0, 1.0
		loPlane, hiPlane := -1, -1
		for k := 0; k < ns; k++ {
			d0 := r3.Dot(sides[k], p0) - offs[k]
			d1 := r3.Dot(sides[k], p1) - offs[k]
			switch {
			case d0 > 0 && d1 > 0:
				return dst, false
			case d0 > 0:
				if t := d0 / (d0 - d1); t > lo {
					lo, loPlane = t, k
				}
			case d1 > 0:
				if t := d0 / (d0 - d1); t < hi {
					hi, hiPlane = t, k
				}
			}
		}
		if lo > hi {
			return dst, false
		}
		d := r3.Sub(p1, p0)
		for e, tp := range [2]struct {
			t     float64
			plane int
		}{{lo, loPlane}, {hi, hiPlane}} {
			v := clipVert{p: r3.Add(p0, r3.Scale(tp.t, d)), a: uint8(e)}
			if tp.plane >= 0 {
				v.kind, v.b = 1, uint8(tp.plane)
			}
			poly.v[poly.n] = v
			poly.n++
		}
	}

	r0 := ref.p[0]
	start := len(dst)
	for i := 0; i < poly.n; i++ {
		v := &poly.v[i]
		var xa, xb r3.Vec
		var dist float64
		if refIsA {
			xb = v.p
			dist = r3.Dot(n, r3.Sub(xb, r0))
			xa = r3.Sub(xb, r3.Scale(dist, n))
		} else {
			xa = v.p
			dist = r3.Dot(n, r3.Sub(r0, xa))
			xb = r3.Add(xa, r3.Scale(dist, n))
		}
		gap := dist - sa.sweep - sb.sweep
		if gap >= margin {
			continue
		}
		surfA := r3.Add(xa, r3.Scale(sa.sweep, n))
		surfB := r3.Sub(xb, r3.Scale(sb.sweep, n))
		fr := flatTag | flatRef | ref.id<<flatIDShift
		fi := flatTag | inc.id<<flatIDShift | uint32(v.kind)<<flatKindShift | uint32(v.a)<<flatAShift | uint32(v.b)
		fa, fb := fr, fi
		if !refIsA {
			fa, fb = fi, fr
		}
		dst = append(dst, Point{
			Pos:     r3.Scale(0.5, r3.Add(surfA, surfB)),
			Normal:  n,
			Gap:     gap,
			Feature: packFeature(fa, fb),
		})
	}
	return dst, len(dst) > start
}
