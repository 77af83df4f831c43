package scenarios

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/spatial/r3"
	"gopkg.in/yaml.v3"
)

// The fields of each part of a scene file. docs/scene-format.md describes
// them; the tests check that it mentions every one.
var (
	sceneFields    = []string{"name", "description", "gravity", "settings", "materials", "static", "bodies", "loads", "actuators", "controller"}
	settingsFields = []string{"time_step", "duration", "frame_every", "contact_margin", "correction_rate", "correction_max_speed", "bounce_threshold", "solver"}
	solverFields   = []string{"tolerance", "max_iterations", "smoothing"}
	materialFields = []string{"default", "surfaces", "pairs"}
	propsFields    = []string{"friction", "restitution"}
	pairFields     = []string{"between", "friction", "restitution"}
	sizeFields     = []string{"size", "radius", "length"}
	planeFields    = []string{"point", "normal", "tilt"}
	shapeFields    = append([]string{"kind", "pose"}, sizeFields...)
	staticFields   = append(append([]string{"name", "material"}, shapeFields...), planeFields...)
	bodyFields     = []string{"name", "material", "shapes", "density", "mass", "com", "inertia", "pose", "velocity", "joint"}
	bodyPoseFields = append(append([]string{}, poseFields...), "on", "at", "lift")
	inertiaFields  = []string{"principal", "matrix"}
	velocityFields = []string{"linear", "angular"}
	jointFields    = []string{"name", "kind", "parent", "frame", "axis", "limits", "damping", "friction", "armature", "position", "velocity", "rotation", "spin"}
	limitFields    = []string{"lower", "upper"}
	loadFields     = []string{"body", "point", "force", "torque", "schedule"}
	keyFields      = []string{"time", "force", "torque"}
)

// Defaults the scene format adds to those of sim.Settings.
const (
	// DefaultDuration of a rollout in seconds when the scene gives none.
	DefaultDuration = 1.0
	// DefaultFriction and DefaultRestitution apply to material pairs when
	// the scene gives no default of its own.
	DefaultFriction    = 0.5
	DefaultRestitution = 0.0
)

// shapeKinds lists the kinds a body may use, for messages.
const bodyShapeKinds = "sphere, box, capsule, cylinder"

// scene decodes the whole document.
func (d *decoder) scene(root *yaml.Node) *Scene {
	f := d.mapping(root, "", sceneFields...)
	m := &sim.Model{Gravity: r3.Vec{Z: -sim.StandardGravity}}
	s := &Scene{Model: m}
	if f.has("name") {
		s.Name = d.text(f.get("name"), "name")
	}
	if f.has("description") {
		s.Description = d.text(f.get("description"), "description")
	}
	if f.has("gravity") {
		m.Gravity = d.vec3(f.get("gravity"), "gravity")
	}
	s.Settings = d.settings(f.get("settings"))
	var surfaces []string
	m.Materials, surfaces = d.materials(f.get("materials"))
	names := map[string]*yaml.Node{} // every body and static name
	var planes map[string]contact.Pose
	m.Static, planes = d.statics(f.get("static"), surfaces, names)
	m.Bodies = d.bodies(f.get("bodies"), surfaces, names, planes)
	m.Loads = d.loads(f.get("loads"), m.Bodies)
	m.Actuators = d.actuators(f.get("actuators"), m.Bodies)
	m.Controller = d.controller(f.get("controller"), m.Actuators, m.Bodies)
	d.overlaps(m, f.get("bodies"))
	s.Warnings = d.warnings
	return s
}

