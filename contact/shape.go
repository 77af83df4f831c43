package contact

import "gonum.org/v1/gonum/spatial/r3"

// ShapeKind names a collision primitive.
type ShapeKind int

// The collision primitives. Each is centred on its local origin; capsule and
// cylinder axes lie along local z; a plane's outward normal is local z and
// the plane passes through the local origin (it is the half-space z ≤ 0).
const (
	Plane ShapeKind = iota
	Sphere
	Capsule
	Box
	Cylinder
)

var shapeKindNames = [...]string{"plane", "sphere", "capsule", "box", "cylinder"}

func (k ShapeKind) String() string {
	if k < 0 || int(k) >= len(shapeKindNames) {
		return "unknown"
	}
	return shapeKindNames[k]
}

// ParseShapeKind returns the kind named s and whether s names one.
func ParseShapeKind(s string) (ShapeKind, bool) {
	for i, n := range shapeKindNames {
		if n == s {
			return ShapeKind(i), true
		}
	}
	return 0, false
}

// Shape is a convex collision primitive placed in its body's frame.
type Shape struct {
	Kind ShapeKind
	// Radius of a sphere, capsule or cylinder.
	Radius float64
	// HalfLength is half the length of a capsule's segment or a cylinder
	// along local z.
	HalfLength float64
	// HalfExtents of a box along its local axes.
	HalfExtents r3.Vec
	// Local is the shape's pose in its body's frame.
	Local Pose
}
