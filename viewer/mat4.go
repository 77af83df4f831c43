package viewer

import (
	"math"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// mat4 is a 4×4 matrix in column-major order, as OpenGL reads it:
// element (row i, column j) is m[4*j+i].
type mat4 [16]float32

// mat3 is a 3×3 matrix in column-major order.
type mat3 [9]float32

func (a mat4) mul(b mat4) mat4 {
	var r mat4
	for j := 0; j < 4; j++ {
		for i := 0; i < 4; i++ {
			var s float32
			for k := 0; k < 4; k++ {
				s += a[4*k+i] * b[4*j+k]
			}
			r[4*j+i] = s
		}
	}
	return r
}

// apply returns the homogeneous product m (x, y, z, 1), in float64 so that
// projections used for picking and tests keep their precision.
func (m mat4) apply(p r3.Vec) (x, y, z, w float64) {
	f := func(i int) float64 {
		return float64(m[i])*p.X + float64(m[4+i])*p.Y + float64(m[8+i])*p.Z + float64(m[12+i])
	}
	return f(0), f(1), f(2), f(3)
}

// perspective returns the OpenGL projection of a vertical field of view fovy
// (radians) onto a viewport of the given aspect (width/height).
func perspective(fovy, aspect, near, far float64) mat4 {
	f := 1 / math.Tan(fovy/2)
	var m mat4
	m[0] = float32(f / aspect)
	m[5] = float32(f)
	m[10] = float32((far + near) / (near - far))
	m[11] = -1
	m[14] = float32(2 * far * near / (near - far))
	return m
}

// lookAt returns the view matrix of an eye looking at center with up
// pointing approximately along up.
func lookAt(eye, center, up r3.Vec) mat4 {
	f := r3.Unit(r3.Sub(center, eye))
	s := r3.Unit(r3.Cross(f, up))
	u := r3.Cross(s, f)
	return mat4{
		float32(s.X), float32(u.X), float32(-f.X), 0,
		float32(s.Y), float32(u.Y), float32(-f.Y), 0,
		float32(s.Z), float32(u.Z), float32(-f.Z), 0,
		float32(-r3.Dot(s, eye)), float32(-r3.Dot(u, eye)), float32(r3.Dot(f, eye)), 1,
	}
}

// poseScale returns the model matrix T(p.Pos) R(p.Rot) S(scale) and the
// matrix that transforms its normals, R S⁻¹ (the inverse transpose of the
// linear part).
func poseScale(p contact.Pose, scale r3.Vec) (mat4, mat3) {
	r := p.Rot.Normalize().Mat() // row-major
	sx, sy, sz := scale.X, scale.Y, scale.Z
	m := mat4{
		float32(r[0] * sx), float32(r[3] * sx), float32(r[6] * sx), 0,
		float32(r[1] * sy), float32(r[4] * sy), float32(r[7] * sy), 0,
		float32(r[2] * sz), float32(r[5] * sz), float32(r[8] * sz), 0,
		float32(p.Pos.X), float32(p.Pos.Y), float32(p.Pos.Z), 1,
	}
	inv := func(v float64) float64 {
		if v == 0 {
			return 0
		}
		return 1 / v
	}
	ix, iy, iz := inv(sx), inv(sy), inv(sz)
	n := mat3{
		float32(r[0] * ix), float32(r[3] * ix), float32(r[6] * ix),
		float32(r[1] * iy), float32(r[4] * iy), float32(r[7] * iy),
		float32(r[2] * iz), float32(r[5] * iz), float32(r[8] * iz),
	}
	return m, n
}

// rotationTo returns the shortest rotation taking +z to the unit vector d.
func rotationTo(d r3.Vec) contact.Quat {
	z := r3.Vec{Z: 1}
	c := r3.Dot(z, d)
	if c < -1+1e-12 {
		return contact.Quat{X: 1} // half turn about x
	}
	a := r3.Cross(z, d)
	// q = (1 + c, a) normalized is the half-angle rotation from z to d.
	return contact.Quat{W: 1 + c, X: a.X, Y: a.Y, Z: a.Z}.Normalize()
}
