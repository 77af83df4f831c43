package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// The convex-distance fallback treats each shape as a core (a point for a
// sphere, a segment for a capsule, the solid itself for a box or cylinder)
// swept by a radius. GJK (Gilbert–Johnson–Keerthi) finds the distance
// between the cores; the radii are subtracted afterwards, which keeps GJK
// exact on polytope cores and leaves only deep overlaps of the cores to
// EPA (the expanding polytope algorithm).

const (
	gjkMaxIter = 64
	// gjkRelTol stops GJK when the squared distance can fall by no more
	// than this fraction.
	gjkRelTol   = 1e-12
	epaMaxVerts = 64
	epaMaxFaces = 8 * epaMaxVerts
	epaMaxIter  = epaMaxVerts - 4
)

// convexShape is a posed shape as seen by GJK and EPA.
type convexShape struct {
	kind    ShapeKind
	pos     r3.Vec
	m       Mat3 // rotation: local to world
	half    r3.Vec
	radius  float64 // cylinder radius
	halfLen float64 // capsule or cylinder half length
	sweep   float64 // radius swept around the core
	size    float64 // a length scale for tolerances
}

func makeConvex(s *Shape, p Pose) convexShape {
	c := convexShape{kind: s.Kind, pos: p.Pos, m: p.Rot.Mat(), halfLen: s.HalfLength}
	switch s.Kind {
	case Sphere:
		c.sweep = s.Radius
		c.size = s.Radius
	case Capsule:
		c.sweep = s.Radius
		c.size = s.Radius + s.HalfLength
	case Box:
		c.half = s.HalfExtents
		c.size = r3.Norm(s.HalfExtents)
	case Cylinder:
		c.radius = s.Radius
		c.size = math.Hypot(s.Radius, s.HalfLength)
	}
	return c
}

func (c *convexShape) axis() r3.Vec { return r3.Vec{X: c.m[2], Y: c.m[5], Z: c.m[8]} }

// support returns the point of the core farthest along v (ties resolved
// towards positive local coordinates).
func (c *convexShape) support(v r3.Vec) r3.Vec {
	switch c.kind {
	case Capsule:
		w := r3.Scale(c.halfLen, c.axis())
		if r3.Dot(v, w) < 0 {
			return r3.Sub(c.pos, w)
		}
		return r3.Add(c.pos, w)
	case Box:
		l := c.m.MulVecT(v)
		p := r3.Vec{X: math.Copysign(c.half.X, l.X), Y: math.Copysign(c.half.Y, l.Y), Z: math.Copysign(c.half.Z, l.Z)}
		return r3.Add(c.pos, c.m.MulVec(p))
	case Cylinder:
		l := c.m.MulVecT(v)
		p := r3.Vec{Z: math.Copysign(c.halfLen, l.Z)}
		if rho := planarNorm(l); rho > 0 {
			p.X, p.Y = c.radius*l.X/rho, c.radius*l.Y/rho
		}
		return r3.Add(c.pos, c.m.MulVec(p))
	}
	return c.pos
}

// featureTol is the sine of the angle within which a direction counts as
// perpendicular to a face or parallel to an edge when naming features.
const featureTol = 1e-6

// supportFeature names the feature of the core that is farthest along the
// unit direction v: for a box the per-axis signs (0 for an axis
// perpendicular to v, so faces and edges get their own ids), for a
// cylinder cap face, side line or rim, for a capsule its end or side.
func (c *convexShape) supportFeature(v r3.Vec) uint32 {
	sgn := func(x float64) uint32 {
		switch {
		case x > featureTol:
			return 2
		case x < -featureTol:
			return 1
		}
		return 0
	}
	switch c.kind {
	case Capsule:
		return sgn(r3.Dot(v, c.axis()))
	case Box:
		l := c.m.MulVecT(v)
		return sgn(l.X) + 3*sgn(l.Y) + 9*sgn(l.Z)
	case Cylinder:
		l := c.m.MulVecT(v)
		f := sgn(l.Z)
		if planarNorm(l) > featureTol {
			f += 4
		}
		return f
	}
	return 0
}

