package contact

import (
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// Quat is a Hamilton quaternion W + X i + Y j + Z k. Unit quaternions
// represent rotations; Rotate(v) = q v q*.
type Quat struct {
	W, X, Y, Z float64
}

// IdentityQuat is the rotation that leaves every vector unchanged.
var IdentityQuat = Quat{W: 1}

// QuatFromAxisAngle returns the rotation of angle radians about axis
// (which need not be of unit length; a zero axis gives the identity).
func QuatFromAxisAngle(axis r3.Vec, angle float64) Quat {
	n := r3.Norm(axis)
	if n == 0 {
		return IdentityQuat
	}
	s, c := math.Sincos(angle / 2)
	a := r3.Scale(s/n, axis)
	return Quat{W: c, X: a.X, Y: a.Y, Z: a.Z}
}

// QuatExp returns the rotation by the rotation vector w (axis times angle).
func QuatExp(w r3.Vec) Quat {
	theta := r3.Norm(w)
	if theta < 1e-8 {
		// Taylor expansion keeps the map smooth at zero.
		k := 0.5 - theta*theta/48
		return Quat{W: 1 - theta*theta/8, X: k * w.X, Y: k * w.Y, Z: k * w.Z}.Normalize()
	}
	s, c := math.Sincos(theta / 2)
	k := s / theta
	return Quat{W: c, X: k * w.X, Y: k * w.Y, Z: k * w.Z}
}

// Mul returns the Hamilton product q p (apply p first, then q).
func (q Quat) Mul(p Quat) Quat {
	return Quat{
		W: q.W*p.W - q.X*p.X - q.Y*p.Y - q.Z*p.Z,
		X: q.W*p.X + q.X*p.W + q.Y*p.Z - q.Z*p.Y,
		Y: q.W*p.Y - q.X*p.Z + q.Y*p.W + q.Z*p.X,
		Z: q.W*p.Z + q.X*p.Y - q.Y*p.X + q.Z*p.W,
	}
}

// Conj returns the conjugate, the inverse of a unit quaternion.
func (q Quat) Conj() Quat { return Quat{W: q.W, X: -q.X, Y: -q.Y, Z: -q.Z} }

// Norm returns the Euclidean norm of q.
func (q Quat) Norm() float64 { return math.Sqrt(q.W*q.W + q.X*q.X + q.Y*q.Y + q.Z*q.Z) }

// Normalize returns q scaled to unit norm.
func (q Quat) Normalize() Quat {
	n := q.Norm()
	if n == 0 {
		return IdentityQuat
	}
	return Quat{W: q.W / n, X: q.X / n, Y: q.Y / n, Z: q.Z / n}
}

// Rotate returns q v q* for a unit quaternion q.
func (q Quat) Rotate(v r3.Vec) r3.Vec {
	u := r3.Vec{X: q.X, Y: q.Y, Z: q.Z}
	t := r3.Scale(2, r3.Cross(u, v))
	return r3.Add(v, r3.Add(r3.Scale(q.W, t), r3.Cross(u, t)))
}

// InvRotate returns q* v q, the inverse rotation of v.
func (q Quat) InvRotate(v r3.Vec) r3.Vec { return q.Conj().Rotate(v) }

// Mat returns the rotation matrix of the unit quaternion q.
func (q Quat) Mat() Mat3 {
	w, x, y, z := q.W, q.X, q.Y, q.Z
	return Mat3{
		1 - 2*(y*y+z*z), 2 * (x*y - w*z), 2 * (x*z + w*y),
		2 * (x*y + w*z), 1 - 2*(x*x+z*z), 2 * (y*z - w*x),
		2 * (x*z - w*y), 2 * (y*z + w*x), 1 - 2*(x*x+y*y),
	}
}

// Angle returns the rotation angle between two unit quaternions,
// 2·acos(|q·p|), in [0, π].
func Angle(q, p Quat) float64 {
	d := math.Abs(q.W*p.W + q.X*p.X + q.Y*p.Y + q.Z*p.Z)
	if d > 1 {
		d = 1
	}
	return 2 * math.Acos(d)
}

// Mat3 is a row-major 3×3 matrix held by value.
type Mat3 [9]float64

// Identity3 is the 3×3 identity.
var Identity3 = Mat3{1, 0, 0, 0, 1, 0, 0, 0, 1}

// Diag3 returns the diagonal matrix diag(d.X, d.Y, d.Z).
func Diag3(d r3.Vec) Mat3 { return Mat3{d.X, 0, 0, 0, d.Y, 0, 0, 0, d.Z} }

// Skew3 returns the cross-product matrix [v]×, so Skew3(v).MulVec(w) = v × w.
func Skew3(v r3.Vec) Mat3 { return Mat3{0, -v.Z, v.Y, v.Z, 0, -v.X, -v.Y, v.X, 0} }

// At returns element (i, j).
func (m Mat3) At(i, j int) float64 { return m[3*i+j] }

// MulVec returns m v.
func (m Mat3) MulVec(v r3.Vec) r3.Vec {
	return r3.Vec{
		X: m[0]*v.X + m[1]*v.Y + m[2]*v.Z,
		Y: m[3]*v.X + m[4]*v.Y + m[5]*v.Z,
		Z: m[6]*v.X + m[7]*v.Y + m[8]*v.Z,
	}
}

// MulVecT returns mᵀ v.
func (m Mat3) MulVecT(v r3.Vec) r3.Vec {
	return r3.Vec{
		X: m[0]*v.X + m[3]*v.Y + m[6]*v.Z,
		Y: m[1]*v.X + m[4]*v.Y + m[7]*v.Z,
		Z: m[2]*v.X + m[5]*v.Y + m[8]*v.Z,
	}
}

// Mul returns m n.
func (m Mat3) Mul(n Mat3) Mat3 {
	var r Mat3
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			r[3*i+j] = m[3*i]*n[j] + m[3*i+1]*n[3+j] + m[3*i+2]*n[6+j]
		}
	}
	return r
}

// T returns the transpose of m.
func (m Mat3) T() Mat3 { return Mat3{m[0], m[3], m[6], m[1], m[4], m[7], m[2], m[5], m[8]} }

// Add returns m + n.
func (m Mat3) Add(n Mat3) Mat3 {
	for i := range m {
		m[i] += n[i]
	}
	return m
}

// Scale returns f m.
func (m Mat3) Scale(f float64) Mat3 {
	for i := range m {
		m[i] *= f
	}
	return m
}

// Pose is a rigid transform: a point x in the local frame maps to
// Pos + Rot.Rotate(x) in the parent frame.
type Pose struct {
	Pos r3.Vec
	Rot Quat
}

// IdentityPose is the pose that maps every point to itself.
var IdentityPose = Pose{Rot: IdentityQuat}

// Apply maps the local point x to the parent frame.
func (p Pose) Apply(x r3.Vec) r3.Vec { return r3.Add(p.Pos, p.Rot.Rotate(x)) }

// ApplyInv maps the parent-frame point x to the local frame.
func (p Pose) ApplyInv(x r3.Vec) r3.Vec { return p.Rot.InvRotate(r3.Sub(x, p.Pos)) }

// Mul returns the composition p∘o: first o, then p.
func (p Pose) Mul(o Pose) Pose {
	return Pose{Pos: p.Apply(o.Pos), Rot: p.Rot.Mul(o.Rot)}
}

// Inv returns the inverse transform.
func (p Pose) Inv() Pose {
	c := p.Rot.Conj()
	return Pose{Pos: r3.Scale(-1, c.Rotate(p.Pos)), Rot: c}
}