// settings decodes the settings block and fills in defaults.
func (d *decoder) settings(n *yaml.Node) sim.Settings {
	s := sim.Settings{Duration: DefaultDuration}
	if n == nil {
		return s.WithDefaults()
	}
	f := d.mapping(n, "settings", settingsFields...)
	// sim.Settings reads zero as "use the default", so a written zero
	// would silently become the default; those fields must be > 0.
	if v := f.get("time_step"); v != nil {
		s.TimeStep = d.positive(v, f.sub("time_step"), "s")
	}
	if v := f.get("duration"); v != nil {
		s.Duration = d.positive(v, f.sub("duration"), "s")
	}
	if v := f.get("frame_every"); v != nil {
		s.FrameEvery = d.integer(v, f.sub("frame_every"), 1, math.MaxInt32)
	}
	if v := f.get("contact_margin"); v != nil {
		s.Margin = d.positive(v, f.sub("contact_margin"), "m")
	}
	if v := f.get("correction_rate"); v != nil {
		s.CorrectionRate = d.float(v, f.sub("correction_rate"))
		if s.CorrectionRate <= 0 || s.CorrectionRate > 1 {
			d.fail(v, f.sub("correction_rate"), "must be within (0, 1], the fraction of a penetration removed per step; got %g", s.CorrectionRate)
		}
	}
	if v := f.get("correction_max_speed"); v != nil {
		s.MaxCorrection = d.positive(v, f.sub("correction_max_speed"), "m/s")
	}
	if v := f.get("bounce_threshold"); v != nil {
		s.BounceThreshold = d.positive(v, f.sub("bounce_threshold"), "m/s")
	}
	if v := f.get("solver"); v != nil {
		g := d.mapping(v, f.sub("solver"), solverFields...)
		if v := g.get("tolerance"); v != nil {
			s.Solver.Tolerance = d.positive(v, g.sub("tolerance"), "")
		}
		if v := g.get("max_iterations"); v != nil {
			s.Solver.MaxIterations = d.integer(v, g.sub("max_iterations"), 1, 1_000_000)
		}
		if v := g.get("smoothing"); v != nil {
			s.Solver.Smoothing = d.nonNegative(v, g.sub("smoothing"), "")
		}
	}
	return s.WithDefaults()
}

// props decodes {friction, restitution} over base.
func (d *decoder) props(f *fields, base sim.PairProps) sim.PairProps {
	p := base
	if v := f.get("friction"); v != nil {
		p.Friction = d.float(v, f.sub("friction"))
		if p.Friction < 0 {
			d.fail(v, f.sub("friction"), "friction coefficient μ must be ≥ 0, got %g", p.Friction)
		}
	}
	if v := f.get("restitution"); v != nil {
		p.Restitution = d.float(v, f.sub("restitution"))
		if p.Restitution < 0 || p.Restitution > 1 {
			d.fail(v, f.sub("restitution"), "restitution e must be within [0, 1], got %g", p.Restitution)
		}
	}
	return p
}

// materials decodes the materials block and returns the declared surfaces.
func (d *decoder) materials(n *yaml.Node) (sim.Materials, []string) {
	m := sim.Materials{Default: sim.PairProps{Friction: DefaultFriction, Restitution: DefaultRestitution}}
	if n == nil {
		return m, nil
	}
	f := d.mapping(n, "materials", materialFields...)
	if v := f.get("default"); v != nil {
		m.Default = d.props(d.mapping(v, f.sub("default"), propsFields...), m.Default)
	}
	var surfaces []string
	if v := f.get("surfaces"); v != nil {
		for i, e := range d.seq(v, f.sub("surfaces"), "surface names") {
			p := fmt.Sprintf("%s[%d]", f.sub("surfaces"), i)
			name := d.name(e, p)
			if slices.Contains(surfaces, name) {
				d.fail(e, p, "surface %q is listed twice", name)
			}
			surfaces = append(surfaces, name)
		}
	}
	if v := f.get("pairs"); v != nil {
		first := map[[2]string]string{}
		for i, e := range d.seq(v, f.sub("pairs"), "material pairs") {
			p := fmt.Sprintf("%s[%d]", f.sub("pairs"), i)
			g := d.mapping(e, p, pairFields...)
			bn := g.require("between", "give the two surfaces as [a, b]")
			items := d.seq(bn, g.sub("between"), "two surface names")
			if len(items) != 2 {
				d.fail(bn, g.sub("between"), "must name exactly two surfaces [a, b] (the same name twice for a surface against itself)")
			}
			a := d.surface(items[0], g.sub("between")+"[0]", surfaces)
			b := d.surface(items[1], g.sub("between")+"[1]", surfaces)
			key := [2]string{min(a, b), max(a, b)}
			if prev, dup := first[key]; dup {
				d.fail(bn, g.sub("between"), "the pair (%s, %s) is already given at %s", a, b, prev)
			}
			first[key] = p
			m.Pairs = append(m.Pairs, sim.MaterialPair{A: a, B: b, PairProps: d.props(g, m.Default)})
		}
	}
	return m, surfaces
}