type simplexVertex struct{ w, a, b r3.Vec }

type gjkSimplex struct {
	v   [4]simplexVertex
	lam [4]float64
	n   int
}

// keep reduces the simplex to the vertices listed in idx with weights lam.
func (s *gjkSimplex) keep(idx [4]int, lam [4]float64, n int) r3.Vec {
	var out [4]simplexVertex
	var v r3.Vec
	for i := 0; i < n; i++ {
		out[i] = s.v[idx[i]]
		s.lam[i] = lam[i]
		v = r3.Add(v, r3.Scale(lam[i], out[i].w))
	}
	s.v = out
	s.n = n
	return v
}

// closestTriangle finds the point of triangle (i, j, k) of the simplex
// closest to the origin (Ericson, Real-Time Collision Detection, §5.1.5),
// returning its support indices and weights.
func (s *gjkSimplex) closestTriangle(i, j, k int) (idx [4]int, lam [4]float64, n int) {
	a, b, c := s.v[i].w, s.v[j].w, s.v[k].w
	ab, ac := r3.Sub(b, a), r3.Sub(c, a)
	ap := r3.Scale(-1, a)
	d1, d2 := r3.Dot(ab, ap), r3.Dot(ac, ap)
	if d1 <= 0 && d2 <= 0 {
		return [4]int{i}, [4]float64{1}, 1
	}
	bp := r3.Scale(-1, b)
	d3, d4 := r3.Dot(ab, bp), r3.Dot(ac, bp)
	if d3 >= 0 && d4 <= d3 {
		return [4]int{j}, [4]float64{1}, 1
	}
	vc := d1*d4 - d3*d2
	if vc <= 0 && d1 >= 0 && d3 <= 0 {
		t := d1 / (d1 - d3)
		return [4]int{i, j}, [4]float64{1 - t, t}, 2
	}
	cp := r3.Scale(-1, c)
	d5, d6 := r3.Dot(ab, cp), r3.Dot(ac, cp)
	if d6 >= 0 && d5 <= d6 {
		return [4]int{k}, [4]float64{1}, 1
	}
	vb := d5*d2 - d1*d6
	if vb <= 0 && d2 >= 0 && d6 <= 0 {
		t := d2 / (d2 - d6)
		return [4]int{i, k}, [4]float64{1 - t, t}, 2
	}
	va := d3*d6 - d5*d4
	if va <= 0 && d4-d3 >= 0 && d5-d6 >= 0 {
		t := (d4 - d3) / ((d4 - d3) + (d5 - d6))
		return [4]int{j, k}, [4]float64{1 - t, t}, 2
	}
	den := 1 / (va + vb + vc)
	v, w := vb*den, vc*den
	return [4]int{i, j, k}, [4]float64{1 - v - w, v, w}, 3
}

