package scenarios

import (
	"math"

	"stickslip/contact"
	"stickslip/sim"

	"gopkg.in/yaml.v3"
)

// shapesMass returns the mass properties of a body made of the given solid
// shapes of uniform density, failing at n if they are not finite numbers
// (sizes or density so large that the mass overflows).
func (d *decoder) shapesMass(n *yaml.Node, path string, shapes []contact.Shape, density float64) contact.MassProps {
	var total contact.MassProps
	for _, s := range shapes {
		mp, err := contact.ShapeMass(s, density)
		if err != nil {
			d.fail(n, path, "%v", err)
		}
		total = total.Combine(mp)
	}
	return total
}

// checkFinite fails unless the body's mass properties are finite; values
// that are each finite can still overflow when combined.
func (d *decoder) checkFinite(n *yaml.Node, path string, b *sim.Body) {
	ok := finite(b.Mass) && finite(b.COM.X) && finite(b.COM.Y) && finite(b.COM.Z) && b.Mass > 0
	for _, x := range b.Inertia {
		ok = ok && finite(x)
	}
	if !ok {
		d.fail(n, path, "mass properties are not finite positive numbers (mass %g); sizes, density or mass are out of range", b.Mass)
	}
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