// surface returns a declared surface name.
func (d *decoder) surface(n *yaml.Node, path string, surfaces []string) string {
	name := d.name(n, path)
	if !slices.Contains(surfaces, name) {
		if len(surfaces) == 0 {
			d.fail(n, path, "unknown surface %q; declare it under materials.surfaces", name)
		}
		d.fail(n, path, "unknown surface %q; declared surfaces: %s", name, strings.Join(surfaces, ", "))
	}
	return name
}

// shapeSizes lists which size fields each kind takes.
var shapeSizes = map[contact.ShapeKind][]string{
	contact.Sphere:   {"radius"},
	contact.Box:      {"size"},
	contact.Capsule:  {"radius", "length"},
	contact.Cylinder: {"radius", "length"},
	contact.Plane:    {},
}

// shape decodes the kind, sizes and pose of a shape from f.
func (d *decoder) shape(f *fields, static bool) contact.Shape {
	kn := f.require("kind", "one of "+bodyShapeKinds+map[bool]string{true: ", plane", false: ""}[static])
	k, ok := contact.ParseShapeKind(d.text(kn, f.sub("kind")))
	switch {
	case !ok && static:
		d.fail(kn, f.sub("kind"), "unknown shape kind %q; valid kinds: %s, plane", kn.Value, bodyShapeKinds)
	case !ok:
		d.fail(kn, f.sub("kind"), "unknown shape kind %q; valid kinds: %s", kn.Value, bodyShapeKinds)
	case k == contact.Plane && !static:
		d.fail(kn, f.sub("kind"), "a plane is unbounded and may only be static geometry; body shapes are %s", bodyShapeKinds)
	}
	takes := shapeSizes[k]
	for _, key := range append(append([]string{}, sizeFields...), planeFields...) {
		if f.has(key) && !slices.Contains(takes, key) && !(k == contact.Plane && slices.Contains(planeFields, key)) {
			want := strings.Join(takes, " and ")
			if k == contact.Plane {
				want = "point and normal or tilt, or a pose"
			}
			d.fail(f.get(key), f.sub(key), "does not apply to a %s; a %s takes %s", k, k, want)
		}
	}
	s := contact.Shape{Kind: k, Local: contact.IdentityPose}
	for _, key := range takes {
		v := f.require(key, fmt.Sprintf("a %s takes %s", k, strings.Join(takes, " and ")))
		switch key {
		case "radius":
			s.Radius = d.positive(v, f.sub(key), "m")
		case "length":
			s.HalfLength = d.positive(v, f.sub(key), "m") / 2
		case "size":
			e := d.vec3(v, f.sub(key))
			for i, x := range []float64{e.X, e.Y, e.Z} {
				if x <= 0 {
					d.fail(v.Content[i], fmt.Sprintf("%s[%d]", f.sub(key), i), "box size [x, y, z] holds the full extents, each > 0 m; got %g", x)
				}
			}
			s.HalfExtents = r3.Scale(0.5, e)
		}
	}
	if k == contact.Plane {
		f.exclusive("pose", "point")
		f.exclusive("pose", "normal")
		f.exclusive("pose", "tilt")
		f.exclusive("normal", "tilt")
		if v := f.get("point"); v != nil {
			s.Local.Pos = d.vec3(v, f.sub("point"))
		}
		if v := f.get("normal"); v != nil {
			s.Local.Rot = rotationTo(d.direction(v, f.sub("normal")))
		}
		if v := f.get("tilt"); v != nil {
			s.Local.Rot = d.turn(v, f.sub("tilt"))
		}
	}
	if v := f.get("pose"); v != nil {
		s.Local = d.pose(v, f.sub("pose"))
	}
	return s
}

