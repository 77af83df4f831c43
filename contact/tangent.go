package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// Twist is a pose tangent in world axes: the velocity of the shape-frame
// origin and the angular velocity (a pose moves as Pos' = V, R' = [W]× R).
type Twist struct{ V, W r3.Vec }

// PointTangent returns the derivative of contact point pt — as produced by
// Collide(a, pa, b, pb, margin, …) for these shapes and poses — when the
// poses move with twists ta and tb, holding the contact mode (pt.Feature)
// fixed: the derivatives of pt.Pos, pt.Normal (dNormal ⊥ Normal) and
// pt.Gap.
//
// The derivative is exact (forward tangent propagation through the same
// closed form that made the point, with the branches Collide took at these
// poses) for every closed-form pair: plane with sphere, capsule, box and
// cylinder; sphere with sphere, capsule, box and cylinder; capsule with
// capsule and box; box with box (face manifolds and edge–edge points). For
// the pairs Collide hands to GJK/EPA (capsule, box or cylinder against a
// cylinder) the support features named by pt.Feature are rebuilt as points,
// lines, circles and planes, and the derivative follows from the implicit
// function theorem on their closest-point conditions; that too is exact.
// Two kinds of point are approximate, as noted at
// convexTangentApprox: a GJK point between features that touch along a
// line or a face (a segment lying on a face, two faces), and the
// flat-on-flat manifolds of cylinder pairs whose reference is a segment.
//
// PointTangent is linear in (ta, tb), allocates nothing and is
// deterministic. A point that Collide could not have produced for these
// shapes and poses gives zeros.
func PointTangent(a *Shape, pa Pose, b *Shape, pb Pose, pt Point, ta, tb Twist) (dPos, dNormal r3.Vec, dGap float64) {
	fa, fb := makeFrame(pa, ta), makeFrame(pb, tb)
	return pointTangentFrames(a, &fa, b, &fb, pt)
}

// pointTangentFrames is PointTangent with the posed, moving frames built.
func pointTangentFrames(a *Shape, fa *tframe, b *Shape, fb *tframe, pt Point) (dPos, dNormal r3.Vec, dGap float64) {
	if a.Kind > b.Kind {
		q := pt
		q.Normal = r3.Scale(-1, pt.Normal)
		q.Feature = swapFeature(pt.Feature)
		p, n, g, _ := tangentOrdered(b, fb, a, fa, q)
		return p.d, r3.Scale(-1, n.d), g.d
	}
	p, n, g, _ := tangentOrdered(a, fa, b, fb, pt)
	return p.d, n.d, g.d
}

// tangentExact reports whether PointTangent's answer for pt is exact
// rather than the approximation of convexTangentApprox.
func tangentExact(a *Shape, pa Pose, b *Shape, pb Pose, pt Point) bool {
	if a.Kind > b.Kind {
		a, pa, b, pb = b, pb, a, pa
		pt.Normal = r3.Scale(-1, pt.Normal)
		pt.Feature = swapFeature(pt.Feature)
	}
	fa, fb := makeFrame(pa, Twist{}), makeFrame(pb, Twist{})
	_, _, _, ok := tangentOrdered(a, &fa, b, &fb, pt)
	return ok
}

