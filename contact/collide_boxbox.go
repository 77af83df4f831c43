package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// Box–box Feature layout (the pair is never swapped: both shapes are
// boxes, so A is always the first box passed to Collide):
//
//	bit 29      featBoxBox, set on every box–box point
//	bit 28      featRefIsB: B holds the reference face (face points)
//	bit 27      featBoxEdge: an edge–edge point
//
// Face points (bit 27 clear):
//
//	bits 0–2    reference face, 2·axis + 1 for the positive side
//	bits 3–5    incident face, same numbering
//	bits 6–7    kind of the clipped vertex (clipVert)
//	bits 8–10   its first id a (incident corner or edge, or side plane)
//	bits 11–13  its second id b (side plane)
//
// Edge points (bit 27 set):
//
//	bits 0–3    e = 3i + j for edge axis i of A and j of B
//	bits 4–6    which side of A's other axes the edge of A lies on
//	bits 8–10   the same for B's edge
//	bits 12–13  closest point of A's edge: interior or an end (segFeature)
//	bits 14–15  the same for B's edge
//
// The fields do not overlap, so two points with equal codes come from the
// same features. tangent_boxbox.go decodes this layout.
const (
	featBoxBox  = 1 << 29
	featRefIsB  = 1 << 28
	featBoxEdge = 1 << 27
)

// Tie margins of the axis choice. An axis must beat the one it replaces
// by more than boxTieRel·|best separation| + boxTieAbs: B's faces must so
// beat A's, and an edge axis the best face axis. Exact ties are common
// (two boxes face to face share an axis; an edge–edge axis of a vertical
// edge and a horizontal one is a face normal), and without a margin a
// 1e-6 turn picks the winner, turning a four-point face manifold into
// one edge point or swapping reference and incident box. 5 % of the
// depth keeps a resting contact's choice through ordinary changes of
// penetration; 1e-5 m (10 µm) is far above the rounding of the
// separations (1e-16 of the sizes) and the 1e-6 steps of finite
// differences, and far below any size of the scenes (mm and up). A face
// axis so kept over a slightly better edge axis overstates the depth by
// at most the margin.
const (
	boxTieRel = 0.05
	boxTieAbs = 1e-5
)

// edgeParallelTol is the sine of the angle between an edge of A and one of
// B below which their cross product is not used as an axis. For nearly
// parallel edges that axis is set by the small misalignment rather than
// by where the boxes are, and it can beat the face axes by no more than
// the misalignment times the edge lengths; those configurations (boxes
// level on one table, faces side by side) are face contacts.
const edgeParallelTol = 1e-3

// boxClipSlack widens the side planes of the reference face when the
// incident face is clipped, so that an incident edge lying in a side
// plane (the coplanar tops and bottoms of boxes side by side on a table)
// is inside it by boxClipSlack rather than on it: its corners stay corners
// under tiny moves instead of flipping between corners and crossings.
// Points may lie outside the reference face by up to this much; 1e-5 m is
// chosen as boxTieAbs is.
const boxClipSlack = boxTieAbs

// clipVert is a vertex of the incident face while it is clipped. Its
// feature is kind 0: incident vertex a; kind 1: incident edge a meets
// side plane b; kind 2: side planes a and b meet (a reference corner).
type clipVert struct {
	p          r3.Vec
	kind, a, b uint8
	// edge labels the polygon edge from this vertex to the next: below
	// sidePlane an incident edge, from sidePlane on a reference side plane.
	edge uint8
}

// sidePlane offsets the labels of reference side planes from those of
// incident edges.
const sidePlane = 32

// clipPoly holds a polygon being clipped: at most an 8-gon cut by 8 side
// planes.
type clipPoly struct {
	v [16]clipVert
	n int
}

// clip keeps the part of in on the side n·x ≤ off of side plane s
// (Sutherland–Hodgman), writing to out.
func clipAgainst(in, out *clipPoly, n r3.Vec, off float64, s uint8) {
	out.n = 0
	for i := 0; i < in.n; i++ {
		cur, next := in.v[i], in.v[(i+1)%in.n]
		dc := r3.Dot(n, cur.p) - off
		dn := r3.Dot(n, next.p) - off
		if dc <= 0 {
			if out.n < len(out.v) {
				out.v[out.n] = cur
				out.n++
			}
		}
		if (dc <= 0) != (dn <= 0) {
			x := clipVert{p: r3.Add(cur.p, r3.Scale(dc/(dc-dn), r3.Sub(next.p, cur.p)))}
			if cur.edge < sidePlane {
				x.kind, x.a, x.b = 1, cur.edge, s
			} else {
				x.kind, x.a, x.b = 2, cur.edge-sidePlane, s
			}
			if dc <= 0 {
				x.edge = sidePlane + s // leaving: the polygon runs along the clip plane
			} else {
				x.edge = cur.edge
			}
			if out.n < len(out.v) {
				out.v[out.n] = x
				out.n++
			}
		}
	}
}

