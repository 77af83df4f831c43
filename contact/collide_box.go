package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

func vecAt(v r3.Vec, i int) float64 {
	switch i {
	case 0:
		return v.X
	case 1:
		return v.Y
	}
	return v.Z
}

func setAt(v *r3.Vec, i int, x float64) {
	switch i {
	case 0:
		v.X = x
	case 1:
		v.Y = x
	default:
		v.Z = x
	}
}

func unitAt(i int) r3.Vec {
	var v r3.Vec
	setAt(&v, i, 1)
	return v
}

// clampBox returns the point of the box [−h, h] closest to p and a code of
// which axes were clamped (per axis, in base 3: 0 inside, 1 low, 2 high).
func clampBox(p, h r3.Vec) (r3.Vec, uint32, int) {
	var code uint32
	clamped := 0
	mul := uint32(1)
	for i := 0; i < 3; i++ {
		x, hi := vecAt(p, i), vecAt(h, i)
		switch {
		case x < -hi:
			setAt(&p, i, -hi)
			code += mul
			clamped++
		case x > hi:
			setAt(&p, i, hi)
			code += 2 * mul
			clamped++
		}
		mul *= 3
	}
	return p, code, clamped
}

// sphereBox is the closest-point test of a sphere (A) and a box (B); a
// centre inside the box is pushed out through the nearest face.
func sphereBox(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	h := b.HalfExtents
	c := pb.ApplyInv(pa.Pos)
	q, code, clamped := clampBox(c, h)
	var nOut r3.Vec // outward box normal in box frame, towards the sphere
	var gap float64
	if clamped > 0 {
		d := r3.Sub(c, q)
		dist := r3.Norm(d)
		nOut = r3.Scale(1/dist, d)
		gap = dist - a.Radius
	} else {
		best, bi := math.Inf(1), 0
		for i := 0; i < 3; i++ {
			if dep := vecAt(h, i) - math.Abs(vecAt(c, i)); dep < best {
				best, bi = dep, i
			}
		}
		s := 1.0
		if vecAt(c, bi) < 0 {
			s = -1
		}
		setAt(&nOut, bi, s)
		setAt(&q, bi, s*vecAt(h, bi))
		gap = -best - a.Radius
		code = 27 + uint32(2*bi)
		if s > 0 {
			code++
		}
	}
	if gap >= margin {
		return dst
	}
	nw := pb.Rot.Rotate(nOut)
	qw := pb.Apply(q)
	return append(dst, Point{
		Pos:     r3.Add(qw, r3.Scale(gap/2, nw)),
		Normal:  r3.Scale(-1, nw),
		Gap:     gap,
		Feature: packFeature(0, code),
	})
}

// segmentBoxClosest returns the parameter t ∈ [0, 1] of the point of the
// segment p0 + t d closest to the box [−h, h]. The squared distance is a
// convex piecewise quadratic in t whose pieces end where a coordinate
// crosses a face plane; each piece is minimised in closed form.
func segmentBoxClosest(p0, d, h r3.Vec) float64 {
	var br [8]float64
	nb := 0
	br[nb] = 0
	nb++
	for i := 0; i < 3; i++ {
		di := vecAt(d, i)
		if di == 0 {
			continue
		}
		for _, s := range [2]float64{-1, 1} {
			t := (s*vecAt(h, i) - vecAt(p0, i)) / di
			if t > 0 && t < 1 {
				br[nb] = t
				nb++
			}
		}
	}
	br[nb] = 1
	nb++
	// Insertion sort: at most 8 values.
	for i := 1; i < nb; i++ {
		for j := i; j > 0 && br[j] < br[j-1]; j-- {
			br[j], br[j-1] = br[j-1], br[j]
		}
	}
	bestT, bestF := 0.0, math.Inf(1)
	for k := 0; k+1 < nb; k++ {
		t0, t1 := br[k], br[k+1]
		tm := (t0 + t1) / 2
		var num, den float64
		for i := 0; i < 3; i++ {
			pi, di, hi := vecAt(p0, i), vecAt(d, i), vecAt(h, i)
			x := pi + tm*di
			var bound float64
			switch {
			case x > hi:
				bound = hi
			case x < -hi:
				bound = -hi
			default:
				continue
			}
			num += di * (pi - bound)
			den += di * di
		}
		t := t0
		if den > 0 {
			t = math.Min(math.Max(-num/den, t0), t1)
		}
		x := r3.Add(p0, r3.Scale(t, d))
		q, _, _ := clampBox(x, h)
		if f := r3.Norm2(r3.Sub(x, q)); f < bestF {
			bestT, bestF = t, f
		}
	}
	return bestT
}

// clipSegmentToFace clips the segment p0 + t d, t ∈ [0, 1], to the prism
// over face axis k of the box [−h, h] (the other two coordinates within
// bounds; k = −1 clips to the box itself) and returns the parameter
// interval; ok is false when empty.
func clipSegmentToFace(p0, d, h r3.Vec, k int) (lo, hi float64, ok bool) {
	lo, hi = 0, 1
	for i := 0; i < 3; i++ {
		if i == k {
			continue
		}
		pi, di, hh := vecAt(p0, i), vecAt(d, i), vecAt(h, i)
		if di == 0 {
			if pi < -hh || pi > hh {
				return 0, 0, false
			}
			continue
		}
		t0, t1 := (-hh-pi)/di, (hh-pi)/di
		if t0 > t1 {
			t0, t1 = t1, t0
		}
		lo, hi = math.Max(lo, t0), math.Min(hi, t1)
	}
	return lo, hi, lo <= hi
}

