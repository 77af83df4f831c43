package viewer

import (
	"errors"
	"fmt"
	"math"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

// Scene is a run matched to its model, ready to draw: bodies of the run
// found in the model by name, the bounds of the whole motion, the contact
// events, and optionally a logged trajectory matched by body name.
type Scene struct {
	model  *sim.Model
	run    *sim.Run
	bodyOf []int // run body → model body
	bounds Bounds
	events []sim.Event
	// maxForce is the largest contact force of the run (N).
	maxForce float64
	log      *Trajectory
	logBody  []int // run body → log body, or -1
	grid     []groundPatch
}

// groundPatch is the finite piece of a static plane that is drawn, with the
// grid on it: the square of half-size half about centre in the plane's
// frame, grid lines every step metres, a major line every fifth.
type groundPatch struct {
	pose   contact.Pose
	centre [2]float64
	half   float64
	step   float64
}

// NewScene checks that the run can be drawn with the model (every body of
// the run is a body of the model, every frame has every body, the time step
// is positive) and, when log is not nil, that the log names at least one
// body of the run.
func NewScene(m *sim.Model, r *sim.Run, log *Trajectory) (*Scene, error) {
	if m == nil || r == nil {
		return nil, errors.New("viewer: nil model or run")
	}
	if len(r.Frames) == 0 {
		return nil, errors.New("run has no frames")
	}
	if !(r.TimeStep > 0) {
		return nil, fmt.Errorf("run time step %v is not positive", r.TimeStep)
	}
	s := &Scene{model: m, run: r, bodyOf: make([]int, len(r.BodyNames)), log: log}
	for i, name := range r.BodyNames {
		s.bodyOf[i] = -1
		for j := range m.Bodies {
			if m.Bodies[j].Name == name {
				s.bodyOf[i] = j
				break
			}
		}
		if s.bodyOf[i] < 0 {
			return nil, fmt.Errorf("run body %q is not a body of the scene (its bodies: %s)", name, modelBodyNames(m))
		}
	}
	for f := range r.Frames {
		if n := len(r.Frames[f].Bodies); n != len(r.BodyNames) {
			return nil, fmt.Errorf("frame %d has %d bodies, the run names %d", f, n, len(r.BodyNames))
		}
	}
	if log != nil {
		s.logBody = make([]int, len(r.BodyNames))
		matched := 0
		for i, name := range r.BodyNames {
			s.logBody[i] = log.Body(name)
			if s.logBody[i] >= 0 {
				matched++
			}
		}
		if matched == 0 {
			return nil, fmt.Errorf("the log names no body of the run (log bodies: %v; run bodies: %v)", log.Bodies, r.BodyNames)
		}
	}
	s.bounds = s.motionBounds()
	s.events = r.Events()
	s.maxForce = maxContactForce(r)
	s.grid = s.groundPatches()
	return s, nil
}

func modelBodyNames(m *sim.Model) string {
	if len(m.Bodies) == 0 {
		return "none"
	}
	s := ""
	for i, b := range m.Bodies {
		if i > 0 {
			s += ", "
		}
		s += b.Name
	}
	return s
}

// Run returns the scene's run.
func (s *Scene) Run() *sim.Run { return s.run }

// Bounds returns the box that holds every body's shapes in every frame,
// and the static shapes other than planes.
func (s *Scene) Bounds() Bounds { return s.bounds }

// Events returns the run's contact events (sim.Run.Events).
func (s *Scene) Events() []sim.Event { return s.events }

// DefaultArrowScale returns the arrow scale (m/N) that draws the largest
// contact force of the run a quarter of the scene radius long.
func (s *Scene) DefaultArrowScale() float64 {
	if s.maxForce <= 0 {
		return 0
	}
	return 0.25 * math.Max(s.bounds.Radius(), 1e-3) / s.maxForce
}

// shapeRadius returns the radius of a ball about the shape's origin that
// holds it.
func shapeRadius(sh *contact.Shape) float64 {
	switch sh.Kind {
	case contact.Sphere:
		return sh.Radius
	case contact.Capsule:
		return sh.Radius + sh.HalfLength
	case contact.Cylinder:
		return math.Hypot(sh.Radius, sh.HalfLength)
	case contact.Box:
		return r3.Norm(sh.HalfExtents)
	}
	return 0
}

func (s *Scene) motionBounds() Bounds {
	b := emptyBounds()
	for f := range s.run.Frames {
		for i, bf := range s.run.Frames[f].Bodies {
			body := &s.model.Bodies[s.bodyOf[i]]
			if len(body.Shapes) == 0 {
				b.addSphere(bf.Pose.Pos, 0)
			}
			for k := range body.Shapes {
				sh := &body.Shapes[k]
				b.addSphere(bf.Pose.Apply(sh.Local.Pos), shapeRadius(sh))
			}
		}
	}
	for i := range s.model.Static {
		sh := &s.model.Static[i].Shape
		if sh.Kind != contact.Plane {
			b.addSphere(sh.Local.Pos, shapeRadius(sh))
		}
	}
	return b
}

// niceStep returns the number of the form {1, 2, 5}·10^k nearest above x.
func niceStep(x float64) float64 {
	if !(x > 0) {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(x)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= x*(1-1e-9) {
			return m * p
		}
	}
	return 10 * p
}

func (s *Scene) groundPatches() []groundPatch {
	var ps []groundPatch
	c, r := s.bounds.Center(), math.Max(s.bounds.Radius(), 0.05)
	for i := range s.model.Static {
		sh := &s.model.Static[i].Shape
		if sh.Kind != contact.Plane {
			continue
		}
		local := sh.Local.ApplyInv(c)
		half := 1.5 * r
		step := niceStep(half / 6)
		// Snap the centre to the grid so that lines fall on multiples of
		// the step in the plane's frame.
		cu := step * math.Round(local.X/step)
		cv := step * math.Round(local.Y/step)
		half = step * math.Ceil(half/step)
		ps = append(ps, groundPatch{pose: sh.Local, centre: [2]float64{cu, cv}, half: half, step: step})
	}
	return ps
}

// GridStep returns the spacing of the grid on the first static plane, or 0
// without planes.
func (s *Scene) GridStep() float64 {
	if len(s.grid) == 0 {
		return 0
	}
	return s.grid[0].step
}

// ContactID identifies a contact across frames: its two bodies and the
// feature pair that made it.
type ContactID struct {
	A, B    string
	Feature uint32
}

// ID returns the identity of a contact record.
func ID(c *sim.ContactRecord) ContactID { return ContactID{c.A, c.B, c.Feature} }

// BodyError is the distance between a body's simulated and logged origins
// in one frame.
type BodyError struct {
	Body     string
	Sim, Log r3.Vec
	Distance float64
}

// PositionErrors appends to dst the position error of every body the log
// has a sample for at the frame's time.
func (s *Scene) PositionErrors(frame int, dst []BodyError) []BodyError {
	if s.log == nil {
		return dst
	}
	f := &s.run.Frames[frame]
	for i, lb := range s.logBody {
		if lb < 0 {
			continue
		}
		p, _, ok := s.log.PoseAt(lb, f.T)
		if !ok {
			continue
		}
		sp := f.Bodies[i].Pose.Pos
		dst = append(dst, BodyError{Body: s.run.BodyNames[i], Sim: sp, Log: p.Pos, Distance: r3.Norm(r3.Sub(p.Pos, sp))})
	}
	return dst
}

// PickContact returns the index within the frame's contacts of the contact
// whose point projects nearest to pixel (x, y), if one lies within radius
// pixels.
func (s *Scene) PickContact(frame int, cam Camera, width, height int, x, y, radius float64) (int, bool) {
	best, bestD := -1, radius*radius
	recs := s.run.ContactsInFrame(frame)
	for i := range recs {
		px, py, ok := cam.Project(recs[i].Point, width, height)
		if !ok {
			continue
		}
		if d := (px-x)*(px-x) + (py-y)*(py-y); d <= bestD {
			best, bestD = i, d
		}
	}
	return best, best >= 0
}

// ContactText describes a contact record for the on-screen panel: bodies,
// state, point, gap, impulses and forces, slip speed.
func ContactText(c *sim.ContactRecord, h float64) []string {
	ft := r3.Norm(c.FrictionImpulse)
	return []string{
		fmt.Sprintf("contact %s / %s  feature %d", c.A, c.B, c.Feature),
		fmt.Sprintf("state     %s", c.State),
		fmt.Sprintf("point     %.4f %.4f %.4f m", c.Point.X, c.Point.Y, c.Point.Z),
		fmt.Sprintf("direction %.3f %.3f %.3f", c.Normal.X, c.Normal.Y, c.Normal.Z),
		fmt.Sprintf("gap       %.4g mm", c.Gap*1e3),
		fmt.Sprintf("normal    %.4g N   (impulse %.4g N s)", c.NormalImpulse/h, c.NormalImpulse),
		fmt.Sprintf("friction  %.4g N   (impulse %.4g N s)", ft/h, ft),
		fmt.Sprintf("slip      %.4g mm/s", c.Slip*1e3),
	}
}

// Style selects what a frame shows.
type Style struct {
	// ArrowScale in metres per newton; 0 selects Scene.DefaultArrowScale.
	ArrowScale float64
	// Hide parts of the picture.
	HideGrid, HideContacts, HideGhost, HideTrails, HideText bool
	// ShowHelp draws the key and mouse bindings over the picture.
	ShowHelp bool
	// Selected is the contact whose values are shown, if any.
	Selected *ContactID
}

// instance is one mesh drawn with a model matrix and a colour.
type instance struct {
	mesh   meshID
	model  mat4
	normal mat3
	color  rgba
	unlit  bool
}

// drawList is what one frame draws, in order: opaque shapes; lines (grid,
// trails) with depth test; translucent ghosts; then, over everything,
// contact glyphs and error segments.
type drawList struct {
	opaque       []instance
	ground       []instance // drawn with polygon offset under the grid
	ghosts       []instance
	glyphs       []instance
	lines        []float32 // x y z r g b a per vertex, pairs
	overlayLines []float32
}

func (d *drawList) reset() {
	d.opaque = d.opaque[:0]
	d.ground = d.ground[:0]
	d.ghosts = d.ghosts[:0]
	d.glyphs = d.glyphs[:0]
	d.lines = d.lines[:0]
	d.overlayLines = d.overlayLines[:0]
}

func appendLine(dst []float32, a, b r3.Vec, c rgba) []float32 {
	return append(dst,
		float32(a.X), float32(a.Y), float32(a.Z), c[0], c[1], c[2], c[3],
		float32(b.X), float32(b.Y), float32(b.Z), c[0], c[1], c[2], c[3])
}

// shapeInstances appends the meshes that draw shape sh at world pose p.
func shapeInstances(dst []instance, sh *contact.Shape, p contact.Pose, c rgba) []instance {
	add := func(id meshID, q contact.Pose, scale r3.Vec) {
		m, n := poseScale(q, scale)
		dst = append(dst, instance{mesh: id, model: m, normal: n, color: c})
	}
	w := p.Mul(sh.Local)
	r := sh.Radius
	switch sh.Kind {
	case contact.Sphere:
		add(meshSphere, w, r3.Vec{X: r, Y: r, Z: r})
	case contact.Box:
		add(meshBox, w, sh.HalfExtents)
	case contact.Cylinder:
		add(meshCylinder, w, r3.Vec{X: r, Y: r, Z: sh.HalfLength})
	case contact.Capsule:
		add(meshCylinder, w, r3.Vec{X: r, Y: r, Z: sh.HalfLength})
		for _, z := range []float64{-sh.HalfLength, sh.HalfLength} {
			add(meshSphere, w.Mul(contact.Pose{Pos: r3.Vec{Z: z}, Rot: contact.IdentityQuat}), r3.Vec{X: r, Y: r, Z: r})
		}
	}
	return dst
}

// gridLines appends the grid lines of the ground patches.
func (s *Scene) gridLines(dst []float32) []float32 {
	for _, g := range s.grid {
		n := int(math.Round(g.half / g.step))
		for axis := 0; axis < 2; axis++ {
			for k := -n; k <= n; k++ {
				c := toRGBA(gridColor)
				idx := int(math.Round((g.centre[axis] + float64(k)*g.step) / g.step))
				if idx%5 == 0 {
					c = toRGBA(gridMajorColor)
				}
				var a, b r3.Vec
				off := g.centre[axis] + float64(k)*g.step
				if axis == 0 {
					a = r3.Vec{X: off, Y: g.centre[1] - g.half}
					b = r3.Vec{X: off, Y: g.centre[1] + g.half}
				} else {
					a = r3.Vec{X: g.centre[0] - g.half, Y: off}
					b = r3.Vec{X: g.centre[0] + g.half, Y: off}
				}
				dst = appendLine(dst, g.pose.Apply(a), g.pose.Apply(b), c)
			}
		}
	}
	return dst
}

// trailLines appends the paths of the body origins over the whole run, and
// of the logged positions, at most maxTrailPoints segments each.
func (s *Scene) trailLines(dst []float32) []float32 {
	const maxTrailPoints = 2000
	r := s.run
	stride := max(1, len(r.Frames)/maxTrailPoints)
	simC := toRGBA(trailSimColor)
	for b := range r.BodyNames {
		for f := stride; f < len(r.Frames); f += stride {
			dst = appendLine(dst, r.Frames[f-stride].Bodies[b].Pose.Pos, r.Frames[f].Bodies[b].Pose.Pos, simC)
		}
	}
	if s.log == nil {
		return dst
	}
	logC := toRGBA(GhostColor)
	logC[3] = 0.9
	for _, lb := range s.logBody {
		if lb < 0 {
			continue
		}
		n := len(s.log.Times)
		ls := max(1, n/maxTrailPoints)
		prev := -1
		for i := 0; i < n; i += ls {
			if !s.log.Valid[lb][i] {
				continue
			}
			if prev >= 0 {
				dst = appendLine(dst, s.log.Pos[lb][prev], s.log.Pos[lb][i], logC)
			}
			prev = i
		}
	}
	return dst
}

// pixelSize returns the world length that spans one pixel at point p.
func pixelSize(cam Camera, p r3.Vec, height int) float64 {
	d := r3.Norm(r3.Sub(p, cam.Eye()))
	return 2 * d * math.Tan(cam.FOV/2) / float64(height)
}

// Sizes of contact glyphs in pixels: they stay legible at any zoom.
const (
	markerPixels     = 5
	shaftPixels      = 1.5
	headPixels       = 5
	minArrowPixels   = 4
	selectedRingFrac = 1.7
)

// arrow appends a shaft and a head from p along force vector f drawn at
// scale metres per newton.
func arrow(dst []instance, p, f r3.Vec, scale, px float64, c rgba) []instance {
	fl := r3.Norm(f)
	length := fl * scale
	if !(length > minArrowPixels*px) {
		return dst
	}
	dir := r3.Scale(1/fl, f)
	rot := rotationTo(dir)
	head := math.Min(3*headPixels*px, 0.4*length)
	shaft := length - head
	m, n := poseScale(contact.Pose{Pos: r3.Add(p, r3.Scale(shaft/2, dir)), Rot: rot},
		r3.Vec{X: shaftPixels * px, Y: shaftPixels * px, Z: shaft / 2})
	dst = append(dst, instance{mesh: meshCylinder, model: m, normal: n, color: c})
	m, n = poseScale(contact.Pose{Pos: r3.Add(p, r3.Scale(shaft, dir)), Rot: rot},
		r3.Vec{X: headPixels * px, Y: headPixels * px, Z: head})
	dst = append(dst, instance{mesh: meshCone, model: m, normal: n, color: c})
	return dst
}

// build fills d with frame's picture seen by cam on a viewport height
// pixels tall.
func (s *Scene) build(frame int, cam Camera, height int, st *Style, d *drawList) {
	d.reset()
	r := s.run
	f := &r.Frames[frame]
	for i, bf := range f.Bodies {
		body := &s.model.Bodies[s.bodyOf[i]]
		c := toRGBA(BodyColor(s.bodyOf[i]))
		for k := range body.Shapes {
			d.opaque = shapeInstances(d.opaque, &body.Shapes[k], bf.Pose, c)
		}
	}
	for i := range s.model.Static {
		sh := &s.model.Static[i].Shape
		if sh.Kind != contact.Plane {
			d.opaque = shapeInstances(d.opaque, sh, contact.IdentityPose, toRGBA(staticColor))
		}
	}
	for _, g := range s.grid {
		p := g.pose.Mul(contact.Pose{Pos: r3.Vec{X: g.centre[0], Y: g.centre[1]}, Rot: contact.IdentityQuat})
		m, n := poseScale(p, r3.Vec{X: g.half, Y: g.half, Z: 1})
		d.ground = append(d.ground, instance{mesh: meshQuad, model: m, normal: n, color: toRGBA(groundColor)})
	}
	if s.log != nil && !st.HideGhost {
		gc := toRGBA(GhostColor)
		ec := toRGBA(ErrorColor)
		for i, lb := range s.logBody {
			if lb < 0 {
				continue
			}
			p, hasRot, ok := s.log.PoseAt(lb, f.T)
			if !ok {
				continue
			}
			if !hasRot {
				p.Rot = f.Bodies[i].Pose.Rot
			}
			body := &s.model.Bodies[s.bodyOf[i]]
			for k := range body.Shapes {
				d.ghosts = shapeInstances(d.ghosts, &body.Shapes[k], p, gc)
			}
			d.overlayLines = appendLine(d.overlayLines, f.Bodies[i].Pose.Pos, p.Pos, ec)
		}
	}
	if !st.HideContacts {
		scale := st.ArrowScale
		if scale == 0 {
			scale = s.DefaultArrowScale()
		}
		recs := r.ContactsInFrame(frame)
		for i := range recs {
			c := &recs[i]
			px := pixelSize(cam, c.Point, height)
			col := toRGBA(StateColor(c.State))
			d.glyphs = arrow(d.glyphs, c.Point, r3.Scale(c.NormalImpulse/r.TimeStep, c.Normal), scale, px, col)
			d.glyphs = arrow(d.glyphs, c.Point, r3.Scale(1/r.TimeStep, c.FrictionImpulse), scale, px, lighten(col, 0.45))
		}
		for i := range recs {
			c := &recs[i]
			px := pixelSize(cam, c.Point, height)
			rad := markerPixels * px
			if st.Selected != nil && *st.Selected == ID(c) {
				m, n := poseScale(contact.Pose{Pos: c.Point, Rot: contact.IdentityQuat}, r3.Vec{X: rad * selectedRingFrac, Y: rad * selectedRingFrac, Z: rad * selectedRingFrac})
				d.glyphs = append(d.glyphs, instance{mesh: meshSphere, model: m, normal: n, color: toRGBA(SelectedColor), unlit: true})
			}
			m, n := poseScale(contact.Pose{Pos: c.Point, Rot: contact.IdentityQuat}, r3.Vec{X: rad, Y: rad, Z: rad})
			d.glyphs = append(d.glyphs, instance{mesh: meshSphere, model: m, normal: n, color: toRGBA(StateColor(c.State)), unlit: true})
		}
	}
}