// boxBox is the separating-axis test over the 15 candidate axes (3 face
// normals of each box and 9 edge–edge cross products). A face axis gives a
// manifold: the incident face of the other box clipped against the side
// planes of the reference face; an edge axis gives the closest points of
// the two edges.
func boxBox(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	ma, mb := pa.Rot.Mat(), pb.Rot.Mat()
	var ax, bx [3]r3.Vec
	for i := 0; i < 3; i++ {
		ax[i] = r3.Vec{X: ma[i], Y: ma[3+i], Z: ma[6+i]}
		bx[i] = r3.Vec{X: mb[i], Y: mb[3+i], Z: mb[6+i]}
	}
	ha := [3]float64{a.HalfExtents.X, a.HalfExtents.Y, a.HalfExtents.Z}
	hb := [3]float64{b.HalfExtents.X, b.HalfExtents.Y, b.HalfExtents.Z}
	t := r3.Sub(pb.Pos, pa.Pos)
	var absC [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			absC[i][j] = math.Abs(r3.Dot(ax[i], bx[j]))
		}
	}

	// Faces of A, then faces of B; B only wins if clearly better, and an
	// edge only if clearly better than every face, so that ties resolve
	// the same way every time and resting contacts keep their faces.
	bestSep, bestAxis := math.Inf(-1), -1
	for i := 0; i < 3; i++ {
		sep := math.Abs(r3.Dot(t, ax[i])) - ha[i] - (hb[0]*absC[i][0] + hb[1]*absC[i][1] + hb[2]*absC[i][2])
		if sep >= margin {
			return dst
		}
		if sep > bestSep {
			bestSep, bestAxis = sep, i
		}
	}
	bestB, axisB := math.Inf(-1), -1
	for j := 0; j < 3; j++ {
		sep := math.Abs(r3.Dot(t, bx[j])) - hb[j] - (ha[0]*absC[0][j] + ha[1]*absC[1][j] + ha[2]*absC[2][j])
		if sep >= margin {
			return dst
		}
		if sep > bestB {
			bestB, axisB = sep, 3+j
		}
	}
	if bestAxis < 0 || bestB > bestSep+boxTieRel*math.Abs(bestSep)+boxTieAbs {
		bestSep, bestAxis = bestB, axisB
	}
	faceSep := bestSep
	edgeBar := faceSep + boxTieRel*math.Abs(faceSep) + boxTieAbs
	var bestL r3.Vec
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			l := r3.Cross(ax[i], bx[j])
			ln := r3.Norm(l)
			if !(ln >= edgeParallelTol) {
				continue // (nearly) parallel edges: covered by the face axes
			}
			l = r3.Scale(1/ln, l)
			var ra, rb float64
			for k := 0; k < 3; k++ {
				ra += ha[k] * math.Abs(r3.Dot(ax[k], l))
				rb += hb[k] * math.Abs(r3.Dot(bx[k], l))
			}
			sep := math.Abs(r3.Dot(t, l)) - ra - rb
			if sep >= margin {
				return dst
			}
			if sep > edgeBar && sep > bestSep {
				bestSep, bestAxis, bestL = sep, 6+3*i+j, l
			}
		}
	}
	if bestAxis < 0 {
		return dst // NaN sizes
	}
	if bestAxis >= 6 {
		return boxBoxEdge(pa, pb, &ax, &bx, &ha, &hb, bestL, bestAxis-6, margin, dst)
	}

	// Reference box R, incident box I; nRef is R's outward face normal
	// pointing at I, and nAB the contact normal from A to B.
	var pr, pi r3.Vec
	var rx, ix *[3]r3.Vec
	var hr, hi *[3]float64
	var feat uint32 = featBoxBox
	k := bestAxis
	if k < 3 {
		pr, pi, rx, ix, hr, hi = pa.Pos, pb.Pos, &ax, &bx, &ha, &hb
	} else {
		k -= 3
		pr, pi, rx, ix, hr, hi = pb.Pos, pa.Pos, &bx, &ax, &hb, &ha
		feat |= featRefIsB
	}
	nRef := rx[k]
	refFace := uint32(2 * k)
	if r3.Dot(r3.Sub(pi, pr), nRef) < 0 {
		nRef = r3.Scale(-1, nRef)
	} else {
		refFace++
	}
	nAB := nRef
	if feat&featRefIsB != 0 {
		nAB = r3.Scale(-1, nRef)
	}
	// Incident face: the face of I most anti-parallel to nRef.
	ki, best := 0, -1.0
	for j := 0; j < 3; j++ {
		if d := math.Abs(r3.Dot(nRef, ix[j])); d > best {
			ki, best = j, d
		}
	}
	nInc := ix[ki]
	incFace := uint32(2 * ki)
	if r3.Dot(nInc, nRef) > 0 {
		nInc = r3.Scale(-1, nInc)
	} else {
		incFace++
	}
	ci := r3.Add(pi, r3.Scale(hi[ki], nInc))
	u1, u2 := (ki+1)%3, (ki+2)%3
	eu, ev := r3.Scale(hi[u1], ix[u1]), r3.Scale(hi[u2], ix[u2])
	var p0, p1 clipPoly
	p0.n = 4
	p0.v[0].p = r3.Add(ci, r3.Add(eu, ev))
	p0.v[1].p = r3.Add(ci, r3.Sub(ev, eu))
	p0.v[2].p = r3.Sub(ci, r3.Add(eu, ev))
	p0.v[3].p = r3.Add(ci, r3.Sub(eu, ev))
	for v := 0; v < 4; v++ {
		p0.v[v].a = uint8(v)
		p0.v[v].edge = uint8(v)
	}
	// Side planes of the reference face: ±u on the two other axes.
	in, out := &p0, &p1
	s := uint8(0)
	for _, j := range [2]int{(k + 1) % 3, (k + 2) % 3} {
		c := r3.Dot(rx[j], pr)
		clipAgainst(in, out, rx[j], c+hr[j]+boxClipSlack, s)
		in, out = out, in
		clipAgainst(in, out, r3.Scale(-1, rx[j]), -c+hr[j]+boxClipSlack, s+1)
		in, out = out, in
		s += 2
	}
	cr := r3.Add(pr, r3.Scale(hr[k], nRef))
	for v := 0; v < in.n; v++ {
		cv := &in.v[v]
		gap := r3.Dot(nRef, r3.Sub(cv.p, cr))
		if gap >= margin {
			continue
		}
		dst = append(dst, Point{
			Pos:     r3.Sub(cv.p, r3.Scale(gap/2, nRef)),
			Normal:  nAB,
			Gap:     gap,
			Feature: feat | refFace | incFace<<3 | uint32(cv.kind)<<6 | uint32(cv.a)<<8 | uint32(cv.b)<<11,
		})
	}
	return dst
}