// tangentOrdered handles a.Kind ≤ b.Kind and returns the point's position,
// normal and gap as values with tangents.
func tangentOrdered(a *Shape, fa *tframe, b *Shape, fb *tframe, pt Point) (tvec, tvec, tnum, bool) {
	fA, fB := pt.Feature>>16, pt.Feature&0xffff
	switch a.Kind {
	case Plane:
		n := fa.dir(r3.Vec{Z: 1})
		o := fa.origin()
		switch b.Kind {
		case Sphere:
			return exact(tPlaneSphere(n, o, fb.origin(), b.Radius))
		case Capsule:
			z := b.HalfLength
			if fB == 0 {
				z = -z
			}
			return exact(tPlaneSphere(n, o, fb.point(r3.Vec{Z: z}), b.Radius))
		case Box:
			return exact(tPlaneVertex(n, o, fb.point(boxCorner(b.HalfExtents, int(fB&7)))))
		case Cylinder:
			return exact(tPlaneCylinder(n, o, b, fb, fB))
		}
	case Sphere:
		switch b.Kind {
		case Sphere:
			return exact(tSphereSphere(fa.origin(), a.Radius, fb.origin(), b.Radius))
		case Capsule:
			return exact(tSphereCapsule(a, fa, b, fb, fB))
		case Box:
			return exact(tSphereBox(a, fa, b, fb, fB))
		case Cylinder:
			return exact(tSphereCylinder(a, fa, b, fb, fB))
		}
	case Capsule:
		switch b.Kind {
		case Capsule:
			return exact(tCapsuleCapsule(a, fa, b, fb, fA, fB))
		case Box:
			return exact(tCapsuleBox(a, fa, b, fb, fA, fB))
		case Cylinder:
			return tConvexPair(a, fa, b, fb, pt)
		}
	case Box:
		switch b.Kind {
		case Box:
			if pt.Feature&featBoxEdge != 0 {
				return exact(tBoxBoxEdge(a, fa, b, fb, pt.Feature))
			}
			return exact(tBoxBoxFace(a, fa, b, fb, pt.Feature, pt.Pos, pt.Gap))
		case Cylinder:
			return tConvexPair(a, fa, b, fb, pt)
		}
	case Cylinder:
		if b.Kind == Cylinder {
			return tConvexPair(a, fa, b, fb, pt)
		}
	}
	return tvec{v: pt.Pos}, tvec{v: pt.Normal}, tnum{v: pt.Gap}, false
}

// exact marks a closed-form tangent as exact.
func exact(p, n tvec, g tnum) (tvec, tvec, tnum, bool) { return p, n, g, true }

// tnum is a scalar with its tangent (a forward-mode dual number).
type tnum struct{ v, d float64 }

// tvec is a vector with its tangent.
type tvec struct{ v, d r3.Vec }

func tconst(v r3.Vec) tvec  { return tvec{v: v} }
func nconst(x float64) tnum { return tnum{v: x} }

func tAdd(a, b tvec) tvec { return tvec{r3.Add(a.v, b.v), r3.Add(a.d, b.d)} }
func tSub(a, b tvec) tvec { return tvec{r3.Sub(a.v, b.v), r3.Sub(a.d, b.d)} }
func tNeg(a tvec) tvec    { return tvec{r3.Scale(-1, a.v), r3.Scale(-1, a.d)} }

// tScale returns s a.
func tScale(s tnum, a tvec) tvec {
	return tvec{r3.Scale(s.v, a.v), r3.Add(r3.Scale(s.d, a.v), r3.Scale(s.v, a.d))}
}

// tScaleC returns c a for a constant c.
func tScaleC(c float64, a tvec) tvec { return tvec{r3.Scale(c, a.v), r3.Scale(c, a.d)} }

func tDot(a, b tvec) tnum {
	return tnum{r3.Dot(a.v, b.v), r3.Dot(a.d, b.v) + r3.Dot(a.v, b.d)}
}

func tCross(a, b tvec) tvec {
	return tvec{r3.Cross(a.v, b.v), r3.Add(r3.Cross(a.d, b.v), r3.Cross(a.v, b.d))}
}

func tNorm(a tvec) tnum {
	n := r3.Norm(a.v)
	if n == 0 {
		return tnum{}
	}
	return tnum{n, r3.Dot(a.v, a.d) / n}
}

// tUnit returns a/|a|; its tangent is the part of a's tangent across a,
// divided by |a|.
func tUnit(a tvec) tvec {
	n := r3.Norm(a.v)
	if n == 0 {
		return tvec{}
	}
	u := r3.Scale(1/n, a.v)
	return tvec{u, r3.Scale(1/n, r3.Sub(a.d, r3.Scale(r3.Dot(u, a.d), u)))}
}

