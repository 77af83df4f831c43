package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// The pairs Collide sends to GJK/EPA (capsule, box or cylinder against a
// cylinder) have no closed form, but their single points carry the
// support feature of each core along the normal (supportFeature). Each is
// rebuilt here as a primitive fixed in its body: a point (box corner,
// capsule end), a line (box edge, capsule axis, or a cylinder's axis swept
// by its radius for its side), a circle (cylinder rim) or a plane (box
// face, cylinder cap). The witness points x_A(u_A), x_B(u_B), with u the
// primitives' parameters, satisfy the closest-point conditions
// F(u) = [∂x_A/∂u · d; ∂x_B/∂u · d] = 0 with d = x_B − x_A, and the implicit
// function theorem gives du = −F_u⁻¹ F_θ for a pose tangent θ. The normal
// is then the plane's normal, the unit cross product of the two feature
// tangents (when they span two directions, so it stays defined at zero
// gap), or the unit witness difference (point against a line or circle).

type primKind uint8

const (
	primPoint primKind = iota
	primLine
	primCircle
	primPlane
)

// prim is a feature of a core in its body's local frame: the point c, the
// line c + u e1, the circle c + r(cos u e1 + sin u e2), or the plane
// c + u₀ e1 + u₁ e2. sweep is the radius swept about it.
type prim struct {
	kind   primKind
	f      *tframe
	c      r3.Vec
	e1, e2 r3.Vec
	r      float64
	sweep  float64
}

func (p *prim) nparam() int {
	switch p.kind {
	case primLine, primCircle:
		return 1
	case primPlane:
		return 2
	}
	return 0
}

// at returns the world point at parameters u (with tangents).
func (p *prim) at(u0, u1 tnum) tvec {
	x := tconst(p.c)
	switch p.kind {
	case primLine:
		x = tAdd(x, tScale(u0, tconst(p.e1)))
	case primCircle:
		s, c := math.Sincos(u0.v)
		cs := tnum{c, -s * u0.d}
		sn := tnum{s, c * u0.d}
		x = tAdd(x, tAdd(tScale(nScale(p.r, cs), tconst(p.e1)), tScale(nScale(p.r, sn), tconst(p.e2))))
	case primPlane:
		x = tAdd(x, tAdd(tScale(u0, tconst(p.e1)), tScale(u1, tconst(p.e2))))
	}
	return p.f.toWorld(x)
}

// tangent returns ∂x/∂u_i in the world at parameter u0 (with tangents).
func (p *prim) tangent(i int, u0 tnum) tvec {
	switch p.kind {
	case primCircle:
		s, c := math.Sincos(u0.v)
		// r(−sin u e1 + cos u e2)
		ms := tnum{-p.r * s, -p.r * c * u0.d}
		cs := tnum{p.r * c, -p.r * s * u0.d}
		return p.f.dirToWorld(tAdd(tScale(ms, tconst(p.e1)), tScale(cs, tconst(p.e2))))
	case primPlane:
		if i == 1 {
			return p.f.dir(p.e2)
		}
	}
	return p.f.dir(p.e1)
}

// curvature returns ∂²x/∂u_i² (values only; zero but for a circle).
func (p *prim) curvature(u0 float64) r3.Vec {
	if p.kind != primCircle {
		return r3.Vec{}
	}
	s, c := math.Sincos(u0)
	return p.f.m.MulVec(r3.Add(r3.Scale(-p.r*c, p.e1), r3.Scale(-p.r*s, p.e2)))
}

// params returns the parameters of the primitive's point nearest the
// world point w.
func (p *prim) params(w r3.Vec) (u0, u1 float64) {
	x := r3.Sub(p.f.m.MulVecT(r3.Sub(w, p.f.pos)), p.c)
	switch p.kind {
	case primLine:
		return r3.Dot(x, p.e1), 0
	case primCircle:
		return math.Atan2(r3.Dot(x, p.e2), r3.Dot(x, p.e1)), 0
	case primPlane:
		return r3.Dot(x, p.e1), r3.Dot(x, p.e2)
	}
	return 0, 0
}