// closest replaces the simplex by its smallest sub-simplex containing the
// point closest to the origin and returns that point; inside reports that
// the origin lies in a full tetrahedron.
func (s *gjkSimplex) closest() (v r3.Vec, inside bool) {
	switch s.n {
	case 1:
		s.lam[0] = 1
		return s.v[0].w, false
	case 2:
		a, b := s.v[0].w, s.v[1].w
		ab := r3.Sub(b, a)
		den := r3.Norm2(ab)
		t := 0.0
		if den > 0 {
			t = -r3.Dot(a, ab) / den
		}
		switch {
		case t <= 0:
			return s.keep([4]int{0}, [4]float64{1}, 1), false
		case t >= 1:
			return s.keep([4]int{1}, [4]float64{1}, 1), false
		}
		return s.keep([4]int{0, 1}, [4]float64{1 - t, t}, 2), false
	case 3:
		idx, lam, n := s.closestTriangle(0, 1, 2)
		return s.keep(idx, lam, n), false
	}
	// Tetrahedron (Ericson §5.1.6): test the faces the origin lies
	// outside of; if none, the origin is inside.
	faces := [4][4]int{{0, 1, 2, 3}, {0, 2, 3, 1}, {0, 3, 1, 2}, {1, 3, 2, 0}}
	best := math.Inf(1)
	var bIdx [4]int
	var bLam [4]float64
	bn := 0
	for _, f := range faces {
		a := s.v[f[0]].w
		nrm := r3.Cross(r3.Sub(s.v[f[1]].w, a), r3.Sub(s.v[f[2]].w, a))
		sp := -r3.Dot(a, nrm)
		sd := r3.Dot(r3.Sub(s.v[f[3]].w, a), nrm)
		if sp*sd > 0 {
			continue // origin on the same side as the opposite vertex
		}
		if sd == 0 && sp == 0 {
			continue
		}
		idx, lam, n := s.closestTriangle(f[0], f[1], f[2])
		var q r3.Vec
		for i := 0; i < n; i++ {
			q = r3.Add(q, r3.Scale(lam[i], s.v[idx[i]].w))
		}
		if d := r3.Norm2(q); d < best {
			best, bIdx, bLam, bn = d, idx, lam, n
		}
	}
	if bn == 0 {
		s.lam = [4]float64{}
		return r3.Vec{}, true
	}
	return s.keep(bIdx, bLam, bn), false
}

// witnesses returns the points of A and B weighted as the simplex's
// closest point.
func (s *gjkSimplex) witnesses() (a, b r3.Vec) {
	for i := 0; i < s.n; i++ {
		a = r3.Add(a, r3.Scale(s.lam[i], s.v[i].a))
		b = r3.Add(b, r3.Scale(s.lam[i], s.v[i].b))
	}
	return a, b
}

// gjk runs GJK on the cores of sa and sb. It returns the closest point v
// of the Minkowski difference A − B to the origin (so ‖v‖ is the core
// distance), far = true as soon as the distance is proven to exceed
// cutoff, and overlap = true when the cores overlap or touch within
// tolerance (the caller then runs EPA on the simplex).
func gjk(sa, sb *convexShape, cutoff float64, sx *gjkSimplex) (v r3.Vec, far, overlap bool) {
	v = r3.Sub(sa.pos, sb.pos)
	if r3.Norm2(v) == 0 {
		v = r3.Vec{X: 1}
	}
	tol := 1e-10 * (sa.size + sb.size)
	sx.n = 0
	vv := math.Inf(1)
	for iter := 0; iter < gjkMaxIter; iter++ {
		a := sa.support(r3.Scale(-1, v))
		b := sb.support(v)
		w := r3.Sub(a, b)
		if sx.n > 0 {
			vw := r3.Dot(v, w)
			if vw > 0 && vw*vw > cutoff*cutoff*vv {
				return v, true, false
			}
			if vv-vw <= gjkRelTol*vv {
				break
			}
			dup := false
			for i := 0; i < sx.n; i++ {
				if sx.v[i].w == w {
					dup = true
				}
			}
			if dup {
				break
			}
		}
		prev := *sx
		sx.v[sx.n] = simplexVertex{w: w, a: a, b: b}
		sx.n++
		nv, inside := sx.closest()
		if inside {
			return nv, false, true
		}
		nvv := r3.Norm2(nv)
		if nvv >= vv {
			// No progress: rounding in a nearly degenerate simplex. The
			// previous simplex holds the best answer.
			*sx = prev
			break
		}
		v, vv = nv, nvv
		if nvv <= tol*tol {
			return v, false, true
		}
	}
	return v, false, false
}

// epaFace is a triangle of the expanding polytope, wound outwards. adj[e]
// is the face across edge e (from i[e] to i[(e+1)%3]) and adjEdge[e] that
// edge's index in it.
type epaFace struct {
	i       [3]uint16
	adj     [3]uint16
	adjEdge [3]uint8
	dead    bool
	n       r3.Vec
	d       float64
}

type epaEdge struct {
	f uint16
	e uint8
}