// rotationTo returns the smallest rotation that takes +z to the unit
// vector n.
func rotationTo(n r3.Vec) contact.Quat {
	if n.Z < -1+1e-12 {
		return contact.Quat{X: 1} // half turn about x
	}
	// q = (1 + z·n, z × n) normalised is the half-way rotation.
	// Adding 0 turns −0 into +0, which a scene file cannot tell apart.
	return contact.Quat{W: 1 + n.Z, X: 0 - n.Y, Y: n.X + 0}.Normalize()
}

// uniqueName reads a body or static name and checks it is new.
func (d *decoder) uniqueName(f *fields, what string, names map[string]*yaml.Node) string {
	n := f.require("name", "every "+what+" needs a name")
	name := d.name(n, f.sub("name"))
	if name == "world" {
		d.fail(n, f.sub("name"), "the name \"world\" is reserved for the fixed world frame")
	}
	if prev, dup := names[name]; dup {
		d.fail(n, f.sub("name"), "name %q is already used at line %d; body and static names must be unique", name, prev.Line)
	}
	names[name] = n
	return name
}

// statics decodes the static geometry. It returns the poses of the planes
// by name, for bodies placed on them.
func (d *decoder) statics(n *yaml.Node, surfaces []string, names map[string]*yaml.Node) ([]sim.StaticShape, map[string]contact.Pose) {
	planes := map[string]contact.Pose{}
	if n == nil {
		return nil, planes
	}
	var out []sim.StaticShape
	for i, e := range d.seq(n, "static", "static shapes") {
		f := d.mapping(e, elemPath("static", i, e), staticFields...)
		st := sim.StaticShape{Name: d.uniqueName(f, "static shape", names)}
		if v := f.get("material"); v != nil {
			st.Material = d.surface(v, f.sub("material"), surfaces)
		}
		st.Shape = d.shape(f, true)
		if st.Shape.Kind == contact.Plane {
			planes[st.Name] = st.Shape.Local
		}
		out = append(out, st)
	}
	return out, planes
}

// bodyDecl is a decoded body before the tree is sorted.
type bodyDecl struct {
	body       sim.Body
	path       string
	node       *yaml.Node // the body's mapping
	parent     string
	parentNode *yaml.Node
}

// bodies decodes the bodies and orders them parent before child.
func (d *decoder) bodies(n *yaml.Node, surfaces []string, names map[string]*yaml.Node, planes map[string]contact.Pose) []sim.Body {
	if n == nil {
		return nil
	}
	var decls []*bodyDecl
	joints := map[string]string{} // joint name → path
	for i, e := range d.seq(n, "bodies", "bodies") {
		path := elemPath("bodies", i, e)
		f := d.mapping(e, path, bodyFields...)
		bd := &bodyDecl{path: path, node: e, parent: "world"}
		b := &bd.body
		b.Name = d.uniqueName(f, "body", names)
		if v := f.get("material"); v != nil {
			b.Material = d.surface(v, f.sub("material"), surfaces)
		}
		if v := f.get("shapes"); v != nil {
			for j, se := range d.seq(v, f.sub("shapes"), "shapes") {
				p := fmt.Sprintf("%s[%d]", f.sub("shapes"), j)
				b.Shapes = append(b.Shapes, d.shape(d.mapping(se, p, shapeFields...), false))
			}
		}
		d.massProps(f, b)
		d.joint(f, bd)
		if prev, dup := joints[b.Joint.Name]; dup {
			d.fail(f.get("joint"), f.sub("joint.name"), "joint name %q is already used by %s; give this joint a name of its own", b.Joint.Name, prev)
		}
		joints[b.Joint.Name] = f.sub("joint")
		d.start(f, b, planes)
		decls = append(decls, bd)
	}
	return d.sortTree(decls)
}