// corePrim rebuilds the support feature code f (supportFeature) of the
// core of shape s in frame fr as a primitive. ok is false for a code that
// names no feature.
func corePrim(s *Shape, fr *tframe, f uint32) (p prim, ok bool) {
	p.f = fr
	ex, ey, ez := r3.Vec{X: 1}, r3.Vec{Y: 1}, r3.Vec{Z: 1}
	switch s.Kind {
	case Capsule:
		p.sweep = s.Radius
		switch f {
		case 0:
			p.kind, p.e1 = primLine, ez
		case 1, 2:
			p.kind, p.c = primPoint, r3.Vec{Z: (2*float64(f) - 3) * s.HalfLength}
		default:
			return p, false
		}
	case Box:
		var zero [3]int
		nz := 0
		for i := 0; i < 3; i++ {
			switch f % 3 {
			case 0:
				zero[nz] = i
				nz++
			case 1:
				setAt(&p.c, i, -vecAt(s.HalfExtents, i))
			case 2:
				setAt(&p.c, i, vecAt(s.HalfExtents, i))
			}
			f /= 3
		}
		switch nz {
		case 0:
			p.kind = primPoint
		case 1:
			p.kind, p.e1 = primLine, unitAt(zero[0])
		case 2:
			p.kind, p.e1, p.e2 = primPlane, unitAt(zero[0]), unitAt(zero[1])
		default:
			return p, false
		}
	case Cylinder:
		z := (2*float64(f&3) - 3) * s.HalfLength
		switch f {
		case 4:
			p.kind, p.e1, p.sweep = primLine, ez, s.Radius
		case 5, 6:
			p.kind, p.c, p.e1, p.e2, p.r = primCircle, r3.Vec{Z: z}, ex, ey, s.Radius
		case 1, 2:
			p.kind, p.c, p.e1, p.e2 = primPlane, r3.Vec{Z: z}, ex, ey
		default:
			return p, false
		}
	default:
		return p, false
	}
	return p, true
}

// tConvexPair differentiates a point of convexPair.
func tConvexPair(a *Shape, fa *tframe, b *Shape, fb *tframe, pt Point) (tvec, tvec, tnum, bool) {
	fA, fB := pt.Feature>>16, pt.Feature&0xffff
	if fA&0x4000 == 0 || fB&0x4000 == 0 {
		return inexact(convexTangentApprox(a, fa, b, fb, pt))
	}
	pa, okA := corePrim(a, fa, fA&^0x4000)
	pb, okB := corePrim(b, fb, fB&^0x4000)
	if !okA || !okB {
		return inexact(convexTangentApprox(a, fa, b, fb, pt))
	}
	if p, n, g, ok := primPairTangent(&pa, &pb, pt); ok {
		return p, n, g, true
	}
	return inexact(convexTangentApprox(a, fa, b, fb, pt))
}

func inexact(p, n tvec, g tnum) (tvec, tvec, tnum, bool) { return p, n, g, false }

// primPairTangent solves the closest-point conditions of two primitives
// by Newton's method from the point's witnesses (to sharpen the values
// Collide found iteratively) and differentiates them. It reports false
// for degenerate pairs: features that touch along a line or a face (a
// plane with a line or a plane; parallel lines), where the witnesses are
// not unique.
func primPairTangent(pa, pb *prim, pt Point) (tvec, tvec, tnum, bool) {
	na, nb := pa.nparam(), pb.nparam()
	if na+nb > 3 || (pa.kind == primPlane && pb.kind == primLine) || (pb.kind == primPlane && pa.kind == primLine) {
		return tvec{}, tvec{}, tnum{}, false
	}
	n0 := pt.Normal
	wa := r3.Sub(pt.Pos, r3.Scale(pt.Gap/2+pa.sweep, n0))
	wb := r3.Add(pt.Pos, r3.Scale(pt.Gap/2+pb.sweep, n0))
	var u [4]float64 // A's parameters, then B's
	u[0], u[1] = pa.params(wa)
	u[na], u[na+1] = pb.params(wb)
	nu := na + nb

	// Value and Jacobian of F at u, and the tangent of F at fixed u.
	eval := func(u *[4]float64) (F [3]float64, J [3][3]float64, Ft [3]float64) {
		ua0, ua1 := nconst(u[0]), nconst(u[1])
		ub0, ub1 := nconst(u[na]), nconst(u[na+1])
		xa, xb := pa.at(ua0, ua1), pb.at(ub0, ub1)
		d := tSub(xb, xa)
		var T [3]tvec
		var C [3]r3.Vec
		var sgn [3]float64
		for i := 0; i < na; i++ {
			T[i], C[i], sgn[i] = pa.tangent(i, ua0), pa.curvature(u[0]), -1
		}
		for i := 0; i < nb; i++ {
			T[na+i], C[na+i], sgn[na+i] = pb.tangent(i, ub0), pb.curvature(u[na]), 1
		}
		for i := 0; i < nu; i++ {
			f := tDot(T[i], d)
			F[i], Ft[i] = f.v, f.d
			for j := 0; j < nu; j++ {
				J[i][j] = sgn[j] * r3.Dot(T[i].v, T[j].v)
				if i == j {
					J[i][j] += r3.Dot(C[i], d.v)
				}
			}
		}
		return F, J, Ft
	}
	var F, Ft [3]float64
	var J [3][3]float64
	for iter := 0; iter < 8; iter++ {
		F, J, Ft = eval(&u)
		if nu == 0 {
			break
		}
		var du [3]float64
		if !solve3(&J, &F, nu, &du) {
			return tvec{}, tvec{}, tnum{}, false
		}
		small := true
		for i := 0; i < nu; i++ {
			u[i] -= du[i]
			if math.Abs(du[i]) > 1e-15*(1+math.Abs(u[i])) {
				small = false
			}
		}
		if small {
			break
		}
	}
	F, J, Ft = eval(&u)
	var du3 [3]float64
	if nu > 0 && !solve3(&J, &Ft, nu, &du3) {
		return tvec{}, tvec{}, tnum{}, false
	}
	var du [4]float64
	copy(du[:], du3[:nu])
	if na < 2 {
		// B's parameters start at na: move them out of A's second slot.
		copy(du[2:], du[na:na+nb])
		copy(u[2:], u[na:na+nb])
		du[na], u[na] = 0, 0
		if na == 0 {
			du[1], u[1] = 0, 0
		}
	}
	ua0, ua1 := tnum{u[0], -du[0]}, tnum{u[1], -du[1]}
	ub0, ub1 := tnum{u[2], -du[2]}, tnum{u[3], -du[3]}
	xa, xb := pa.at(ua0, ua1), pb.at(ub0, ub1)
	d := tSub(xb, xa)
	var n tvec
	switch {
	case pa.kind == primPlane:
		n = tCross(pa.tangent(0, ua0), pa.tangent(1, ua0))
	case pb.kind == primPlane:
		n = tCross(pb.tangent(0, ub0), pb.tangent(1, ub0))
	case nu == 2:
		n = tUnit(tCross(pa.tangent(0, ua0), pb.tangent(0, ub0)))
	default:
		n = tUnit(d)
	}
	if r3.Norm(n.v) < 0.5 {
		return tvec{}, tvec{}, tnum{}, false
	}
	if r3.Dot(n.v, n0) < 0 {
		n = tNeg(n)
	}
	gap := nAddC(tDot(n, d), -pa.sweep-pb.sweep)
	pos := tScaleC(0.5, tAdd(tAdd(xa, tScaleC(pa.sweep, n)), tSub(xb, tScaleC(pb.sweep, n))))
	return pos, n, gap, true
}

