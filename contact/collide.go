package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// Point is one contact point between shapes A and B.
type Point struct {
	// Pos is the world point midway between the two surfaces.
	Pos r3.Vec
	// Normal is the unit world normal pointing from A towards B (the
	// direction B must move to separate).
	Normal r3.Vec
	// Gap is the signed distance between the surfaces along Normal;
	// negative when penetrating.
	Gap float64
	// Feature identifies the pair of features (vertex, edge, face ids) that
	// made the point; it is stable while the contact mode holds.
	Feature uint32
}

// Feature layout: the high 16 bits name the feature of A, the low 16 bits
// that of B, so that swapping the shapes swaps the halves. Tag bits keep
// the routines apart: 0x4000 in each half for the convex-distance route,
// 0x2000 for its flat manifolds. Box–box contacts, whose clipped vertices
// belong to both boxes at once, use their own layout (featBoxBox).
func packFeature(fa, fb uint32) uint32 { return fa<<16 | fb&0xffff }

func swapFeature(f uint32) uint32 { return f>>16 | f<<16 }

// cylinderRingTol is the sine of the tilt between a cylinder's cap and a
// plane below which the cap rests flat on it and gets a ring of points;
// above it the deepest rim point is unique and is used instead.
const cylinderRingTol = 0.02

// cylinderRingN is the number of rim points of a cap resting flat.
const cylinderRingN = 8

// parallelTol is the sine of the angle between two segments (or a segment
// and a face) below which they are treated as parallel and get two points.
const parallelTol = 1e-3

// Collide appends to dst the contact points of shapes a and b placed at
// world poses pa and pb (pose of the shape itself, i.e.
// bodyPose.Mul(shape.Local)) whose gap is below margin, and returns dst.
// Either shape may be a Plane (plane = half-space local z ≤ 0, outward
// normal local +z); plane–plane gives nothing.
//
// Poses must be finite with unit rotations; a pose with a NaN or infinite
// component gives no points (rather than points made of NaN).
func Collide(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	if !finitePose(pa) || !finitePose(pb) {
		return dst
	}
	if a.Kind > b.Kind {
		n := len(dst)
		dst = collideOrdered(b, pb, a, pa, margin, dst)
		for i := n; i < len(dst); i++ {
			dst[i].Normal = r3.Scale(-1, dst[i].Normal)
			dst[i].Feature = swapFeature(dst[i].Feature)
		}
		return dst
	}
	return collideOrdered(a, pa, b, pb, margin, dst)
}

// collideOrdered handles a.Kind ≤ b.Kind.
func collideOrdered(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	switch a.Kind {
	case Plane:
		n := pa.Rot.Rotate(r3.Vec{Z: 1})
		switch b.Kind {
		case Sphere:
			return planeSphere(n, pa.Pos, pb.Pos, b.Radius, 0, margin, dst)
		case Capsule:
			return planeCapsule(n, pa.Pos, b, pb, margin, dst)
		case Box:
			return planeBox(n, pa.Pos, b, pb, margin, dst)
		case Cylinder:
			return planeCylinder(n, pa.Pos, b, pb, margin, dst)
		}
	case Sphere:
		switch b.Kind {
		case Sphere:
			return appendBelow(dst, sphereSphere(pa.Pos, a.Radius, pb.Pos, b.Radius, 0), margin)
		case Capsule:
			return sphereCapsule(a, pa, b, pb, margin, dst)
		case Box:
			return sphereBox(a, pa, b, pb, margin, dst)
		case Cylinder:
			return sphereCylinder(a, pa, b, pb, margin, dst)
		}
	case Capsule:
		switch b.Kind {
		case Capsule:
			return capsuleCapsule(a, pa, b, pb, margin, dst)
		case Box:
			return capsuleBox(a, pa, b, pb, margin, dst)
		case Cylinder:
			return convexPair(a, pa, b, pb, margin, dst)
		}
	case Box:
		switch b.Kind {
		case Box:
			return boxBox(a, pa, b, pb, margin, dst)
		case Cylinder:
			return convexPair(a, pa, b, pb, margin, dst)
		}
	case Cylinder:
		if b.Kind == Cylinder {
			return convexPair(a, pa, b, pb, margin, dst)
		}
	}
	return dst
}

func appendBelow(dst []Point, p Point, margin float64) []Point {
	if p.Gap < margin {
		dst = append(dst, p)
	}
	return dst
}

// planeSphere appends the contact of the plane through o with outward
// normal n and the sphere of centre c and radius r.
func planeSphere(n, o, c r3.Vec, r float64, feature uint32, margin float64, dst []Point) []Point {
	gap := r3.Dot(n, r3.Sub(c, o)) - r
	if gap >= margin {
		return dst
	}
	return append(dst, Point{
		Pos:     r3.Sub(c, r3.Scale(r+gap/2, n)),
		Normal:  n,
		Gap:     gap,
		Feature: feature,
	})
}

