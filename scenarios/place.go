package scenarios

import (
	"fmt"
	"math"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
	"gopkg.in/yaml.v3"
)

// support returns the largest extent h·d over the points of shape s (in its
// body's frame) along the unit direction d, given in the body frame.
func support(s *contact.Shape, d r3.Vec) float64 {
	c := s.Local.Pos
	l := s.Local.Rot.InvRotate(d) // d in the shape's own axes
	base := r3.Dot(c, d)
	switch s.Kind {
	case contact.Sphere:
		return base + s.Radius
	case contact.Box:
		h := s.HalfExtents
		return base + h.X*math.Abs(l.X) + h.Y*math.Abs(l.Y) + h.Z*math.Abs(l.Z)
	case contact.Capsule:
		return base + s.HalfLength*math.Abs(l.Z) + s.Radius
	case contact.Cylinder:
		return base + s.HalfLength*math.Abs(l.Z) + s.Radius*math.Hypot(l.X, l.Y)
	}
	return math.Inf(1)
}

// restOn returns the pose of a body whose shapes just touch the plane at
// planePose from above: orientation rot relative to the plane's frame, and
// position (x, y) along the plane and lift above it, in the plane's frame.
func restOn(planePose contact.Pose, shapes []contact.Shape, rot contact.Quat, x, y, lift float64) contact.Pose {
	// The plane's downward normal seen from the body frame.
	down := rot.InvRotate(r3.Vec{Z: -1})
	depth := math.Inf(-1)
	for i := range shapes {
		depth = math.Max(depth, support(&shapes[i], down))
	}
	local := contact.Pose{Pos: r3.Vec{X: x, Y: y, Z: depth + lift}, Rot: rot}
	return planePose.Mul(local)
}

// worldPoses returns the starting world pose of every body: free bodies
// from their start pose, the others by composing their joints at the
// initial joint positions down the tree.
func worldPoses(bodies []sim.Body) []contact.Pose {
	out := make([]contact.Pose, len(bodies))
	for i := range bodies {
		b := &bodies[i]
		j := &b.Joint
		if j.Kind == sim.Free {
			out[i] = b.Start.Pose
			continue
		}
		parent := contact.IdentityPose
		if j.Parent >= 0 {
			parent = out[j.Parent]
		}
		motion := contact.IdentityPose
		switch j.Kind {
		case sim.Revolute:
			motion.Rot = contact.QuatFromAxisAngle(j.Axis, j.Position)
		case sim.Prismatic:
			motion.Pos = r3.Scale(j.Position, j.Axis)
		case sim.Ball:
			if j.Rotation != (contact.Quat{}) {
				motion.Rot = j.Rotation.Normalize()
			}
		}
		out[i] = parent.Mul(j.Frame).Mul(motion)
	}
	return out
}

// overlaps warns about bodies that penetrate each other or static geometry
// at the start. A body and its own parent are skipped: links usually touch
// at their joint.
func (d *decoder) overlaps(m *sim.Model, bodiesNode *yaml.Node) {
	poses := worldPoses(m.Bodies)
	node := func(name string) *yaml.Node {
		if bodiesNode == nil || bodiesNode.Kind != yaml.SequenceNode {
			return bodiesNode
		}
		for _, e := range bodiesNode.Content {
			if e.Kind != yaml.MappingNode {
				continue
			}
			for k := 0; k+1 < len(e.Content); k += 2 {
				if e.Content[k].Value == "name" && e.Content[k+1].Value == name {
					return e
				}
			}
		}
		return bodiesNode
	}
	var pts []contact.Point
	deepest := func(a *contact.Shape, pa contact.Pose, b *contact.Shape, pb contact.Pose) float64 {
		pts = contact.Collide(a, pa, b, pb, 0, pts[:0])
		depth := 0.0
		for _, p := range pts {
			depth = math.Max(depth, -p.Gap)
		}
		return depth
	}
	report := func(i int, other string, depth float64) {
		if depth <= d.overlapTol {
			return
		}
		a := m.Bodies[i].Name
		d.warn(node(a), fmt.Sprintf("bodies[%s]", a), Warning{
			A: a, B: other, Depth: depth,
			Msg: fmt.Sprintf("overlaps %s by %.3g m at the start; contact correction will push them apart", other, depth),
		})
	}
	// Bounding boxes first, so that only bodies near each other are
	// collided shape by shape.
	boxes := make([]r3.Box, len(m.Bodies))
	for i := range m.Bodies {
		b := &m.Bodies[i]
		boxes[i] = r3.Box{Min: r3.Vec{X: math.Inf(1), Y: math.Inf(1), Z: math.Inf(1)}, Max: r3.Vec{X: math.Inf(-1), Y: math.Inf(-1), Z: math.Inf(-1)}}
		for k := range b.Shapes {
			s := &b.Shapes[k]
			bb := contact.Bounds(s, poses[i].Mul(s.Local), 0)
			boxes[i].Min = r3.Vec{X: math.Min(boxes[i].Min.X, bb.Min.X), Y: math.Min(boxes[i].Min.Y, bb.Min.Y), Z: math.Min(boxes[i].Min.Z, bb.Min.Z)}
			boxes[i].Max = r3.Vec{X: math.Max(boxes[i].Max.X, bb.Max.X), Y: math.Max(boxes[i].Max.Y, bb.Max.Y), Z: math.Max(boxes[i].Max.Z, bb.Max.Z)}
		}
	}
	apart := func(a, b r3.Box) bool {
		return a.Max.X < b.Min.X || b.Max.X < a.Min.X || a.Max.Y < b.Min.Y || b.Max.Y < a.Min.Y || a.Max.Z < b.Min.Z || b.Max.Z < a.Min.Z
	}
	for i := range m.Bodies {
		bi := &m.Bodies[i]
		for _, st := range m.Static {
			depth := 0.0
			for k := range bi.Shapes {
				s := &bi.Shapes[k]
				depth = math.Max(depth, deepest(s, poses[i].Mul(s.Local), &st.Shape, st.Shape.Local))
			}
			report(i, st.Name, depth)
		}
		for j := i + 1; j < len(m.Bodies); j++ {
			bj := &m.Bodies[j]
			if bj.Joint.Parent == i || bi.Joint.Parent == j || apart(boxes[i], boxes[j]) {
				continue
			}
			depth := 0.0
			for k := range bi.Shapes {
				for l := range bj.Shapes {
					a, b := &bi.Shapes[k], &bj.Shapes[l]
					depth = math.Max(depth, deepest(a, poses[i].Mul(a.Local), b, poses[j].Mul(b.Local)))
				}
			}
			report(i, bj.Name, depth)
		}
	}
}