// solve3 solves the leading n×n block of J x = b by Gaussian elimination
// with partial pivoting; it reports false for a (nearly) singular J.
func solve3(J *[3][3]float64, b *[3]float64, n int, x *[3]float64) bool {
	a := *J
	r := *b
	scale := 0.0
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			scale = math.Max(scale, math.Abs(a[i][j]))
		}
	}
	for c := 0; c < n; c++ {
		p := c
		for i := c + 1; i < n; i++ {
			if math.Abs(a[i][c]) > math.Abs(a[p][c]) {
				p = i
			}
		}
		if !(math.Abs(a[p][c]) > 1e-10*scale) {
			return false
		}
		a[c], a[p] = a[p], a[c]
		r[c], r[p] = r[p], r[c]
		for i := c + 1; i < n; i++ {
			f := a[i][c] / a[c][c]
			for j := c; j < n; j++ {
				a[i][j] -= f * a[c][j]
			}
			r[i] -= f * r[c]
		}
	}
	for i := n - 1; i >= 0; i-- {
		s := r[i]
		for j := i + 1; j < n; j++ {
			s -= a[i][j] * x[j]
		}
		x[i] = s / a[i][i]
	}
	return true
}

// convexTangentApprox is the APPROXIMATE tangent used where the witnesses
// are not unique (features touching along a line or a face, and the
// flat-on-flat manifolds of cylinder pairs): the normal is held fixed
// (dNormal = 0), and the two surface points Pos ∓ Gap/2·Normal move as
// points fixed in their bodies. dGap = Normal·(dx_B − dx_A) is then the
// first-order change of the signed distance whenever the point is a true
// closest pair (Danskin's theorem), but dPos ignores sliding of the
// witnesses along the features and dNormal ignores any turn of the
// feature that sets the normal.
func convexTangentApprox(a *Shape, fa *tframe, b *Shape, fb *tframe, pt Point) (tvec, tvec, tnum) {
	n := pt.Normal
	sa := r3.Sub(pt.Pos, r3.Scale(pt.Gap/2, n))
	sb := r3.Add(pt.Pos, r3.Scale(pt.Gap/2, n))
	va := r3.Add(fa.v, r3.Cross(fa.w, r3.Sub(sa, fa.pos)))
	vb := r3.Add(fb.v, r3.Cross(fb.w, r3.Sub(sb, fb.pos)))
	return tvec{pt.Pos, r3.Scale(0.5, r3.Add(va, vb))}, tvec{v: n}, tnum{pt.Gap, r3.Dot(n, r3.Sub(vb, va))}
}