// capsuleBox handles a capsule (A) and a box (B) in the box frame. If the
// capsule's segment is outside the box, the exact segment–box closest
// points decide the feature: on a face, the segment is clipped to the
// face's prism and both clipped ends give points (a capsule lying on a
// face gets two); on an edge or vertex, one point. If the segment enters
// the box, the separating-axis test over the box faces and the segment ×
// box-edge directions picks the axis of least penetration.
func capsuleBox(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	h := b.HalfExtents
	r := a.Radius
	wl := pb.Rot.InvRotate(pa.Rot.Rotate(r3.Vec{Z: a.HalfLength}))
	cl := pb.ApplyInv(pa.Pos)
	p0 := r3.Sub(cl, wl)
	d := r3.Scale(2, wl)

	emitFace := func(k int, s float64, dst []Point) []Point {
		lo, hi, ok := clipSegmentToFace(p0, d, h, k)
		if !ok {
			return dst
		}
		face := uint32(2*k) + 1
		if s > 0 {
			face++
		}
		nOut := r3.Scale(s, unitAt(k))
		nw := pb.Rot.Rotate(nOut)
		ends := [2]float64{lo, hi}
		n := 2
		if hi-lo <= 1e-12 {
			n = 1
		}
		for e := 0; e < n; e++ {
			x := r3.Add(p0, r3.Scale(ends[e], d))
			height := s*vecAt(x, k) - vecAt(h, k)
			gap := height - r
			if gap >= margin {
				continue
			}
			mid := r3.Sub(x, r3.Scale((height+r)/2, nOut))
			dst = append(dst, Point{
				Pos:     pb.Apply(mid),
				Normal:  r3.Scale(-1, nw),
				Gap:     gap,
				Feature: packFeature(uint32(4+e), 32+face),
			})
		}
		return dst
	}

	if _, _, hits := clipSegmentToFace(p0, d, h, -1); !hits {
		t := segmentBoxClosest(p0, d, h)
		x := r3.Add(p0, r3.Scale(t, d))
		q, code, clamped := clampBox(x, h)
		dv := r3.Sub(x, q)
		if clamped == 1 {
			for k := 0; k < 3; k++ {
				if xk := vecAt(x, k); xk > vecAt(h, k) || xk < -vecAt(h, k) {
					return emitFace(k, math.Copysign(1, xk), dst)
				}
			}
		}
		dist := r3.Norm(dv)
		gap := dist - r
		if gap >= margin || dist == 0 {
			return dst
		}
		nOut := r3.Scale(1/dist, dv)
		mid := r3.Add(q, r3.Scale(gap/2, nOut))
		return append(dst, Point{
			Pos:     pb.Apply(mid),
			Normal:  r3.Scale(-1, pb.Rot.Rotate(nOut)),
			Gap:     gap,
			Feature: packFeature(segFeature(2*t-1, 1), code),
		})
	}

	// The segment meets the box: separating axes.
	m := r3.Add(p0, wl) // segment centre
	bestSep, bestAxis := math.Inf(-1), -1
	for k := 0; k < 3; k++ {
		sep := math.Abs(vecAt(m, k)) - vecAt(h, k) - math.Abs(vecAt(wl, k))
		if sep > bestSep {
			bestSep, bestAxis = sep, k
		}
	}
	faceSep := bestSep
	var bestL r3.Vec
	lw := r3.Norm(wl)
	for k := 0; k < 3; k++ {
		l := r3.Cross(wl, unitAt(k))
		ln := r3.Norm(l)
		if ln <= 1e-6*lw {
			continue
		}
		l = r3.Scale(1/ln, l)
		rb := h.X*math.Abs(l.X) + h.Y*math.Abs(l.Y) + h.Z*math.Abs(l.Z)
		sep := math.Abs(r3.Dot(m, l)) - rb
		// Prefer faces unless an edge axis is clearly better: it keeps
		// the mode from flickering between equal candidates.
		if sep > faceSep+0.05*math.Abs(faceSep)+1e-9 && sep > bestSep {
			bestSep, bestAxis, bestL = sep, 3+k, l
		}
	}
	if bestAxis < 0 || bestSep-r >= margin {
		return dst
	}
	if bestAxis < 3 {
		return emitFace(bestAxis, math.Copysign(1, vecAt(m, bestAxis)), dst)
	}
	k := bestAxis - 3
	if r3.Dot(m, bestL) < 0 {
		bestL = r3.Scale(-1, bestL)
	}
	// Box edge along axis k farthest along bestL.
	var ec r3.Vec
	edge := uint32(k)
	for i := 0; i < 3; i++ {
		if i == k {
			continue
		}
		s := math.Copysign(1, vecAt(bestL, i))
		setAt(&ec, i, s*vecAt(h, i))
		if s > 0 {
			edge |= 4 << uint(i)
		}
	}
	ek := unitAt(k)
	u := r3.Scale(1/lw, wl)
	sp, tq, fa, fb := closestSegments(m, u, lw, ec, ek, vecAt(h, k))
	xs := r3.Add(m, r3.Scale(sp, u))
	xq := r3.Add(ec, r3.Scale(tq, ek))
	gap := r3.Dot(bestL, r3.Sub(xs, xq)) - r
	if gap >= margin {
		return dst
	}
	mid := r3.Scale(0.5, r3.Add(xq, r3.Sub(xs, r3.Scale(r, bestL))))
	return append(dst, Point{
		Pos:     pb.Apply(mid),
		Normal:  r3.Scale(-1, pb.Rot.Rotate(bestL)),
		Gap:     gap,
		Feature: packFeature(16+fa, 64+edge<<2|fb),
	})
}
