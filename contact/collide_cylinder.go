package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// sphereCylinder is the closed-form test of a sphere (A) and a cylinder
// (B), done in the cylinder's frame on the radial distance ρ and height z
// of the sphere's centre. Outside, the closest point is on the cap
// (ρ ≤ R), the side (|z| ≤ h) or the rim; inside, the centre leaves
// through the nearer of the side and the cap.
func sphereCylinder(a *Shape, pa Pose, b *Shape, pb Pose, margin float64, dst []Point) []Point {
	c := pb.ApplyInv(pa.Pos)
	R, h := b.Radius, b.HalfLength
	rho := planarNorm(c)
	radial := r3.Vec{X: 1} // a fixed choice on the axis, where any will do
	if rho > 0 {
		radial = r3.Vec{X: c.X / rho, Y: c.Y / rho}
	}
	sz := math.Copysign(1, c.Z)
	cap := uint32(1)
	if sz > 0 {
		cap = 2
	}
	var q, nOut r3.Vec // closest cylinder point and outward normal, local
	var dist float64   // signed distance of the centre from the cylinder
	var feature uint32
	dr, dz := rho-R, math.Abs(c.Z)-h
	switch {
	case dr > 0 && dz > 0: // rim
		q = r3.Add(r3.Scale(R, radial), r3.Vec{Z: sz * h})
		d := r3.Sub(c, q)
		dist = r3.Norm(d)
		nOut = r3.Scale(1/dist, d)
		feature = 4 + cap
	case dz > 0 || dr <= 0 && dz > dr: // cap, outside or nearer inside
		q = r3.Vec{X: c.X, Y: c.Y, Z: sz * h}
		nOut = r3.Vec{Z: sz}
		dist = dz
		feature = cap
	default: // side
		q = r3.Add(r3.Scale(R, radial), r3.Vec{Z: c.Z})
		nOut = radial
		dist = dr
		feature = 3
	}
	gap := dist - a.Radius
	if gap >= margin {
		return dst
	}
	if dist < 0 {
		feature |= 8
	}
	nw := pb.Rot.Rotate(nOut)
	return append(dst, Point{
		Pos:     pb.Apply(r3.Add(q, r3.Scale(gap/2, nOut))),
		Normal:  r3.Scale(-1, nw),
		Gap:     gap,
		Feature: packFeature(0, feature),
	})
}

// planarNorm returns the length of v's projection on the xy plane. Unlike
// math.Hypot it does not guard against overflow, which lengths in metres
// never reach, and it is several times faster in the support loops.
func planarNorm(v r3.Vec) float64 { return math.Sqrt(v.X*v.X + v.Y*v.Y) }