func nAdd(a, b tnum) tnum           { return tnum{a.v + b.v, a.d + b.d} }
func nSub(a, b tnum) tnum           { return tnum{a.v - b.v, a.d - b.d} }
func nMul(a, b tnum) tnum           { return tnum{a.v * b.v, a.d*b.v + a.v*b.d} }
func nScale(c float64, a tnum) tnum { return tnum{c * a.v, c * a.d} }
func nAddC(a tnum, c float64) tnum  { return tnum{a.v + c, a.d} }

func nDiv(a, b tnum) tnum {
	q := a.v / b.v
	return tnum{q, (a.d - q*b.d) / b.v}
}

func nHypot(a, b tnum) tnum {
	h := math.Hypot(a.v, b.v)
	if h == 0 {
		return tnum{}
	}
	return tnum{h, (a.v*a.d + b.v*b.d) / h}
}

// tAt returns component i of a.
func tAt(a tvec, i int) tnum { return tnum{vecAt(a.v, i), vecAt(a.d, i)} }

// tSetAt sets component i of a to x.
func tSetAt(a *tvec, i int, x tnum) {
	setAt(&a.v, i, x.v)
	setAt(&a.d, i, x.d)
}

// tframe is a posed frame moving with a twist. A point x fixed in the
// frame is at Pos + R x and moves at V + W × R x; a fixed direction u is
// R u and turns at W × R u.
type tframe struct {
	pos  r3.Vec
	m    Mat3
	v, w r3.Vec
}

func makeFrame(p Pose, t Twist) tframe {
	return tframe{pos: p.Pos, m: p.Rot.Mat(), v: t.V, w: t.W}
}

// origin returns the frame's origin.
func (f *tframe) origin() tvec { return tvec{f.pos, f.v} }

// point returns the world position of the frame-fixed point x.
func (f *tframe) point(x r3.Vec) tvec {
	rx := f.m.MulVec(x)
	return tvec{r3.Add(f.pos, rx), r3.Add(f.v, r3.Cross(f.w, rx))}
}

// dir returns the world direction of the frame-fixed direction u.
func (f *tframe) dir(u r3.Vec) tvec {
	ru := f.m.MulVec(u)
	return tvec{ru, r3.Cross(f.w, ru)}
}

// axis returns the world direction of local axis i.
func (f *tframe) axis(i int) tvec { return f.dir(unitAt(i)) }

// toWorld maps a moving local point x (local coordinates with their own
// tangent) to the world.
func (f *tframe) toWorld(x tvec) tvec {
	rx := f.m.MulVec(x.v)
	return tvec{r3.Add(f.pos, rx), r3.Add(r3.Add(f.v, r3.Cross(f.w, rx)), f.m.MulVec(x.d))}
}

// dirToWorld maps a moving local direction to the world.
func (f *tframe) dirToWorld(x tvec) tvec {
	rx := f.m.MulVec(x.v)
	return tvec{rx, r3.Add(r3.Cross(f.w, rx), f.m.MulVec(x.d))}
}

// toLocal maps a moving world point to the frame's local coordinates:
// x = Rᵀ(p − Pos), x' = Rᵀ(p' − V − W × (p − Pos)).
func (f *tframe) toLocal(p tvec) tvec {
	r := r3.Sub(p.v, f.pos)
	return tvec{f.m.MulVecT(r), f.m.MulVecT(r3.Sub(p.d, r3.Add(f.v, r3.Cross(f.w, r))))}
}

// dirToLocal maps a moving world direction to local coordinates.
func (f *tframe) dirToLocal(u tvec) tvec {
	return tvec{f.m.MulVecT(u.v), f.m.MulVecT(r3.Sub(u.d, r3.Cross(f.w, u.v)))}
}
