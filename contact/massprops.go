package contact

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/spatial/r3"
)

// MassProps are the mass properties of a rigid part: mass, centre of mass
// (body frame) and inertia about the centre of mass (body axes).
type MassProps struct {
	Mass    float64
	COM     r3.Vec
	Inertia Mat3
}

func positiveLength(kind ShapeKind, field string, x float64) error {
	if !(x > 0) || math.IsInf(x, 1) {
		return fmt.Errorf("contact: %v %s must be positive and finite, got %v", kind, field, x)
	}
	return nil
}

// ShapeMass returns the mass properties of a solid shape of uniform density
// (kg/m³), accounting for s.Local (the shape's pose in the body frame).
// Planes have none (return an error).
func ShapeMass(s Shape, density float64) (MassProps, error) {
	if !(density > 0) || math.IsInf(density, 1) {
		return MassProps{}, fmt.Errorf("contact: density must be positive and finite, got %v", density)
	}
	q := s.Local.Rot
	if n := q.Norm(); !(math.Abs(n-1) <= 1e-6) {
		return MassProps{}, fmt.Errorf("contact: %v local rotation must be a unit quaternion, has norm %v", s.Kind, n)
	}
	p := s.Local.Pos
	if !finite(p.X) || !finite(p.Y) || !finite(p.Z) {
		return MassProps{}, fmt.Errorf("contact: %v local position must be finite, got %v", s.Kind, p)
	}
	var m float64
	var d r3.Vec // principal moments about the centroid, local axes
	switch s.Kind {
	case Sphere:
		r := s.Radius
		if err := positiveLength(s.Kind, "radius", r); err != nil {
			return MassProps{}, err
		}
		m = density * 4 / 3 * math.Pi * r * r * r
		i := 2.0 / 5 * m * r * r
		d = r3.Vec{X: i, Y: i, Z: i}
	case Box:
		h := s.HalfExtents
		for _, f := range [3]struct {
			name string
			v    float64
		}{{"half extent x", h.X}, {"half extent y", h.Y}, {"half extent z", h.Z}} {
			if err := positiveLength(s.Kind, f.name, f.v); err != nil {
				return MassProps{}, err
			}
		}
		m = density * 8 * h.X * h.Y * h.Z
		a, b, c := 2*h.X, 2*h.Y, 2*h.Z
		d = r3.Vec{X: m * (b*b + c*c) / 12, Y: m * (a*a + c*c) / 12, Z: m * (a*a + b*b) / 12}
	case Cylinder:
		r, hl := s.Radius, s.HalfLength
		if err := positiveLength(s.Kind, "radius", r); err != nil {
			return MassProps{}, err
		}
		if err := positiveLength(s.Kind, "half length", hl); err != nil {
			return MassProps{}, err
		}
		l := 2 * hl
		m = density * math.Pi * r * r * l
		across := m * (3*r*r + l*l) / 12
		d = r3.Vec{X: across, Y: across, Z: m * r * r / 2}
	case Capsule:
		r, hl := s.Radius, s.HalfLength
		if err := positiveLength(s.Kind, "radius", r); err != nil {
			return MassProps{}, err
		}
		if !(hl >= 0) || math.IsInf(hl, 1) {
			return MassProps{}, fmt.Errorf("contact: capsule half length must be non-negative and finite, got %v", hl)
		}
		// A cylinder of length 2hl plus two hemispheres, each with its
		// centroid 3r/8 from its flat face; the hemispheres' moments move
		// to the capsule centre by the parallel-axis theorem.
		l := 2 * hl
		mc := density * math.Pi * r * r * l
		mh := density * 2 / 3 * math.Pi * r * r * r
		m = mc + 2*mh
		hc := 3 * r / 8
		acrossHemi := 2.0/5*mh*r*r - mh*hc*hc // about the hemisphere's centroid
		off := hl + hc
		across := mc*(3*r*r+l*l)/12 + 2*(acrossHemi+mh*off*off)
		d = r3.Vec{X: across, Y: across, Z: mc*r*r/2 + 2*(2.0/5*mh*r*r)}
	case Plane:
		return MassProps{}, fmt.Errorf("contact: a plane has no mass properties; attach it to a static body")
	default:
		return MassProps{}, fmt.Errorf("contact: unknown shape kind %d", int(s.Kind))
	}
	// Rotate into the body frame: I = R D Rᵀ.
	rm := q.Normalize().Mat()
	return MassProps{Mass: m, COM: p, Inertia: rm.Mul(Diag3(d)).Mul(rm.T())}, nil
}

// Combine returns the mass properties of two rigid parts joined
// (parallel-axis theorem). Parts of zero mass contribute nothing.
func (a MassProps) Combine(b MassProps) MassProps {
	m := a.Mass + b.Mass
	if m == 0 {
		return MassProps{}
	}
	c := r3.Scale(1/m, r3.Add(r3.Scale(a.Mass, a.COM), r3.Scale(b.Mass, b.COM)))
	return MassProps{
		Mass:    m,
		COM:     c,
		Inertia: a.Inertia.Add(shiftInertia(a.Mass, r3.Sub(a.COM, c))).Add(b.Inertia).Add(shiftInertia(b.Mass, r3.Sub(b.COM, c))),
	}
}

// shiftInertia returns m(|d|² 1 − d dᵀ), the parallel-axis term for a
// point mass m at offset d.
func shiftInertia(m float64, d r3.Vec) Mat3 {
	dd := r3.Dot(d, d)
	return Mat3{
		m * (dd - d.X*d.X), -m * d.X * d.Y, -m * d.X * d.Z,
		-m * d.Y * d.X, m * (dd - d.Y*d.Y), -m * d.Y * d.Z,
		-m * d.Z * d.X, -m * d.Z * d.Y, m * (dd - d.Z*d.Z),
	}
}