// massProps decodes density, or mass with optional com and inertia.
func (d *decoder) massProps(f *fields, b *sim.Body) {
	f.exclusive("density", "mass")
	f.exclusive("density", "com")
	f.exclusive("density", "inertia")
	switch {
	case f.has("density"):
		rho := d.positive(f.get("density"), f.sub("density"), "kg/m³")
		if len(b.Shapes) == 0 {
			d.fail(f.get("density"), f.sub("density"), "a body without shapes has no volume; give mass, com and inertia instead")
		}
		mp := d.shapesMass(f.get("density"), f.sub("density"), b.Shapes, rho)
		b.Mass, b.COM, b.Inertia = mp.Mass, mp.COM, mp.Inertia
	case f.has("mass"):
		b.Mass = d.positive(f.get("mass"), f.sub("mass"), "kg")
		switch {
		case f.has("inertia"):
			b.Inertia = d.inertia(f.get("inertia"), f.sub("inertia"))
			if f.has("com") {
				b.COM = d.vec3(f.get("com"), f.sub("com"))
			}
		case f.has("com"):
			d.fail(f.get("com"), f.sub("com"), "give inertia (about this centre of mass) with com, or leave both out to take them from the shapes")
		case len(b.Shapes) == 0:
			d.fail(f.get("mass"), f.sub("inertia"), "missing; a body without shapes needs its inertia given")
		default:
			// Uniform density: centroid and inertia of the shapes scaled
			// to the given mass.
			mp := d.shapesMass(f.get("mass"), f.sub("mass"), b.Shapes, 1)
			b.COM, b.Inertia = mp.COM, mp.Inertia.Scale(b.Mass/mp.Mass)
		}
	default:
		d.fail(f.node, f.sub("mass"), "missing; give density (kg/m³, mass properties from the shapes) or mass (kg)")
	}
	d.checkFinite(f.node, f.path, b)
}

// inertia decodes {principal: [I1, I2, I3]} or {matrix: [[...], ...]} and
// checks that a rigid body could have it.
func (d *decoder) inertia(n *yaml.Node, path string) contact.Mat3 {
	f := d.mapping(n, path, inertiaFields...)
	f.exclusive(inertiaFields...)
	var m contact.Mat3
	switch {
	case f.has("principal"):
		v := f.get("principal")
		p := d.floats(v, f.sub("principal"), 3, "the principal moments [Ixx, Iyy, Izz] in kg·m²")
		m = contact.Diag3(r3.Vec{X: p[0], Y: p[1], Z: p[2]})
		d.checkMoments(v, f.sub("principal"), p)
	case f.has("matrix"):
		v := f.get("matrix")
		rows := d.seq(v, f.sub("matrix"), "three rows of three numbers")
		if len(rows) != 3 {
			d.fail(v, f.sub("matrix"), "must be a symmetric 3×3 matrix: three rows of three numbers in kg·m²")
		}
		for i, r := range rows {
			row := d.floats(r, fmt.Sprintf("%s[%d]", f.sub("matrix"), i), 3, "a row of three numbers")
			copy(m[3*i:], row)
		}
		scale := 0.0
		for _, x := range m {
			scale = max(scale, math.Abs(x))
		}
		for i := 0; i < 3; i++ {
			for j := i + 1; j < 3; j++ {
				if math.Abs(m.At(i, j)-m.At(j, i)) > 1e-9*scale {
					d.fail(v, f.sub("matrix"), "must be symmetric; element [%d][%d] = %g but [%d][%d] = %g", i, j, m.At(i, j), j, i, m.At(j, i))
				}
			}
		}
		sym := mat.NewSymDense(3, []float64{m[0], m[1], m[2], m[1], m[4], m[5], m[2], m[5], m[8]})
		var eig mat.EigenSym
		if !eig.Factorize(sym, false) {
			d.fail(v, f.sub("matrix"), "eigenvalues could not be computed")
		}
		ev := eig.Values(nil)
		d.checkMoments(v, f.sub("matrix"), ev)
		// Keep the matrix exactly symmetric.
		m[3], m[6], m[7] = m[1], m[2], m[5]
	default:
		d.fail(f.node, path, "give principal: [Ixx, Iyy, Izz] or matrix: a symmetric 3×3 in kg·m²")
	}
	return m
}