type epaPolytope struct {
	v       [epaMaxVerts]simplexVertex
	f       [epaMaxFaces]epaFace
	horizon [epaMaxFaces]epaEdge
	nv, nf  int
	nh      int
}

func (p *epaPolytope) supportVertex(sa, sb *convexShape, d r3.Vec) simplexVertex {
	a := sa.support(d)
	b := sb.support(r3.Scale(-1, d))
	return simplexVertex{w: r3.Sub(a, b), a: a, b: b}
}

func (p *epaPolytope) addFace(i, j, k uint16) int {
	a := p.v[i].w
	n := r3.Cross(r3.Sub(p.v[j].w, a), r3.Sub(p.v[k].w, a))
	l := r3.Norm(n)
	f := epaFace{i: [3]uint16{i, j, k}}
	if l > 0 {
		f.n = r3.Scale(1/l, n)
		f.d = r3.Dot(f.n, a)
	} else {
		f.d = math.Inf(1) // degenerate sliver: never the nearest face
	}
	p.f[p.nf] = f
	p.nf++
	return p.nf - 1
}

func (p *epaPolytope) link(f int, e uint8, g int, h uint8) {
	p.f[f].adj[e], p.f[f].adjEdge[e] = uint16(g), h
	p.f[g].adj[h], p.f[g].adjEdge[h] = uint16(f), e
}

// silhouette walks the faces visible from w, starting across edge e of a
// face already removed, marking them dead and collecting the horizon:
// the edges of live faces that border dead ones (van den Bergen,
// Collision Detection in Interactive 3D Environments, §4.3.8).
func (p *epaPolytope) silhouette(f int, e uint8, w r3.Vec) {
	fc := &p.f[f]
	if fc.dead {
		return
	}
	if !math.IsInf(fc.d, 1) && r3.Dot(fc.n, r3.Sub(w, p.v[fc.i[0]].w)) <= 0 {
		p.horizon[p.nh] = epaEdge{uint16(f), e}
		p.nh++
		return
	}
	fc.dead = true
	e1, e2 := (e+1)%3, (e+2)%3
	p.silhouette(int(fc.adj[e1]), fc.adjEdge[e1], w)
	p.silhouette(int(fc.adj[e2]), fc.adjEdge[e2], w)
}