// boxBoxEdge gives the contact of edge i of A and edge j of B along the
// unit separating axis l (e = 3i + j).
func boxBoxEdge(pa, pb Pose, ax, bx *[3]r3.Vec, ha, hb *[3]float64, l r3.Vec, e int, margin float64, dst []Point) []Point {
	i, j := e/3, e%3
	if r3.Dot(r3.Sub(pb.Pos, pa.Pos), l) < 0 {
		l = r3.Scale(-1, l)
	}
	feat := uint32(featBoxBox|featBoxEdge) | uint32(e)
	// Edge of A along ax[i] farthest along l; edge of B along bx[j]
	// farthest along −l.
	ca, cb := pa.Pos, pb.Pos
	for k := 0; k < 3; k++ {
		if k != i {
			s := math.Copysign(1, r3.Dot(l, ax[k]))
			ca = r3.Add(ca, r3.Scale(s*ha[k], ax[k]))
			if s > 0 {
				feat |= 1 << (4 + k)
			}
		}
		if k != j {
			s := -math.Copysign(1, r3.Dot(l, bx[k]))
			cb = r3.Add(cb, r3.Scale(s*hb[k], bx[k]))
			if s > 0 {
				feat |= 1 << (8 + k)
			}
		}
	}
	s, t, fa, fb := closestSegments(ca, ax[i], ha[i], cb, bx[j], hb[j])
	qa := r3.Add(ca, r3.Scale(s, ax[i]))
	qb := r3.Add(cb, r3.Scale(t, bx[j]))
	gap := r3.Dot(l, r3.Sub(qb, qa))
	if gap >= margin {
		return dst
	}
	return append(dst, Point{
		Pos:     r3.Scale(0.5, r3.Add(qa, qb)),
		Normal:  l,
		Gap:     gap,
		Feature: feat | fa<<12 | fb<<14,
	})
}
