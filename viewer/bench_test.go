package viewer

import (
	"fmt"
	"image"
	"testing"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

// stackScene is a column of n boxes resting on the floor, each with four
// sticking corner contacts below it, over frames frames.
func stackScene(n, frames int) (*sim.Model, *sim.Run) {
	he := r3.Vec{X: 0.1, Y: 0.1, Z: 0.05}
	m := &sim.Model{Static: []sim.StaticShape{{Name: "floor", Shape: contact.Shape{Kind: contact.Plane, Local: contact.IdentityPose}}}}
	r := &sim.Run{TimeStep: 1e-3}
	for i := 0; i < n; i++ {
		name := fmt.Sprintf("block%d", i)
		m.Bodies = append(m.Bodies, sim.Body{Name: name, Mass: 1, Inertia: contact.Identity3,
			Shapes: []contact.Shape{{Kind: contact.Box, HalfExtents: he, Local: contact.IdentityPose}},
			Joint:  sim.Joint{Kind: sim.Free, Parent: -1}})
		r.BodyNames = append(r.BodyNames, name)
	}
	for f := 0; f < frames; f++ {
		fr := sim.Frame{Step: f, T: float64(f) * r.TimeStep}
		for i := 0; i < n; i++ {
			fr.Bodies = append(fr.Bodies, sim.BodyFrame{Pose: contact.Pose{Pos: r3.Vec{Z: he.Z * float64(2*i+1)}, Rot: contact.IdentityQuat}})
			a := "floor"
			if i > 0 {
				a = r.BodyNames[i-1]
			}
			for k, c := range [4][2]float64{{-1, -1}, {1, -1}, {1, 1}, {-1, 1}} {
				r.Contacts = append(r.Contacts, sim.ContactRecord{Frame: f, T: fr.T, A: a, B: r.BodyNames[i], Feature: uint32(k),
					Point: r3.Vec{X: c[0] * he.X, Y: c[1] * he.Y, Z: 2 * he.Z * float64(i)}, Normal: r3.Vec{Z: 1},
					NormalImpulse: float64(n-i) * 9.8e-3 / 4, State: sim.Sticking})
			}
		}
		r.Frames = append(r.Frames, fr)
	}
	return m, r
}

// gridScene is a 10 × 10 field of mixed shapes (spheres, capsules,
// cylinders, boxes) falling onto the floor, with one contact per body.
func gridScene(frames int) (*sim.Model, *sim.Run) {
	m := &sim.Model{Static: []sim.StaticShape{{Name: "floor", Shape: contact.Shape{Kind: contact.Plane, Local: contact.IdentityPose}}}}
	r := &sim.Run{TimeStep: 1e-3}
	shapes := []contact.Shape{
		{Kind: contact.Sphere, Radius: 0.05, Local: contact.IdentityPose},
		{Kind: contact.Capsule, Radius: 0.04, HalfLength: 0.05, Local: contact.IdentityPose},
		{Kind: contact.Cylinder, Radius: 0.05, HalfLength: 0.04, Local: contact.IdentityPose},
		{Kind: contact.Box, HalfExtents: r3.Vec{X: 0.05, Y: 0.04, Z: 0.03}, Local: contact.IdentityPose},
	}
	for i := 0; i < 100; i++ {
		name := fmt.Sprintf("part%d", i)
		m.Bodies = append(m.Bodies, sim.Body{Name: name, Mass: 1, Inertia: contact.Identity3,
			Shapes: []contact.Shape{shapes[i%4]}, Joint: sim.Joint{Kind: sim.Free, Parent: -1}})
		r.BodyNames = append(r.BodyNames, name)
	}
	for f := 0; f < frames; f++ {
		fr := sim.Frame{Step: f, T: float64(f) * r.TimeStep}
		for i := 0; i < 100; i++ {
			p := r3.Vec{X: 0.2 * float64(i%10), Y: 0.2 * float64(i/10), Z: 0.05 + 0.3*float64(frames-f)/float64(frames)}
			q := contact.QuatFromAxisAngle(r3.Vec{X: 1, Y: float64(i % 3)}, 0.01*float64(f+i))
			fr.Bodies = append(fr.Bodies, sim.BodyFrame{Pose: contact.Pose{Pos: p, Rot: q}})
			st := sim.Separating
			if i%3 == 0 {
				st = sim.Sliding
			}
			r.Contacts = append(r.Contacts, sim.ContactRecord{Frame: f, T: fr.T, A: "floor", B: r.BodyNames[i],
				Point: r3.Vec{X: p.X, Y: p.Y}, Normal: r3.Vec{Z: 1}, NormalImpulse: 5e-3, FrictionImpulse: r3.Vec{X: 1e-3}, State: st})
		}
		r.Frames = append(r.Frames, fr)
	}
	return m, r
}

func benchSnapshot(b *testing.B, m *sim.Model, r *sim.Run, w, h int) {
	needDisplay(b)
	s, err := NewScene(m, r, nil)
	if err != nil {
		b.Fatal(err)
	}
	rd, err := NewRenderer(s, w, h, RendererOptions{})
	if err != nil {
		b.Fatal(err)
	}
	defer rd.Close()
	cam := FitCamera(s.Bounds(), float64(w)/float64(h))
	st := &Style{}
	var img *image.RGBA
	// One frame first: the text panels and buffers reach their size.
	if img, err = rd.Render(0, cam, st, img); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if img, err = rd.Render(i%len(r.Frames), cam, st, img); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkSnapshotTenBoxStack renders a ten-box stack (40 contacts) at
// 800×600 with 4× multisampling, reading the pixels back.
func BenchmarkSnapshotTenBoxStack(b *testing.B) {
	m, r := stackScene(10, 50)
	benchSnapshot(b, m, r, 800, 600)
}

// BenchmarkSnapshot100Bodies renders 100 mixed shapes with 100 contacts.
func BenchmarkSnapshot100Bodies(b *testing.B) {
	m, r := gridScene(50)
	benchSnapshot(b, m, r, 800, 600)
}

// BenchmarkBuildFrame100Bodies is the CPU side of a frame alone: the draw
// list of the 100-body scene.
func BenchmarkBuildFrame100Bodies(b *testing.B) {
	m, r := gridScene(50)
	s, err := NewScene(m, r, nil)
	if err != nil {
		b.Fatal(err)
	}
	cam := FitCamera(s.Bounds(), 4.0/3)
	var d drawList
	st := &Style{}
	s.build(0, cam, 600, st, &d)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		s.build(i%len(r.Frames), cam, 600, st, &d)
	}
}