// epa expands the GJK simplex (which holds or touches the origin) into a
// polytope whose face nearest the origin gives the penetration depth d of
// the cores along the unit normal n (from A to B) and the witness points.
func epa(sa, sb *convexShape, sx *gjkSimplex, p *epaPolytope) (n r3.Vec, d float64, wa, wb r3.Vec, ok bool) {
	p.nv = sx.n
	copy(p.v[:], sx.v[:sx.n])
	scale := sa.size + sb.size
	// Grow a lower-dimensional simplex into a tetrahedron.
	if p.nv == 1 {
		for _, dir := range [6]r3.Vec{{X: 1}, {X: -1}, {Y: 1}, {Y: -1}, {Z: 1}, {Z: -1}} {
			v := p.supportVertex(sa, sb, dir)
			if r3.Norm(r3.Sub(v.w, p.v[0].w)) > 1e-9*scale {
				p.v[1] = v
				p.nv = 2
				break
			}
		}
	}
	if p.nv == 2 {
		d := r3.Sub(p.v[1].w, p.v[0].w)
		e := r3.Vec{X: 1}
		if math.Abs(d.Y) < math.Abs(d.X) && math.Abs(d.Y) <= math.Abs(d.Z) {
			e = r3.Vec{Y: 1}
		} else if math.Abs(d.Z) < math.Abs(d.X) {
			e = r3.Vec{Z: 1}
		}
		perp := r3.Unit(r3.Cross(d, e))
		q := QuatFromAxisAngle(d, math.Pi/3)
		for k := 0; k < 6; k++ {
			v := p.supportVertex(sa, sb, perp)
			if r3.Norm(r3.Cross(d, r3.Sub(v.w, p.v[0].w))) > 1e-9*scale*r3.Norm(d) {
				p.v[2] = v
				p.nv = 3
				break
			}
			perp = q.Rotate(perp)
		}
	}
	if p.nv == 3 {
		nrm := r3.Cross(r3.Sub(p.v[1].w, p.v[0].w), r3.Sub(p.v[2].w, p.v[0].w))
		for _, s := range [2]float64{1, -1} {
			v := p.supportVertex(sa, sb, r3.Scale(s, nrm))
			if math.Abs(r3.Dot(r3.Sub(v.w, p.v[0].w), nrm)) > 1e-9*scale*r3.Norm(nrm) {
				p.v[3] = v
				p.nv = 4
				break
			}
		}
	}
	if p.nv != 4 {
		return n, 0, wa, wb, false
	}
	// Orient the tetrahedron's faces outwards.
	if r3.Dot(r3.Sub(p.v[3].w, p.v[0].w), r3.Cross(r3.Sub(p.v[1].w, p.v[0].w), r3.Sub(p.v[2].w, p.v[0].w))) > 0 {
		p.v[1], p.v[2] = p.v[2], p.v[1]
	}
	p.nf = 0
	p.addFace(0, 1, 2) // f0
	p.addFace(0, 3, 1) // f1
	p.addFace(0, 2, 3) // f2
	p.addFace(1, 3, 2) // f3
	p.link(0, 0, 1, 2) // edge 0–1
	p.link(0, 1, 3, 2) // edge 1–2
	p.link(0, 2, 2, 0) // edge 2–0
	p.link(1, 0, 2, 2) // edge 0–3
	p.link(1, 1, 3, 0) // edge 3–1
	p.link(2, 1, 3, 1) // edge 2–3

	tol := 1e-10 * scale
	var bf epaFace
	for iter := 0; ; iter++ {
		best := -1
		for i := 0; i < p.nf; i++ {
			if !p.f[i].dead && (best < 0 || p.f[i].d < p.f[best].d) {
				best = i
			}
		}
		if best < 0 {
			return n, 0, wa, wb, false
		}
		bf = p.f[best]
		if iter >= epaMaxIter || p.nv == epaMaxVerts || math.IsInf(bf.d, 1) {
			break
		}
		w := p.supportVertex(sa, sb, bf.n)
		if r3.Dot(w.w, bf.n)-bf.d <= tol {
			break
		}
		if p.nf+epaMaxVerts > epaMaxFaces {
			break // out of room for another cone: keep this answer
		}
		// Remove the faces w sees and cone their horizon to w.
		p.nh = 0
		p.f[best].dead = true
		for e := uint8(0); e < 3; e++ {
			p.silhouette(int(bf.adj[e]), bf.adjEdge[e], w.w)
		}
		nw := uint16(p.nv)
		p.v[p.nv] = w
		p.nv++
		first := p.nf
		for k := 0; k < p.nh; k++ {
			h := p.horizon[k]
			g := &p.f[h.f]
			a, b := g.i[(h.e+1)%3], g.i[h.e]
			nf := p.addFace(a, b, nw)
			p.link(nf, 0, int(h.f), h.e)
		}
		// Join the new faces to each other: edge 1 (b→w) of one meets
		// edge 2 (w→a) of the face whose a is that b.
		for f := first; f < p.nf; f++ {
			b := p.f[f].i[1]
			for g := first; g < p.nf; g++ {
				if p.f[g].i[0] == b {
					p.link(f, 1, g, 2)
					break
				}
			}
		}
	}
	if math.IsInf(bf.d, 1) {
		return n, 0, wa, wb, false
	}
	// Barycentric coordinates of the origin's projection on the face.
	a, b, c := p.v[bf.i[0]], p.v[bf.i[1]], p.v[bf.i[2]]
	q := r3.Scale(bf.d, bf.n)
	v0, v1, v2 := r3.Sub(b.w, a.w), r3.Sub(c.w, a.w), r3.Sub(q, a.w)
	d00, d01, d11 := r3.Dot(v0, v0), r3.Dot(v0, v1), r3.Dot(v1, v1)
	d20, d21 := r3.Dot(v2, v0), r3.Dot(v2, v1)
	den := d00*d11 - d01*d01
	lv := (d11*d20 - d01*d21) / den
	lw := (d00*d21 - d01*d20) / den
	lu := 1 - lv - lw
	wa = r3.Add(r3.Add(r3.Scale(lu, a.a), r3.Scale(lv, b.a)), r3.Scale(lw, c.a))
	wb = r3.Add(r3.Add(r3.Scale(lu, a.b), r3.Scale(lv, b.b)), r3.Scale(lw, c.b))
	return bf.n, bf.d, wa, wb, true
}