// planeVertex appends the contact of the plane with a vertex p of B.
func planeVertex(n, o, p r3.Vec, feature uint32, margin float64, dst []Point) []Point {
	gap := r3.Dot(n, r3.Sub(p, o))
	if gap >= margin {
		return dst
	}
	return append(dst, Point{Pos: r3.Sub(p, r3.Scale(gap/2, n)), Normal: n, Gap: gap, Feature: feature})
}

func planeCapsule(n, o r3.Vec, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	w := r3.Scale(b.HalfLength, pb.Rot.Rotate(r3.Vec{Z: 1}))
	dst = planeSphere(n, o, r3.Sub(pb.Pos, w), b.Radius, 0, margin, dst)
	return planeSphere(n, o, r3.Add(pb.Pos, w), b.Radius, 1, margin, dst)
}

// boxCorner returns corner k of a box in its local frame: bit 0 of k picks
// the sign of x, bit 1 of y, bit 2 of z (set means positive).
func boxCorner(h r3.Vec, k int) r3.Vec {
	c := r3.Scale(-1, h)
	if k&1 != 0 {
		c.X = h.X
	}
	if k&2 != 0 {
		c.Y = h.Y
	}
	if k&4 != 0 {
		c.Z = h.Z
	}
	return c
}

func planeBox(n, o r3.Vec, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	for k := 0; k < 8; k++ {
		p := pb.Apply(boxCorner(b.HalfExtents, k))
		dst = planeVertex(n, o, p, uint32(k), margin, dst)
	}
	return dst
}

// planeCylinder gives each cap either its deepest rim point (cap tilted
// against the plane: unique and smooth in the pose) or, when the cap lies
// flat within cylinderRingTol, a ring of rim points fixed in the body so
// that a standing cylinder is held up all round.
func planeCylinder(n, o r3.Vec, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	m := pb.Rot.Mat()
	ex := r3.Vec{X: m[0], Y: m[3], Z: m[6]}
	ey := r3.Vec{X: m[1], Y: m[4], Z: m[7]}
	ez := r3.Vec{X: m[2], Y: m[5], Z: m[8]}
	// u points along the cap plane towards the half-space.
	u := r3.Sub(r3.Scale(r3.Dot(n, ez), ez), n)
	su := r3.Norm(u)
	for cap := 0; cap < 2; cap++ {
		s := float64(2*cap - 1)
		cc := r3.Add(pb.Pos, r3.Scale(s*b.HalfLength, ez))
		if su > cylinderRingTol {
			p := r3.Add(cc, r3.Scale(b.Radius/su, u))
			dst = planeVertex(n, o, p, uint32(cap<<4|0xf), margin, dst)
			continue
		}
		for k := 0; k < cylinderRingN; k++ {
			sn, cs := math.Sincos(2 * math.Pi * float64(k) / cylinderRingN)
			p := r3.Add(cc, r3.Add(r3.Scale(b.Radius*cs, ex), r3.Scale(b.Radius*sn, ey)))
			dst = planeVertex(n, o, p, uint32(cap<<4|k), margin, dst)
		}
	}
	return dst
}

// sphereSphere returns the contact of spheres (ca, ra) and (cb, rb). When
// the centres coincide the normal is world +z, an arbitrary but fixed
// choice.
func sphereSphere(ca r3.Vec, ra float64, cb r3.Vec, rb float64, feature uint32) Point {
	d := r3.Sub(cb, ca)
	dist := r3.Norm(d)
	n := r3.Vec{Z: 1}
	if dist > 0 {
		n = r3.Scale(1/dist, d)
	}
	gap := dist - ra - rb
	return Point{Pos: r3.Add(ca, r3.Scale(ra+gap/2, n)), Normal: n, Gap: gap, Feature: feature}
}

// segmentParam returns the parameter t ∈ [−h, h] of the point c + t w
// (|w| = 1) closest to p, and which feature it lies on: 0 interior, 1 the
// −h end, 2 the +h end.
func segmentParam(c, w r3.Vec, h float64, p r3.Vec) (float64, uint32) {
	t := r3.Dot(r3.Sub(p, c), w)
	switch {
	case t <= -h:
		return -h, 1
	case t >= h:
		return h, 2
	}
	return t, 0
}

func sphereCapsule(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	w := pb.Rot.Rotate(r3.Vec{Z: 1})
	t, f := segmentParam(pb.Pos, w, b.HalfLength, pa.Pos)
	q := r3.Add(pb.Pos, r3.Scale(t, w))
	return appendBelow(dst, sphereSphere(pa.Pos, a.Radius, q, b.Radius, packFeature(0, f)), margin)
}

