package sim

// TEMPORARY until contact.PointTangent lands: lets the contact-free sweep
// tests compile. Deleted when it does.

import (
	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

type shimTwist struct{ V, W r3.Vec }

func shimPointTangent(a *contact.Shape, pa contact.Pose, b *contact.Shape, pb contact.Pose, pt contact.Point, ta, tb shimTwist) (r3.Vec, r3.Vec, float64) {
	panic("contact tangents not yet available")
}