// convexPair is the general route for pairs without a closed form: GJK on
// the cores for the distance, EPA when the cores overlap.
func convexPair(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	sa, sb := makeConvex(a, pa), makeConvex(b, pb)
	var sx gjkSimplex
	v, far, overlap := gjk(&sa, &sb, margin+sa.sweep+sb.sweep, &sx)
	if far {
		return dst
	}
	var n, ca, cb r3.Vec
	var core float64
	if !overlap {
		core = r3.Norm(v)
		n = r3.Scale(-1/core, v)
		ca, cb = sx.witnesses()
	} else {
		var poly epaPolytope
		var d float64
		var ok bool
		n, d, ca, cb, ok = epa(&sa, &sb, &sx, &poly)
		if !ok {
			return dst
		}
		core = -d
	}
	if sa.kind == Cylinder || sb.kind == Cylinder {
		n, core, ca, cb = polishCurved(&sa, &sb, n, core, ca, cb)
	}
	gap := core - sa.sweep - sb.sweep
	if gap >= margin {
		return dst
	}
	if sa.kind == Cylinder || sb.kind == Cylinder {
		// The closed forms make their own manifolds; here only pairs
		// with a cylinder need one.
		if out, ok := flatManifold(&sa, &sb, n, margin, dst); ok {
			return out
		}
	}
	surfA := r3.Add(ca, r3.Scale(sa.sweep, n))
	surfB := r3.Sub(cb, r3.Scale(sb.sweep, n))
	return append(dst, Point{
		Pos:     r3.Scale(0.5, r3.Add(surfA, surfB)),
		Normal:  n,
		Gap:     gap,
		Feature: packFeature(0x4000|sa.supportFeature(n), 0x4000|sb.supportFeature(r3.Scale(-1, n))),
	})
}

// supportJacobian returns the derivative of the core's support point with
// respect to the unit direction m. Only a cylinder's rim is curved; the
// other cores have piecewise constant supports.
func (c *convexShape) supportJacobian(m r3.Vec) Mat3 {
	if c.kind != Cylinder {
		return Mat3{}
	}
	l := c.m.MulVecT(m)
	rho := planarNorm(l)
	if rho <= featureTol {
		return Mat3{}
	}
	ux, uy := l.X/rho, l.Y/rho
	k := c.radius / rho
	// k (P − u uᵀ) with P the projection on the local xy plane.
	jl := Mat3{k * (1 - ux*ux), -k * ux * uy, 0, -k * ux * uy, k * (1 - uy*uy), 0, 0, 0, 0}
	return c.m.Mul(jl).Mul(c.m.T())
}

// uniqueSupport reports whether the core's farthest point along m is
// unique (a vertex, a curved rim point, a segment end, a sphere centre).
func (c *convexShape) uniqueSupport(m r3.Vec) bool {
	var k [3]r3.Vec
	return c.kinks(m, featureTol, &k, 0) == 0
}