// checkMoments checks principal moments: all positive and obeying the
// triangle inequality I₁ + I₂ ≥ I₃ (handbook property of every rigid
// body; equality for a flat plate).
func (d *decoder) checkMoments(n *yaml.Node, path string, p []float64) {
	s := slices.Clone(p)
	sort.Float64s(s)
	if s[0] <= 0 {
		d.fail(n, path, "inertia must be positive definite: principal moments are %s kg·m², and each must be > 0", fmtFloats(s))
	}
	if s[0]+s[1] < s[2]*(1-1e-9) {
		d.fail(n, path, "principal moments %s kg·m² violate the triangle inequality I₁ + I₂ ≥ I₃ (%g + %g < %g); no rigid body has this inertia", fmtFloats(s), s[0], s[1], s[2])
	}
}

func fmtFloats(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = fmt.Sprintf("%g", x)
	}
	return strings.Join(s, ", ")
}

// joint decodes a body's joint; without one the body is loose.
func (d *decoder) joint(f *fields, bd *bodyDecl) {
	j := &bd.body.Joint
	*j = sim.Joint{Name: bd.body.Name, Kind: sim.Free, Parent: -1, Frame: contact.IdentityPose}
	n := f.get("joint")
	if n == nil {
		return
	}
	g := d.mapping(n, f.sub("joint"), jointFields...)
	if v := g.get("name"); v != nil {
		j.Name = d.name(v, g.sub("name"))
	}
	kn := g.require("kind", "one of free, revolute, prismatic, fixed, ball")
	k, ok := sim.ParseJointKind(d.text(kn, g.sub("kind")))
	if !ok {
		d.fail(kn, g.sub("kind"), "unknown joint kind %q; valid kinds: free, revolute, prismatic, fixed, ball", kn.Value)
	}
	j.Kind = k
	if v := g.get("parent"); v != nil {
		bd.parent = d.name(v, g.sub("parent"))
		bd.parentNode = v
	}
	// Which fields each kind takes.
	var takes []string
	switch k {
	case sim.Free:
		takes = []string{"name", "kind", "parent"}
		if bd.parent != "world" {
			d.fail(bd.parentNode, g.sub("parent"), "a free joint's parent must be world (its start pose is given in world coordinates); use a ball or another joint kind under %q", bd.parent)
		}
	case sim.Fixed:
		takes = []string{"name", "kind", "parent", "frame"}
	case sim.Ball:
		takes = []string{"name", "kind", "parent", "frame", "damping", "friction", "armature", "rotation", "spin"}
	default:
		takes = []string{"name", "kind", "parent", "frame", "axis", "limits", "damping", "friction", "armature", "position", "velocity"}
	}
	for _, key := range jointFields {
		if g.has(key) && !slices.Contains(takes, key) {
			d.fail(g.get(key), g.sub(key), "does not apply to a %s joint; it takes %s", k, strings.Join(takes, ", "))
		}
	}
	if v := g.get("frame"); v != nil {
		j.Frame = d.pose(v, g.sub("frame"))
	}
	if k == sim.Revolute || k == sim.Prismatic {
		j.Axis = r3.Vec{Z: 1}
		if v := g.get("axis"); v != nil {
			j.Axis = d.direction(v, g.sub("axis"))
		}
	}
	unit := map[sim.JointKind]string{sim.Revolute: "rad", sim.Prismatic: "m", sim.Ball: "rad"}[k]
	if v := g.get("damping"); v != nil {
		j.Damping = d.nonNegative(v, g.sub("damping"), "("+map[bool]string{true: "N·s/m", false: "N·m·s/rad"}[k == sim.Prismatic]+")")
	}
	if v := g.get("friction"); v != nil {
		j.Friction = d.nonNegative(v, g.sub("friction"), "("+map[bool]string{true: "N", false: "N·m"}[k == sim.Prismatic]+")")
	}
	if v := g.get("armature"); v != nil {
		j.Armature = d.nonNegative(v, g.sub("armature"), "("+map[bool]string{true: "kg", false: "kg·m²"}[k == sim.Prismatic]+")")
	}
	if v := g.get("position"); v != nil {
		j.Position = d.float(v, g.sub("position"))
	}
	if v := g.get("velocity"); v != nil {
		j.Velocity = d.float(v, g.sub("velocity"))
	}
	if v := g.get("rotation"); v != nil {
		j.Rotation = d.rotation(d.mapping(v, g.sub("rotation"), "quat", "turn"))
	}
	if v := g.get("spin"); v != nil {
		j.Spin = d.vec3(v, g.sub("spin"))
	}
	if v := g.get("limits"); v != nil {
		h := d.mapping(v, g.sub("limits"), limitFields...)
		lo := d.float(h.require("lower", "give lower and upper in "+unit), h.sub("lower"))
		hi := d.float(h.require("upper", "give lower and upper in "+unit), h.sub("upper"))
		if lo > hi {
			d.fail(v, h.sub("lower"), "lower limit %g %s is above upper limit %g %s; need lower ≤ upper", lo, unit, hi, unit)
		}
		j.Limited, j.Lower, j.Upper = true, lo, hi
		if j.Position < lo || j.Position > hi {
			d.warn(v, g.sub("position"), Warning{Msg: fmt.Sprintf("starts at %g %s, outside its limits [%g, %g]", j.Position, unit, lo, hi)})
		}
	}
}

