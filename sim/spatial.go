package sim

import (
	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// The dynamics work in world Plücker coordinates: a motion vector (a twist)
// is (ω, v) where v is the velocity of the material point that coincides
// with the world origin; a force vector (a wrench) is (n, f) where n is the
// moment about the world origin. In these coordinates the motion subspace of
// every joint, the composite inertias and the recursions need no frame
// transforms, only the bodies' world poses.

// motion is a spatial motion vector (ω, v) in world Plücker coordinates.
type motion struct{ w, v r3.Vec }

// force is a spatial force vector (n, f) in world Plücker coordinates.
type force struct{ n, f r3.Vec }

func (a motion) add(b motion) motion { return motion{r3.Add(a.w, b.w), r3.Add(a.v, b.v)} }
func (a motion) scale(s float64) motion {
	return motion{r3.Scale(s, a.w), r3.Scale(s, a.v)}
}
func (a force) add(b force) force { return force{r3.Add(a.n, b.n), r3.Add(a.f, b.f)} }
func (a force) sub(b force) force { return force{r3.Sub(a.n, b.n), r3.Sub(a.f, b.f)} }

// pointVel returns the velocity of the world point p moving with a.
func (a motion) pointVel(p r3.Vec) r3.Vec { return r3.Add(a.v, r3.Cross(a.w, p)) }

// crossM returns a ×ₘ b, the motion cross product.
func (a motion) crossM(b motion) motion {
	return motion{r3.Cross(a.w, b.w), r3.Add(r3.Cross(a.w, b.v), r3.Cross(a.v, b.w))}
}

// crossF returns a ×* f, the force cross product.
func (a motion) crossF(f force) force {
	return force{r3.Add(r3.Cross(a.w, f.n), r3.Cross(a.v, f.f)), r3.Cross(a.w, f.f)}
}

// dot returns the power aᵀf of a force on a motion.
func (a motion) dot(f force) float64 { return r3.Dot(a.w, f.n) + r3.Dot(a.v, f.f) }

// inertia is a spatial inertia in world Plücker coordinates, kept as its
// parameters: mass, first moment h = m c (c the centre of mass) and the
// rotational inertia about the world origin, Io = Ic + m [c]×[c]×ᵀ.
type inertia struct {
	m  float64
	h  r3.Vec
	io contact.Mat3
}

// bodyInertia returns the spatial inertia of a body of mass m whose centre of
// mass is at world point c and whose inertia about c in world axes is ic.
func bodyInertia(m float64, c r3.Vec, ic contact.Mat3) inertia {
	s := contact.Skew3(c)
	return inertia{m: m, h: r3.Scale(m, c), io: ic.Add(s.Mul(s.T()).Scale(m))}
}

func (a inertia) add(b inertia) inertia {
	return inertia{m: a.m + b.m, h: r3.Add(a.h, b.h), io: a.io.Add(b.io)}
}

// apply returns the momentum I·a of the motion a.
func (a inertia) apply(x motion) force {
	// n = Io ω + h × v,  f = m v − h × ω
	return force{
		n: r3.Add(a.io.MulVec(x.w), r3.Cross(a.h, x.v)),
		f: r3.Sub(r3.Scale(a.m, x.v), r3.Cross(a.h, x.w)),
	}
}