// kinks appends to k, from index n, the unit directions c for which the
// support function of the core has a kink across the plane m·c = 0 at m
// (within tol): a segment's axis when m is perpendicular to it, a box's
// axes along which m has no component, a cylinder's axis at its side and
// its cap's two in-plane axes at a cap. It returns the new count.
func (c *convexShape) kinks(m r3.Vec, tol float64, k *[3]r3.Vec, n int) int {
	add := func(v r3.Vec) {
		if n < len(k) {
			k[n] = v
			n++
		}
	}
	col := func(i int) r3.Vec { return r3.Vec{X: c.m[i], Y: c.m[3+i], Z: c.m[6+i]} }
	switch c.kind {
	case Capsule:
		if math.Abs(r3.Dot(m, c.axis())) <= tol {
			add(c.axis())
		}
	case Box:
		l := c.m.MulVecT(m)
		for i := 0; i < 3; i++ {
			if math.Abs(vecAt(l, i)) <= tol {
				add(col(i))
			}
		}
	case Cylinder:
		l := c.m.MulVecT(m)
		if math.Abs(l.Z) <= tol {
			add(col(2))
		}
		if planarNorm(l) <= tol {
			add(col(0))
			add(col(1))
		}
	}
	return n
}

// kinkTol is how close to a kink a GJK or EPA normal may be for the
// polish to put it exactly on the kink (EPA's normals on curved cores
// carry errors of order 1e-4).
const kinkTol = 1e-3

// polishCurved sharpens a GJK or EPA answer when a curved cylinder rim is
// involved: there GJK converges only linearly, and its normal carries
// about the square root of its distance tolerance, while EPA's facets are
// coarser still. The signed core gap is −min h(m) over unit m, with
// h(m) = m·(s_A(m) − s_B(−m)) the support function of A − B (its minimiser
// is the normal from A to B, whether or not the cores overlap). Newton's
// method on the unit sphere uses the support Jacobians for the Hessian. If
// the minimum sits on a kink of h (a flat side or an edge of either core),
// the search is confined to the kink, where h is smooth again. A step is
// kept only if it does not raise h, and the answer only if the gradient
// vanishes, so the polish cannot make a result worse.
func polishCurved(sa, sb *convexShape, n r3.Vec, core float64, ca, cb r3.Vec) (r3.Vec, float64, r3.Vec, r3.Vec) {
	if m, h, ok := newtonOnSphere(sa, sb, n, nil, 0); ok {
		a, b := polishWitness(sa, sb, m, h, ca, cb)
		return m, -h, a, b
	}
	// Kinks: a face (two kinks of one core) fixes the normal by itself;
	// otherwise the kinks of both cores constrain it together.
	var ka, kb [3]r3.Vec
	na := sa.kinks(n, kinkTol, &ka, 0)
	nb := sb.kinks(r3.Scale(-1, n), kinkTol, &kb, 0)
	var k [3]r3.Vec
	nk := 0
	switch {
	case na >= 2:
		k, nk = ka, na
	case nb >= 2:
		k, nk = kb, nb
	default:
		k, nk = ka, na
		for i := 0; i < nb; i++ {
			k[nk] = kb[i]
			nk++
		}
	}
	// Orthonormalise the kink directions (Gram–Schmidt), dropping repeats.
	var c [2]r3.Vec
	nc := 0
	for i := 0; i < nk && nc < 2; i++ {
		v := k[i]
		for j := 0; j < nc; j++ {
			v = r3.Sub(v, r3.Scale(r3.Dot(v, c[j]), c[j]))
		}
		if l := r3.Norm(v); l > 1e-6 {
			c[nc] = r3.Scale(1/l, v)
			nc++
		}
	}
	var m r3.Vec
	var h float64
	switch nc {
	case 0:
		return n, core, ca, cb
	case 1:
		m = r3.Unit(r3.Sub(n, r3.Scale(r3.Dot(n, c[0]), c[0])))
		var ok bool
		if m, h, ok = newtonOnSphere(sa, sb, m, &c[0], 1); !ok {
			return n, core, ca, cb
		}
	default:
		// Two kinks fix the direction: a face, or two crossing edges.
		m = r3.Unit(r3.Cross(c[0], c[1]))
		if r3.Dot(m, n) < 0 {
			m = r3.Scale(-1, m)
		}
		h = r3.Dot(m, r3.Sub(sa.support(m), sb.support(r3.Scale(-1, m))))
	}
	a, b := polishWitness(sa, sb, m, h, ca, cb)
	return m, -h, a, b
}