// closestSegments returns the parameters s ∈ [−ha, ha], t ∈ [−hb, hb] of
// the closest points ca + s wa and cb + t wb of two segments with unit
// directions (after Ericson, Real-Time Collision Detection, §5.1.9), and
// the features (0 interior, 1 low end, 2 high end) they lie on.
func closestSegments(ca, wa r3.Vec, ha float64, cb, wb r3.Vec, hb float64) (s, t float64, fa, fb uint32) {
	r := r3.Sub(ca, cb)
	b := r3.Dot(wa, wb)
	c := r3.Dot(wa, r)
	f := r3.Dot(wb, r)
	den := 1 - b*b
	if den > 1e-12 {
		s = clampSeg((b*f-c)/den, ha)
	}
	t = b*s + f
	if t < -hb || t > hb {
		t = clampSeg(t, hb)
		s = clampSeg(b*t-c, ha)
	}
	return s, t, segFeature(s, ha), segFeature(t, hb)
}

func clampSeg(x, h float64) float64 {
	if x < -h {
		return -h
	}
	if x > h {
		return h
	}
	return x
}

func segFeature(s, h float64) uint32 {
	switch {
	case s <= -h:
		return 1
	case s >= h:
		return 2
	}
	return 0
}

func capsuleCapsule(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	wa := pa.Rot.Rotate(r3.Vec{Z: 1})
	wb := pb.Rot.Rotate(r3.Vec{Z: 1})
	ha, hb := a.HalfLength, b.HalfLength
	// Nearly parallel segments touch along a line: give both ends of the
	// overlap so that one capsule can lie on another.
	if r3.Norm(r3.Cross(wa, wb)) < parallelTol {
		d := r3.Sub(pb.Pos, pa.Pos)
		o := r3.Dot(d, wa)
		e := math.Abs(r3.Dot(wa, wb)) * hb
		lo, hi := math.Max(-ha, o-e), math.Min(ha, o+e)
		if hi > lo {
			for k, s := range [2]float64{lo, hi} {
				p := r3.Add(pa.Pos, r3.Scale(s, wa))
				t, _ := segmentParam(pb.Pos, wb, hb, p)
				q := r3.Add(pb.Pos, r3.Scale(t, wb))
				dst = appendBelow(dst, sphereSphere(p, a.Radius, q, b.Radius, packFeature(uint32(8+k), 8)), margin)
			}
			return dst
		}
	}
	s, t, fa, fb := closestSegments(pa.Pos, wa, ha, pb.Pos, wb, hb)
	p := r3.Add(pa.Pos, r3.Scale(s, wa))
	q := r3.Add(pb.Pos, r3.Scale(t, wb))
	return appendBelow(dst, sphereSphere(p, a.Radius, q, b.Radius, packFeature(fa, fb)), margin)
}

// Bounds returns the world axis-aligned bounding box of s at pose p grown
// by margin. Planes return an infinite box.
func Bounds(s *Shape, p Pose, margin float64) r3.Box {
	var e r3.Vec // half size of the box about p.Pos
	switch s.Kind {
	case Sphere:
		e = r3.Vec{X: s.Radius, Y: s.Radius, Z: s.Radius}
	case Capsule:
		w := p.Rot.Rotate(r3.Vec{Z: s.HalfLength})
		e = r3.Vec{X: math.Abs(w.X) + s.Radius, Y: math.Abs(w.Y) + s.Radius, Z: math.Abs(w.Z) + s.Radius}
	case Box:
		m := p.Rot.Mat()
		h := s.HalfExtents
		e = r3.Vec{
			X: math.Abs(m[0])*h.X + math.Abs(m[1])*h.Y + math.Abs(m[2])*h.Z,
			Y: math.Abs(m[3])*h.X + math.Abs(m[4])*h.Y + math.Abs(m[5])*h.Z,
			Z: math.Abs(m[6])*h.X + math.Abs(m[7])*h.Y + math.Abs(m[8])*h.Z,
		}
	case Cylinder:
		// A disc of radius r with unit normal w spans r·√(1 − w_k²) along
		// world axis k.
		w := p.Rot.Rotate(r3.Vec{Z: 1})
		ext := func(wk float64) float64 {
			return math.Abs(wk)*s.HalfLength + s.Radius*math.Sqrt(math.Max(0, 1-wk*wk))
		}
		e = r3.Vec{X: ext(w.X), Y: ext(w.Y), Z: ext(w.Z)}
	default:
		inf := math.Inf(1)
		return r3.Box{Min: r3.Vec{X: -inf, Y: -inf, Z: -inf}, Max: r3.Vec{X: inf, Y: inf, Z: inf}}
	}
	e = r3.Add(e, r3.Vec{X: margin, Y: margin, Z: margin})
	return r3.Box{Min: r3.Sub(p.Pos, e), Max: r3.Add(p.Pos, e)}
}

func finitePose(p Pose) bool {
	// x − x is 0 for finite x and NaN for NaN or ±Inf.
	s := p.Pos.X + p.Pos.Y + p.Pos.Z + p.Rot.W + p.Rot.X + p.Rot.Y + p.Rot.Z
	return s-s == 0
}