// start decodes the starting pose and velocity of a free body.
func (d *decoder) start(f *fields, b *sim.Body, planes map[string]contact.Pose) {
	b.Start.Pose = contact.IdentityPose
	if b.Joint.Kind != sim.Free {
		for _, key := range []string{"pose", "velocity"} {
			if f.has(key) {
				d.fail(f.get(key), f.sub(key), "applies only to a free body; a body on a %s joint starts at its joint's position and velocity", b.Joint.Kind)
			}
		}
		return
	}
	if v := f.get("pose"); v != nil {
		g := d.mapping(v, f.sub("pose"), bodyPoseFields...)
		rot := d.rotation(g)
		if on := g.get("on"); on != nil {
			g.exclusive("on", "position")
			name := d.name(on, g.sub("on"))
			plane, ok := planes[name]
			if !ok {
				d.fail(on, g.sub("on"), "%q is not a static plane; a body may rest on: %s", name, strings.Join(sortedKeys(planes), ", "))
			}
			at := []float64{0, 0}
			if v := g.get("at"); v != nil {
				at = d.floats(v, g.sub("at"), 2, "a position [x, y] along the plane")
			}
			lift := 0.0
			if v := g.get("lift"); v != nil {
				lift = d.nonNegative(v, g.sub("lift"), "m")
			}
			if len(b.Shapes) == 0 {
				d.fail(on, g.sub("on"), "a body without shapes cannot rest on a surface; give position instead")
			}
			b.Start.Pose = restOn(plane, b.Shapes, rot, at[0], at[1], lift)
		} else {
			for _, key := range []string{"at", "lift"} {
				if g.has(key) {
					d.fail(g.get(key), g.sub(key), "applies only with on: (the plane the body rests on)")
				}
			}
			b.Start.Pose.Rot = rot
			if v := g.get("position"); v != nil {
				b.Start.Pose.Pos = d.vec3(v, g.sub("position"))
			}
		}
	}
	if v := f.get("velocity"); v != nil {
		g := d.mapping(v, f.sub("velocity"), velocityFields...)
		if v := g.get("linear"); v != nil {
			b.Start.Linear = d.vec3(v, g.sub("linear"))
		}
		if v := g.get("angular"); v != nil {
			b.Start.Angular = d.vec3(v, g.sub("angular"))
		}
	}
}