// newtonOnSphere minimises h(m) from m, keeping m·c = 0 for the nc given
// constraint directions (0 or 1). It reports the minimiser, h there and
// whether the projected gradient vanished.
func newtonOnSphere(sa, sb *convexShape, m r3.Vec, c *r3.Vec, nc int) (r3.Vec, float64, bool) {
	hOf := func(m r3.Vec) (float64, r3.Vec) {
		w := r3.Sub(sa.support(m), sb.support(r3.Scale(-1, m)))
		return r3.Dot(m, w), w
	}
	// Stop at a gradient of tol; accept down to loose, where rounding in
	// h stalls the line search (the normal is then good to about
	// loose/curvature).
	tol := 1e-12 * (sa.size + sb.size)
	loose := 1e-9 * (sa.size + sb.size)
	h, w := hOf(m)
	gnorm := math.Inf(1)
	for iter := 0; iter < 12; iter++ {
		// Basis of the free directions: tangent to the sphere and, with a
		// constraint, perpendicular to it.
		var t1, t2 r3.Vec
		free := 2
		if nc == 1 {
			t1 = r3.Unit(r3.Cross(*c, m))
			free = 1
		} else {
			t1 = r3.Cross(m, r3.Vec{X: 1})
			if r3.Norm2(t1) < 0.1 {
				t1 = r3.Cross(m, r3.Vec{Y: 1})
			}
			t1 = r3.Unit(t1)
			t2 = r3.Cross(m, t1)
		}
		g1, g2 := r3.Dot(t1, w), r3.Dot(t2, w)
		if gnorm = math.Sqrt(g1*g1 + g2*g2); gnorm <= tol {
			return m, h, true
		}
		j := sa.supportJacobian(m).Add(sb.supportJacobian(r3.Scale(-1, m)))
		h11 := r3.Dot(t1, j.MulVec(t1)) - h
		var step r3.Vec
		if free == 1 {
			if !(h11 > 0) {
				break
			}
			step = r3.Scale(-g1/h11, t1)
		} else {
			h12 := r3.Dot(t1, j.MulVec(t2))
			h22 := r3.Dot(t2, j.MulVec(t2)) - h
			det := h11*h22 - h12*h12
			if !(h11 > 0 && det > 0) {
				break // not locally convex: Newton would not descend
			}
			d1 := -(h22*g1 - h12*g2) / det
			d2 := -(h11*g2 - h12*g1) / det
			step = r3.Add(r3.Scale(d1, t1), r3.Scale(d2, t2))
		}
		improved := false
		for k := 0; k < 6; k++ {
			mt := r3.Unit(r3.Add(m, step))
			if ht, wt := hOf(mt); ht <= h {
				m, h, w, improved = mt, ht, wt, true
				break
			}
			step = r3.Scale(0.5, step)
		}
		if !improved {
			break
		}
	}
	return m, h, gnorm <= loose
}

// polishWitness returns the witness points on the cores at the polished
// normal m, from whichever support is unique there; when neither is (edge
// on edge, face on side), the old witnesses' midpoint is kept and the
// points are set apart by the new gap along m.
func polishWitness(sa, sb *convexShape, m r3.Vec, h float64, ca, cb r3.Vec) (r3.Vec, r3.Vec) {
	ua, ub := sa.uniqueSupport(m), sb.uniqueSupport(r3.Scale(-1, m))
	switch {
	case ua && ub:
		return sa.support(m), sb.support(r3.Scale(-1, m))
	case ua:
		a := sa.support(m)
		return a, r3.Sub(a, r3.Scale(h, m))
	case ub:
		b := sb.support(r3.Scale(-1, m))
		return r3.Add(b, r3.Scale(h, m)), b
	}
	mid := r3.Scale(0.5, r3.Add(ca, cb))
	return r3.Add(mid, r3.Scale(h/2, m)), r3.Sub(mid, r3.Scale(h/2, m))
}