func sortedKeys[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// sortTree orders the bodies so that each parent precedes its children,
// keeping file order otherwise, and sets the joints' parent indices.
func (d *decoder) sortTree(decls []*bodyDecl) []sim.Body {
	index := map[string]int{}
	for i, bd := range decls {
		index[bd.body.Name] = i
	}
	parent := make([]int, len(decls))
	for i, bd := range decls {
		parent[i] = -1
		if bd.parent == "world" {
			continue
		}
		p, ok := index[bd.parent]
		if !ok {
			valid := []string{"world"}
			for _, o := range decls {
				valid = append(valid, o.body.Name)
			}
			d.fail(bd.parentNode, bd.path+".joint.parent", "unknown parent %q; valid parents: %s", bd.parent, strings.Join(valid, ", "))
		}
		parent[i] = p
	}
	const (
		unseen = iota
		visiting
		done
	)
	state := make([]int, len(decls))
	newIndex := make([]int, len(decls))
	var order []int
	var visit func(i int, chain []int)
	visit = func(i int, chain []int) {
		switch state[i] {
		case done:
			return
		case visiting:
			// chain ends with the loop that leads back to i.
			k := slices.Index(chain, i)
			var names []string
			for _, c := range chain[k:] {
				names = append(names, fmt.Sprintf("%s (%s → %s)", decls[c].body.Joint.Name, decls[c].parent, decls[c].body.Name))
			}
			bd := decls[i]
			d.fail(bd.parentNode, bd.path+".joint.parent", "joints form a loop: %s; a kinematic tree needs every chain of parents to end at world", strings.Join(names, ", "))
		}
		state[i] = visiting
		if p := parent[i]; p >= 0 {
			visit(p, append(chain, i))
		}
		state[i] = done
		newIndex[i] = len(order)
		order = append(order, i)
	}
	for i := range decls {
		visit(i, nil)
	}
	out := make([]sim.Body, len(order))
	for k, i := range order {
		out[k] = decls[i].body
		if p := parent[i]; p >= 0 {
			out[k].Joint.Parent = newIndex[p]
		}
	}
	return out
}

// loads decodes the external loads.
func (d *decoder) loads(n *yaml.Node, bodies []sim.Body) []sim.Load {
	if n == nil {
		return nil
	}
	var out []sim.Load
	for i, e := range d.seq(n, "loads", "loads") {
		path := fmt.Sprintf("loads[%d]", i)
		f := d.mapping(e, path, loadFields...)
		bn := f.require("body", "name the body the load acts on")
		name := d.name(bn, f.sub("body"))
		idx := slices.IndexFunc(bodies, func(b sim.Body) bool { return b.Name == name })
		if idx < 0 {
			var valid []string
			for _, b := range bodies {
				valid = append(valid, b.Name)
			}
			d.fail(bn, f.sub("body"), "unknown body %q; bodies: %s", name, strings.Join(valid, ", "))
		}
		l := sim.Load{Body: idx}
		if v := f.get("point"); v != nil {
			l.Point = d.vec3(v, f.sub("point"))
		}
		f.exclusive("schedule", "force")
		f.exclusive("schedule", "torque")
		if v := f.get("force"); v != nil {
			l.Force = d.vec3(v, f.sub("force"))
		}
		if v := f.get("torque"); v != nil {
			l.Torque = d.vec3(v, f.sub("torque"))
		}
		if v := f.get("schedule"); v != nil {
			rows := d.seq(v, f.sub("schedule"), "{time, force, torque} rows")
			if len(rows) == 0 {
				d.fail(v, f.sub("schedule"), "needs at least one {time, force, torque} row")
			}
			for k, r := range rows {
				p := fmt.Sprintf("%s[%d]", f.sub("schedule"), k)
				g := d.mapping(r, p, keyFields...)
				key := sim.LoadKey{T: d.float(g.require("time", "give the time of this row in s"), g.sub("time"))}
				if v := g.get("force"); v != nil {
					key.Force = d.vec3(v, g.sub("force"))
				}
				if v := g.get("torque"); v != nil {
					key.Torque = d.vec3(v, g.sub("torque"))
				}
				if k > 0 && key.T < l.Schedule[k-1].T {
					d.fail(g.get("time"), g.sub("time"), "times must not decrease down the schedule: %g s follows %g s", key.T, l.Schedule[k-1].T)
				}
				l.Schedule = append(l.Schedule, key)
			}
		}
		out = append(out, l)
	}
	return out
}
