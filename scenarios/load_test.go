package scenarios

import (
	"errors"
	"math"
	"os"
	"reflect"
	"strings"
	"testing"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

func load(t *testing.T, src string, overrides ...string) *Scene {
	t.Helper()
	l := Loader{Overrides: overrides}
	s, err := l.Load([]byte(src), "t.yaml")
	if err != nil {
		t.Fatalf("Load: %v", err)
	}
	return s
}

func TestBuiltinsLoad(t *testing.T) {
	names := BuiltinNames()
	if len(names) < 10 {
		t.Fatalf("only %d built-in scenes: %v", len(names), names)
	}
	for _, name := range names {
		t.Run(name, func(t *testing.T) {
			src, desc, err := Builtin(name)
			if err != nil {
				t.Fatal(err)
			}
			if desc == "" || strings.Contains(desc, "\n") {
				t.Errorf("description %q is not one line", desc)
			}
			s, err := LoadBuiltin(name)
			if err != nil {
				t.Fatal(err)
			}
			if s.Name != name {
				t.Errorf("scene name %q, file name %q", s.Name, name)
			}
			if s.Description != desc {
				t.Errorf("Builtin description %q, loaded %q", desc, s.Description)
			}
			for _, w := range s.Warnings {
				t.Errorf("warning: %v", w)
			}
			if len(src) == 0 || len(s.Model.Bodies) == 0 {
				t.Errorf("empty scene")
			}
			// Bodies start just resting on the static surfaces (gap 0)
			// or clear of them, never inside.
			gaps := startGaps(s.Model)
			for pair, g := range gaps {
				if g < -1e-9 {
					t.Errorf("%s overlap by %g m", pair, -g)
				}
			}
		})
	}
	if _, _, err := Builtin("no-such-scene"); err == nil || !strings.Contains(err.Error(), "crate-slide") {
		t.Errorf("unknown builtin: err = %v, want a list of the names", err)
	}
}

// startGaps returns the smallest gap (within 1 m) between each body and each
// static shape or other body at the start, keyed "a/b".
func startGaps(m *sim.Model) map[string]float64 {
	poses := worldPoses(m.Bodies)
	out := map[string]float64{}
	var pts []contact.Point
	note := func(key string, a *contact.Shape, pa contact.Pose, b *contact.Shape, pb contact.Pose) {
		pts = contact.Collide(a, pa, b, pb, 1, pts[:0])
		for _, p := range pts {
			if g, ok := out[key]; !ok || p.Gap < g {
				out[key] = p.Gap
			}
		}
	}
	for i, b := range m.Bodies {
		for k := range b.Shapes {
			s := &b.Shapes[k]
			for _, st := range m.Static {
				note(b.Name+"/"+st.Name, s, poses[i].Mul(s.Local), &st.Shape, st.Shape.Local)
			}
			for j := i + 1; j < len(m.Bodies); j++ {
				o := m.Bodies[j]
				if o.Joint.Parent == i {
					continue
				}
				for l := range o.Shapes {
					note(b.Name+"/"+o.Name, s, poses[i].Mul(s.Local), &o.Shapes[l], poses[j].Mul(o.Shapes[l].Local))
				}
			}
		}
	}
	return out
}

func TestRestingStarts(t *testing.T) {
	// Scenes about resting or sliding contact must start touching (gap 0),
	// whatever the override does to the incline.
	cases := []struct {
		scene     string
		overrides []string
		pairs     []string
	}{
		{"crate-slide", nil, []string{"crate/floor"}},
		{"crate-ramp", nil, []string{"crate/ramp"}},
		{"crate-ramp", []string{"static.ramp.tilt.degrees=35"}, []string{"crate/ramp"}},
		{"dough-roll", nil, []string{"dough/bench"}},
		{"dough-chute", []string{"static.chute.tilt.degrees=40"}, []string{"dough/chute"}},
		{"tin-tip", []string{"static.board.tilt.degrees=10"}, []string{"tin/board"}},
		{"crate-stack", nil, []string{"crate-1/floor", "crate-1/crate-2", "crate-5/crate-6", "crate-9/crate-10"}},
	}
	for _, c := range cases {
		s, err := LoadBuiltin(c.scene, c.overrides...)
		if err != nil {
			t.Fatal(err)
		}
		gaps := startGaps(s.Model)
		for _, p := range c.pairs {
			g, ok := gaps[p]
			if !ok || math.Abs(g) > 1e-12 {
				t.Errorf("%s %v: gap %s = %g (found %v), want 0", c.scene, c.overrides, p, g, ok)
			}
		}
	}
	// The dropped ball starts 1 m clear of the floor.
	s, _ := LoadBuiltin("ball-drop")
	if g := startGaps(s.Model)["ball/floor"]; math.Abs(g-1) > 1e-12 {
		t.Errorf("ball-drop: start gap %g m, want 1", g)
	}
}

func TestRoundTrip(t *testing.T) {
	srcs := map[string][]byte{"rich": []byte(richScene)}
	for _, name := range BuiltinNames() {
		srcs[name], _, _ = Builtin(name)
	}
	for name, src := range srcs {
		t.Run(name, func(t *testing.T) {
			var l Loader
			a, err := l.Load(src, name)
			if err != nil {
				t.Fatal(err)
			}
			out, err := Marshal(a)
			if err != nil {
				t.Fatal(err)
			}
			b, err := l.Load(out, name+" (marshalled)")
			if err != nil {
				t.Fatalf("reload: %v\n%s", err, out)
			}
			// Every float is written in its shortest exact form, so the
			// models must be identical, not merely close.
			if !reflect.DeepEqual(a.Model, b.Model) {
				t.Errorf("model changed by Marshal/Load:\n%+v\n%+v\n%s", a.Model, b.Model, out)
			}
			if a.Settings != b.Settings || a.Name != b.Name || a.Description != b.Description {
				t.Errorf("settings or header changed: %+v %+v", a.Settings, b.Settings)
			}
			// And a second round is byte-identical.
			out2, err := Marshal(b)
			if err != nil || string(out2) != string(out) {
				t.Errorf("second Marshal differs (err %v)", err)
			}
		})
	}
}

// richScene uses every feature of the format at least once.
const richScene = `
name: everything
description: Every feature of the scene format at once.
gravity: [0.1, 0, -9.7]
settings:
  time_step: 0.0005
  duration: 2.5
  frame_every: 4
  contact_margin: 0.002
  correction_rate: 0.3
  correction_max_speed: 0.2
  bounce_threshold: 0.02
  solver: {tolerance: 1e-9, max_iterations: 40, smoothing: 1e-6}
materials:
  default: {friction: 0.6, restitution: 0.1}
  surfaces: [tile, pine, tin, steel]
  pairs:
    - {between: [pine, tile], friction: 0.4}
    - {between: [tin, tin], friction: 0.2, restitution: 0.3}
static:
  - {name: floor, kind: plane, material: tile}
  - {name: ramp, kind: plane, point: [5, 0, 0], tilt: {axis: [0, 1, 0], degrees: 15}}
  - {name: wall, kind: plane, point: [-3, 0, 0], normal: [1, 0, 0]}
  - name: shelf
    kind: box
    size: [1, 0.4, 0.05]
    pose: {position: [0, 2, 1.2], turn: {axis: [0, 0, 1], degrees: 10}}
  - {name: post, kind: cylinder, radius: 0.05, length: 1.2, pose: {position: [1, 2, 0.6]}}
  - {name: rail, kind: capsule, radius: 0.02, length: 1, pose: {position: [0, -2, 1], quat: [0.7071067811865476, 0.7071067811865476, 0, 0]}}
  - {name: knob, kind: sphere, radius: 0.1, pose: {position: [0, -2, 2]}}
bodies:
  - name: crate
    material: pine
    shapes: [{kind: box, size: [0.6, 0.4, 0.3]}]
    mass: 4
    pose: {on: ramp, at: [0.5, 0.1], lift: 0.01, turn: {axis: [0, 0, 1], degrees: 30}}
    velocity: {linear: [1, 0, 0], angular: [0, 0, 0.5]}
  - name: ladle
    material: steel
    shapes:
      - {kind: capsule, radius: 0.01, length: 0.3}
      - {kind: sphere, radius: 0.04, pose: {position: [0, 0, 0.19]}}
    density: 7850
    pose: {position: [3, 3, 0.5], quat: [0.9999, 0.01, 0, 0]}
  - name: tray
    shapes: [{kind: box, size: [0.5, 0.3, 0.02]}]
    mass: 1.2
    com: [0.01, 0, 0]
    inertia: {matrix: [[0.01, 0.001, 0], [0.001, 0.025, 0], [0, 0, 0.034]]}
    pose: {position: [-1, 0, 0.5]}
  - name: arm
    mass: 2
    inertia: {principal: [0.02, 0.02, 0.01]}
    joint:
      name: shoulder
      kind: revolute
      parent: world
      frame: {position: [0, -4, 1], turn: {axis: [1, 0, 0], degrees: 90}}
      axis: [0, 0, 1]
      limits: {lower: -1.5, upper: 1.5}
      damping: 0.5
      friction: 0.1
      armature: 0.01
      position: 0.2
      velocity: -0.1
  - name: slider
    mass: 0.5
    shapes: [{kind: cylinder, radius: 0.03, length: 0.1}]
    joint: {kind: prismatic, parent: arm, frame: {position: [0.3, 0, 0]}, axis: [1, 0, 0], limits: {lower: 0, upper: 0.2}, position: 0.05}
  - name: wrist
    mass: 0.3
    shapes: [{kind: sphere, radius: 0.03}]
    joint: {kind: ball, parent: slider, frame: {position: [0.1, 0, 0]}, damping: 0.02, rotation: {turn: {axis: [0, 1, 0], degrees: 20}}, spin: [0, 0, 1]}
  - name: tongs
    mass: 0.1
    shapes: [{kind: box, size: [0.1, 0.02, 0.02]}]
    material: tin
    joint: {name: grip, kind: fixed, parent: wrist, frame: {position: [0.08, 0, 0]}}
loads:
  - {body: crate, point: [0, 0, 0.15], force: [5, 0, 0], torque: [0, 0, 0.1]}
  - body: tray
    schedule:
      - {time: 0, force: [0, 0, 0]}
      - {time: 0.5, force: [1, 2, 3], torque: [0, 0, 1]}
      - {time: 0.5, force: [0, 0, 0]}
`

func TestRichScene(t *testing.T) {
	s := load(t, richScene)
	m := s.Model
	if m.Gravity != (r3.Vec{X: 0.1, Z: -9.7}) {
		t.Errorf("gravity %v", m.Gravity)
	}
	want := sim.Settings{TimeStep: 0.0005, Duration: 2.5, FrameEvery: 4, Margin: 0.002, CorrectionRate: 0.3,
		MaxCorrection: 0.2, BounceThreshold: 0.02, Solver: contact.SolverSettings{Tolerance: 1e-9, MaxIterations: 40, Smoothing: 1e-6}}.WithDefaults()
	if s.Settings != want {
		t.Errorf("settings %+v, want %+v", s.Settings, want)
	}
	// A pair without restitution takes the default's.
	if p := m.Materials.Lookup("tile", "pine"); p != (sim.PairProps{Friction: 0.4, Restitution: 0.1}) {
		t.Errorf("pine/tile %+v", p)
	}
	if p := m.Materials.Lookup("steel", "tile"); p != m.Materials.Default {
		t.Errorf("steel/tile %+v, want default", p)
	}
	// The wall's normal is +x: its plane rotation takes z to x.
	if n := m.Static[2].Shape.Local.Rot.Rotate(r3.Vec{Z: 1}); r3.Norm(r3.Sub(n, r3.Vec{X: 1})) > 1e-15 {
		t.Errorf("wall normal %v", n)
	}
	idx := map[string]int{}
	for i, b := range m.Bodies {
		idx[b.Name] = i
		if b.Joint.Parent >= i {
			t.Errorf("body %s: parent %d does not precede it", b.Name, b.Joint.Parent)
		}
	}
	arm := m.Bodies[idx["arm"]].Joint
	if arm.Name != "shoulder" || arm.Kind != sim.Revolute || !arm.Limited || arm.Lower != -1.5 || arm.Upper != 1.5 ||
		arm.Damping != 0.5 || arm.Friction != 0.1 || arm.Armature != 0.01 || arm.Position != 0.2 || arm.Velocity != -0.1 {
		t.Errorf("arm joint %+v", arm)
	}
	if j := m.Bodies[idx["wrist"]].Joint; contact.Angle(j.Rotation, contact.QuatFromAxisAngle(r3.Vec{Y: 1}, math.Pi/9)) > 1e-12 || j.Spin != (r3.Vec{Z: 1}) {
		t.Errorf("wrist joint starts at rotation %v, spin %v; want 20° about y, (0, 0, 1)", j.Rotation, j.Spin)
	}
	if j := m.Bodies[idx["tongs"]].Joint; j.Name != "grip" || j.Kind != sim.Fixed || j.Parent != idx["wrist"] {
		t.Errorf("tongs joint %+v", j)
	}
	// A loose body gets a free joint to the world named after it.
	if j := m.Bodies[idx["crate"]].Joint; j.Kind != sim.Free || j.Parent != -1 || j.Name != "crate" {
		t.Errorf("crate joint %+v", j)
	}
	// The slightly-off quaternion is normalised.
	if q := m.Bodies[idx["ladle"]].Start.Pose.Rot; math.Abs(q.Norm()-1) > 1e-15 {
		t.Errorf("ladle quaternion norm %g", q.Norm())
	}
	if l := m.Loads[1]; l.Body != idx["tray"] || len(l.Schedule) != 3 || l.Schedule[1].Force != (r3.Vec{X: 1, Y: 2, Z: 3}) {
		t.Errorf("tray load %+v", l)
	}
	// The crate sits 1 cm above the ramp, turned 30° about the ramp normal.
	crate := m.Bodies[idx["crate"]]
	ramp := m.Static[1].Shape.Local
	local := ramp.Inv().Mul(crate.Start.Pose)
	if math.Abs(local.Pos.Z-(0.15+0.01)) > 1e-12 || math.Abs(local.Pos.X-0.5) > 1e-12 || math.Abs(local.Pos.Y-0.1) > 1e-12 {
		t.Errorf("crate on ramp at %v, want (0.5, 0.1, 0.16)", local.Pos)
	}
	if a := contact.Angle(local.Rot, contact.QuatFromAxisAngle(r3.Vec{Z: 1}, math.Pi/6)); a > 1e-12 {
		t.Errorf("crate turned %g rad away from 30° about the ramp normal", a)
	}
}

func TestTreeOrder(t *testing.T) {
	// Listed child first: the loader must put parents first.
	s := load(t, `
bodies:
  - {name: c, mass: 1, inertia: {principal: [1, 1, 1]}, joint: {kind: revolute, parent: b}}
  - {name: b, mass: 1, inertia: {principal: [1, 1, 1]}, joint: {kind: revolute, parent: a}}
  - {name: loose, mass: 1, inertia: {principal: [1, 1, 1]}}
  - {name: a, mass: 1, inertia: {principal: [1, 1, 1]}, joint: {kind: revolute, parent: world}}
`)
	var got []string
	for _, b := range s.Model.Bodies {
		got = append(got, b.Name)
	}
	if strings.Join(got, " ") != "a b c loose" {
		t.Errorf("order %v, want a b c loose", got)
	}
	for i, want := range []int{-1, 0, 1, -1} {
		if p := s.Model.Bodies[i].Joint.Parent; p != want {
			t.Errorf("%s: parent %d, want %d", got[i], p, want)
		}
	}
}

// Mass properties from density against handbook formulas (engineering-
// mechanics handbook tables of moments of inertia about the centroid; see
// REFERENCE-CHECKS.md).
func TestMassFromDensity(t *testing.T) {
	const rho = 1100.0
	r, l := 0.06, 0.2
	a, b, c := 0.6, 0.4, 0.3
	sphereM := rho * 4 / 3 * math.Pi * r * r * r
	boxM := rho * a * b * c
	cylM := rho * math.Pi * r * r * l
	// Capsule: cylinder plus two hemispheres whose centroids lie 3r/8 from
	// their flat faces, moved to the centre by the parallel-axis theorem.
	hemM := rho * 2 / 3 * math.Pi * r * r * r
	hc := 3 * r / 8
	hemAcrossCentroid := 2.0/5*hemM*r*r - hemM*hc*hc
	capM := cylM + 2*hemM
	capAcross := cylM*(3*r*r+l*l)/12 + 2*(hemAcrossCentroid+hemM*(l/2+hc)*(l/2+hc))
	capAxial := cylM*r*r/2 + 2*(2.0/5*hemM*r*r)
	cases := []struct {
		name, shapes string
		mass         float64
		com          r3.Vec
		inertia      r3.Vec // principal moments along body axes
	}{
		{"sphere", "[{kind: sphere, radius: 0.06}]", sphereM, r3.Vec{},
			r3.Vec{X: 0.4 * sphereM * r * r, Y: 0.4 * sphereM * r * r, Z: 0.4 * sphereM * r * r}},
		{"box", "[{kind: box, size: [0.6, 0.4, 0.3]}]", boxM, r3.Vec{},
			r3.Vec{X: boxM * (b*b + c*c) / 12, Y: boxM * (a*a + c*c) / 12, Z: boxM * (a*a + b*b) / 12}},
		{"cylinder", "[{kind: cylinder, radius: 0.06, length: 0.2}]", cylM, r3.Vec{},
			r3.Vec{X: cylM * (3*r*r + l*l) / 12, Y: cylM * (3*r*r + l*l) / 12, Z: cylM * r * r / 2}},
		{"capsule", "[{kind: capsule, radius: 0.06, length: 0.2}]", capM, r3.Vec{},
			r3.Vec{X: capAcross, Y: capAcross, Z: capAxial}},
		// A box turned 90° about z swaps its x and y moments.
		{"turned box", "[{kind: box, size: [0.6, 0.4, 0.3], pose: {turn: {axis: [0, 0, 1], degrees: 90}}}]", boxM, r3.Vec{},
			r3.Vec{X: boxM * (a*a + c*c) / 12, Y: boxM * (b*b + c*c) / 12, Z: boxM * (a*a + b*b) / 12}},
		// Two spheres 0.5 m apart on x: parallel-axis theorem adds
		// 2 m (0.25)² about y and z.
		{"dumbbell", "[{kind: sphere, radius: 0.06, pose: {position: [0, 0, 0]}}, {kind: sphere, radius: 0.06, pose: {position: [0.5, 0, 0]}}]",
			2 * sphereM, r3.Vec{X: 0.25},
			r3.Vec{X: 0.8 * sphereM * r * r, Y: 0.8*sphereM*r*r + 2*sphereM*0.0625, Z: 0.8*sphereM*r*r + 2*sphereM*0.0625}},
	}
	for _, c := range cases {
		s := load(t, "bodies:\n  - {name: x, density: 1100, shapes: "+c.shapes+"}\n")
		body := s.Model.Bodies[0]
		if !approx(body.Mass, c.mass, 1e-12) {
			t.Errorf("%s: mass %g, handbook %g", c.name, body.Mass, c.mass)
		}
		if r3.Norm(r3.Sub(body.COM, c.com)) > 1e-12 {
			t.Errorf("%s: centre of mass %v, want %v", c.name, body.COM, c.com)
		}
		want := contact.Diag3(c.inertia)
		for k := range want {
			if math.Abs(body.Inertia[k]-want[k]) > 1e-12*math.Abs(c.inertia.Z) {
				t.Errorf("%s: inertia %v, handbook %v", c.name, body.Inertia, want)
				break
			}
		}
	}
	// Mass given without inertia: the shapes' inertia at that mass.
	s := load(t, "bodies:\n  - {name: crate, mass: 4, shapes: [{kind: box, size: [0.6, 0.4, 0.3]}]}\n")
	if I := s.Model.Bodies[0].Inertia; !approx(I[0], 4*(b*b+c*c)/12, 1e-12) || !approx(I[8], 4*(a*a+b*b)/12, 1e-12) {
		t.Errorf("crate of 4 kg: inertia %v", I)
	}
}

func approx(x, y, rel float64) bool { return math.Abs(x-y) <= rel*math.Max(math.Abs(x), math.Abs(y)) }

func TestOverrides(t *testing.T) {
	s, err := LoadBuiltin("crate-slide", "bodies.crate.mass=2.5", "materials.pairs.0.friction=0.3", "settings.duration=2",
		"bodies.crate.velocity.linear=[1, 0.5, 0]", "gravity=[0, 0, -9.81]")
	if err != nil {
		t.Fatal(err)
	}
	m := s.Model
	if b := m.Bodies[0]; b.Mass != 2.5 || !approx(b.Inertia[0], 2.5*(0.16+0.09)/12, 1e-12) {
		t.Errorf("mass %g inertia %v", b.Mass, b.Inertia)
	}
	if m.Materials.Pairs[0].Friction != 0.3 || s.Settings.Duration != 2 || m.Gravity.Z != -9.81 {
		t.Errorf("friction %g duration %g gravity %v", m.Materials.Pairs[0].Friction, s.Settings.Duration, m.Gravity)
	}
	if v := m.Bodies[0].Start.Linear; v != (r3.Vec{X: 1, Y: 0.5}) {
		t.Errorf("velocity %v", v)
	}
	// A block the file does not have is created.
	s = load(t, "bodies: [{name: a, mass: 1, inertia: {principal: [1, 1, 1]}}]\n", "settings.solver.smoothing=0.01", "bodies.0.pose.position=[0, 0, 3]")
	if s.Settings.Solver.Smoothing != 0.01 || s.Model.Bodies[0].Start.Pose.Pos.Z != 3 {
		t.Errorf("created fields not applied: %+v %+v", s.Settings.Solver, s.Model.Bodies[0].Start.Pose)
	}
	// The incline angle override tilts the plane.
	s, err = LoadBuiltin("crate-ramp", "static.ramp.tilt.degrees=30")
	if err != nil {
		t.Fatal(err)
	}
	n := s.Model.Static[0].Shape.Local.Rot.Rotate(r3.Vec{Z: 1})
	if a := math.Acos(n.Z) * 180 / math.Pi; math.Abs(a-30) > 1e-12 {
		t.Errorf("ramp at %g°, want 30", a)
	}
}

// TestErrors checks each validation message: where (file:line:col or the
// override), which field, and what would be valid.
func TestErrors(t *testing.T) {
	const body = "bodies:\n  - name: crate\n"
	cases := []struct {
		name      string
		src       string
		overrides []string
		want      string // the full location prefix and the start of the message
		also      string // further text the message must hold
	}{
		{"unknown top field", "gravty: [0, 0, -1]\n", nil,
			`t.yaml:1:1: gravty: unknown field "gravty"; valid fields here: name, description, gravity, settings, materials, static, bodies, loads`, ""},
		{"unknown body field", body + "    mas: 2\n", nil,
			`t.yaml:3:5: bodies[crate].mas: unknown field "mas"; valid fields here: name, material, shapes, density, mass`, ""},
		{"duplicate field", "name: a\nname: b\n", nil, `t.yaml:2:1: name: field given twice (first at line 1)`, ""},
		{"negative mass", body + "    mass: -1\n", nil, `t.yaml:3:11: bodies[crate].mass: must be > 0 kg, got -1`, ""},
		{"zero density", body + "    density: 0\n    shapes: [{kind: sphere, radius: 1}]\n", nil,
			`t.yaml:3:14: bodies[crate].density: must be > 0 kg/m³, got 0`, ""},
		{"no mass", body + "    shapes: [{kind: sphere, radius: 1}]\n", nil,
			`t.yaml:2:5: bodies[crate].mass: missing; give density`, ""},
		{"inertia not positive definite", body + "    mass: 1\n    inertia: {matrix: [[1, 2, 0], [2, 1, 0], [0, 0, 1]]}\n", nil,
			`t.yaml:4:23: bodies[crate].inertia.matrix: inertia must be positive definite: principal moments are -1, 1, 3 kg·m²`, ""},
		{"inertia asymmetric", body + "    mass: 1\n    inertia: {matrix: [[1, 0.1, 0], [0, 1, 0], [0, 0, 1]]}\n", nil,
			`t.yaml:4:23: bodies[crate].inertia.matrix: must be symmetric; element [0][1] = 0.1 but [1][0] = 0`, ""},
		{"triangle inequality", body + "    mass: 1\n    inertia: {principal: [1, 1, 3]}\n", nil,
			`t.yaml:4:26: bodies[crate].inertia.principal: principal moments 1, 1, 3 kg·m² violate the triangle inequality I₁ + I₂ ≥ I₃`, ""},
		{"zero principal moment", body + "    mass: 1\n    inertia: {principal: [0, 1, 1]}\n", nil,
			`t.yaml:4:26: bodies[crate].inertia.principal: inertia must be positive definite`, ""},
		{"NaN", body + "    mass: .nan\n", nil, `t.yaml:3:11: bodies[crate].mass: must be a finite number, got .nan`, ""},
		{"Inf in a vector", "gravity: [0, .inf, 0]\n", nil, `t.yaml:1:14: gravity[1]: must be a finite number, got .inf`, ""},
		{"not a number", "gravity: [0, x, 0]\n", nil, `t.yaml:1:14: gravity[1]: must be a number, got "x"`, ""},
		{"short vector", "gravity: [0, 0]\n", nil, `t.yaml:1:10: gravity: must be a vector [x, y, z]: a sequence of 3 numbers`, ""},
		{"quaternion far from unit", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n    pose: {quat: [1, 1, 0, 0]}\n", nil,
			`t.yaml:5:18: bodies[crate].pose.quat: quaternion [w, x, y, z] must have unit length; its length is 1.41421`, "within 0.001 of 1"},
		{"negative friction", "materials:\n  default: {friction: -0.1}\n", nil,
			`t.yaml:2:23: materials.default.friction: friction coefficient μ must be ≥ 0, got -0.1`, ""},
		{"restitution above 1", "materials:\n  surfaces: [a]\n  pairs:\n    - {between: [a, a], restitution: 1.2}\n", nil,
			`t.yaml:4:38: materials.pairs[0].restitution: restitution e must be within [0, 1], got 1.2`, ""},
		{"zero box size", body + "    mass: 1\n    shapes: [{kind: box, size: [0.1, 0, 0.1]}]\n", nil,
			`t.yaml:4:38: bodies[crate].shapes[0].size[1]: box size [x, y, z] holds the full extents, each > 0 m; got 0`, ""},
		{"negative radius", body + "    mass: 1\n    shapes: [{kind: sphere, radius: -0.1}]\n", nil,
			`t.yaml:4:37: bodies[crate].shapes[0].radius: must be > 0 m, got -0.1`, ""},
		{"size on a sphere", body + "    mass: 1\n    shapes: [{kind: sphere, size: [1, 1, 1]}]\n", nil,
			`t.yaml:4:35: bodies[crate].shapes[0].size: does not apply to a sphere; a sphere takes radius`, ""},
		{"unknown shape kind", body + "    mass: 1\n    shapes: [{kind: cone}]\n", nil,
			`t.yaml:4:21: bodies[crate].shapes[0].kind: unknown shape kind "cone"; valid kinds: sphere, box, capsule, cylinder`, ""},
		{"plane on a body", body + "    mass: 1\n    shapes: [{kind: plane}]\n", nil,
			`t.yaml:4:21: bodies[crate].shapes[0].kind: a plane is unbounded and may only be static geometry`, ""},
		{"duplicate body", "bodies:\n  - {name: a, mass: 1, inertia: {principal: [1, 1, 1]}}\n  - {name: a, mass: 1}\n", nil,
			`t.yaml:3:12: bodies[a].name: name "a" is already used at line 2; body and static names must be unique`, ""},
		{"unknown material", "materials: {surfaces: [pine, tin]}\n" + body + "    material: oak\n", nil,
			`t.yaml:4:15: bodies[crate].material: unknown surface "oak"; declared surfaces: pine, tin`, ""},
		{"undeclared material", body + "    material: oak\n", nil,
			`t.yaml:3:15: bodies[crate].material: unknown surface "oak"; declare it under materials.surfaces`, ""},
		{"duplicate surface", "materials: {surfaces: [pine, pine]}\n", nil,
			`t.yaml:1:30: materials.surfaces[1]: surface "pine" is listed twice`, ""},
		{"duplicate pair", "materials:\n  surfaces: [a, b]\n  pairs: [{between: [a, b]}, {between: [b, a]}]\n", nil,
			`t.yaml:3:40: materials.pairs[1].between: the pair (b, a) is already given at materials.pairs[0]`, ""},
		{"unknown parent", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n    joint: {kind: revolute, parent: shelf}\n", nil,
			`t.yaml:5:37: bodies[crate].joint.parent: unknown parent "shelf"; valid parents: world, crate`, ""},
		{"joint loop", "bodies:\n" +
			"  - {name: a, mass: 1, inertia: {principal: [1, 1, 1]}, joint: {name: ja, kind: ball, parent: b}}\n" +
			"  - {name: b, mass: 1, inertia: {principal: [1, 1, 1]}, joint: {name: jb, kind: ball, parent: a}}\n", nil,
			`t.yaml:2:95: bodies[a].joint.parent: joints form a loop: ja (b → a), jb (a → b)`, "end at world"},
		{"limits reversed", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n    joint: {kind: revolute, limits: {lower: 1, upper: -1}}\n", nil,
			`t.yaml:5:37: bodies[crate].joint.limits.lower: lower limit 1 rad is above upper limit -1 rad; need lower ≤ upper`, ""},
		{"axis on a ball joint", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n    joint: {kind: ball, axis: [0, 0, 1]}\n", nil,
			`t.yaml:5:31: bodies[crate].joint.axis: does not apply to a ball joint; it takes name, kind, parent, frame, damping, friction, armature, rotation, spin`, ""},
		{"spin on a hinge", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n    joint: {kind: revolute, spin: [0, 0, 1]}\n", nil,
			`t.yaml:5:35: bodies[crate].joint.spin: does not apply to a revolute joint; it takes name, kind, parent, frame, axis, limits, damping, friction, armature, position, velocity`, ""},
		{"unknown joint kind", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n    joint: {kind: hinge}\n", nil,
			`t.yaml:5:19: bodies[crate].joint.kind: unknown joint kind "hinge"; valid kinds: free, revolute, prismatic, fixed, ball`, ""},
		{"pose on a jointed body", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n    joint: {kind: revolute}\n    pose: {position: [0, 0, 1]}\n", nil,
			`t.yaml:6:11: bodies[crate].pose: applies only to a free body`, ""},
		{"decreasing schedule", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\nloads:\n  - body: crate\n    schedule:\n      - {time: 1, force: [1, 0, 0]}\n      - {time: 0.5, force: [0, 0, 0]}\n", nil,
			`t.yaml:9:16: loads[0].schedule[1].time: times must not decrease down the schedule: 0.5 s follows 1 s`, ""},
		{"load on unknown body", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\nloads: [{body: van, force: [1, 0, 0]}]\n", nil,
			`t.yaml:5:16: loads[0].body: unknown body "van"; bodies: crate`, ""},
		{"zero time step", "settings: {time_step: 0}\n", nil, `t.yaml:1:23: settings.time_step: must be > 0 s, got 0`, ""},
		{"negative time step", "settings:\n  time_step: -0.001\n", nil, `t.yaml:2:14: settings.time_step: must be > 0 s, got -0.001`, ""},
		{"frame_every fraction", "settings: {frame_every: 1.5}\n", nil, `t.yaml:1:25: settings.frame_every: must be a whole number from 1 to 2147483647, got "1.5"`, ""},
		{"on an unknown plane", "static: [{name: floor, kind: plane}]\n" + body + "    mass: 1\n    shapes: [{kind: sphere, radius: 1}]\n    pose: {on: roof}\n", nil,
			`t.yaml:6:16: bodies[crate].pose.on: "roof" is not a static plane; a body may rest on: floor`, ""},
		{"normal and tilt", "static: [{name: floor, kind: plane, normal: [0, 0, 1], tilt: {axis: [0, 1, 0], degrees: 5}}]\n", nil,
			`t.yaml:1:62: static[floor].tilt: give only one of normal, tilt, not both normal and tilt`, ""},
		{"zero normal", "static: [{name: floor, kind: plane, normal: [0, 0, 0]}]\n", nil,
			`t.yaml:1:45: static[floor].normal: must be a non-zero direction [x, y, z]`, ""},
		{"reserved name", "bodies: [{name: world, mass: 1}]\n", nil, `t.yaml:1:17: bodies[world].name: the name "world" is reserved`, ""},
		{"dot in name", "bodies: [{name: a.b, mass: 1}]\n", nil, `t.yaml:1:17: bodies[a.b].name: name "a.b" may not contain '.'`, ""},
		{"not a mapping", "- 1\n- 2\n", nil, `t.yaml:1:1: a scene must be a mapping with fields name, description`, ""},
		{"empty", "", nil, `t.yaml: empty scene`, ""},
		{"bad YAML", "name: [a\n", nil, `t.yaml:1: not valid YAML`, ""},
		{"two documents", "name: a\n---\nname: b\n", nil, `t.yaml:2:1: a scene file holds one YAML document`, ""},

		// Overrides.
		{"override unknown element", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n", []string{"bodies.crat.mass=2"},
			`t.yaml: --set bodies.crat.mass=2: bodies has no element named "crat"; names: crate (or an index)`, ""},
		{"override unknown field", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n", []string{"bodies.crate.mas=2"},
			`t.yaml: --set bodies.crate.mas=2: bodies[crate].mas: unknown field "mas"; valid fields here: name, material`, ""},
		{"override bad value", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n", []string{"bodies.crate.mass=-2"},
			`t.yaml: --set bodies.crate.mass=-2: bodies[crate].mass: must be > 0 kg, got -2`, ""},
		{"override index out of range", body + "    mass: 1\n    inertia: {principal: [1, 1, 1]}\n", []string{"bodies.3.mass=2"},
			`t.yaml: --set bodies.3.mass=2: index 3 is out of range: bodies has 1 elements`, ""},
		{"override into a value", "name: a\n", []string{"name.first=b"},
			`t.yaml: --set name.first=b: name is a single value, so "first" cannot go into it`, ""},
		{"override without =", "name: a\n", []string{"settings.duration"},
			`t.yaml: --set settings.duration: want PATH=VALUE, such as bodies.crate.mass=2.5`, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			l := Loader{Overrides: c.overrides}
			_, err := l.Load([]byte(c.src), "t.yaml")
			if err == nil {
				t.Fatalf("no error; want %q", c.want)
			}
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("error %T %v is not an *Error", err, err)
			}
			if !strings.HasPrefix(err.Error(), c.want) || !strings.Contains(err.Error(), c.also) {
				t.Errorf("error\n %s\nwant prefix\n %s", err, c.want)
			}
		})
	}
}

func TestQuaternionNormalised(t *testing.T) {
	// Within 1e-3 of unit length: accepted and normalised.
	s := load(t, "bodies: [{name: a, mass: 1, inertia: {principal: [1, 1, 1]}, pose: {quat: [1.0005, 0, 0, 0]}}]\n")
	if q := s.Model.Bodies[0].Start.Pose.Rot; q != contact.IdentityQuat {
		t.Errorf("quat %v, want identity", q)
	}
}

func TestOverlapWarning(t *testing.T) {
	s := load(t, `
static: [{name: floor, kind: plane}]
bodies:
  - {name: left, density: 1000, shapes: [{kind: sphere, radius: 0.1}], pose: {position: [0, 0, 0.5]}}
  - {name: right, density: 1000, shapes: [{kind: sphere, radius: 0.1}], pose: {position: [0.17, 0, 0.5]}}
  - {name: sunk, mass: 1, shapes: [{kind: box, size: [0.2, 0.2, 0.2]}], pose: {position: [2, 0, 0.08]}}
  - {name: resting, mass: 1, shapes: [{kind: box, size: [0.2, 0.2, 0.2]}], pose: {position: [4, 0, 0.1]}}
`)
	want := map[string]float64{"left/right": 0.03, "sunk/floor": 0.02}
	if len(s.Warnings) != len(want) {
		t.Fatalf("warnings %v, want %d", s.Warnings, len(want))
	}
	for _, w := range s.Warnings {
		d, ok := want[w.A+"/"+w.B]
		if !ok || math.Abs(w.Depth-d) > 1e-9 {
			t.Errorf("warning %v (depth %g)", w, w.Depth)
		}
		if !strings.HasPrefix(w.String(), "t.yaml:") || !strings.Contains(w.String(), w.B) || !strings.Contains(w.String(), "overlaps") {
			t.Errorf("warning text %q", w.String())
		}
	}
}

// TestDocsMentionEveryField keeps docs/scene-format.md complete.
func TestDocsMentionEveryField(t *testing.T) {
	doc, err := os.ReadFile("../docs/scene-format.md")
	if err != nil {
		t.Skip("docs not found:", err)
	}
	lists := [][]string{sceneFields, settingsFields, solverFields, materialFields, propsFields, pairFields,
		shapeFields, staticFields, bodyFields, bodyPoseFields, inertiaFields, velocityFields, jointFields, limitFields, loadFields, keyFields,
		actuatorFields, controllerFields, pdFields, feedforwardFields, tableFields}
	for _, l := range lists {
		for _, f := range l {
			if !strings.Contains(string(doc), "`"+f+"`") {
				t.Errorf("docs/scene-format.md does not describe `%s`", f)
			}
		}
	}
	for _, name := range BuiltinNames() {
		if !strings.Contains(string(doc), name) {
			t.Errorf("docs/scene-format.md does not list built-in scene %s", name)
		}
	}
}

func TestLoadFile(t *testing.T) {
	path := t.TempDir() + "/crate.yaml"
	src, _, _ := Builtin("crate-push")
	if err := os.WriteFile(path, src, 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := LoadFile(path, "loads.0.force=[80, 0, 0]")
	if err != nil {
		t.Fatal(err)
	}
	if f := s.Model.Loads[0].Force; f != (r3.Vec{X: 80}) {
		t.Errorf("force %v, want the override's 80 N", f)
	}
	if _, err := LoadFile(path + ".missing"); err == nil {
		t.Error("missing file: no error")
	}
	_, err = LoadFile(path, "settings.time_step=0")
	if err == nil || err.Error() != path+": --set settings.time_step=0: settings.time_step: must be > 0 s, got 0" {
		t.Errorf("error %v", err)
	}
}

func BenchmarkLoad(b *testing.B) {
	src := []byte(richScene)
	b.ReportAllocs()
	for b.Loop() {
		var l Loader
		if _, err := l.Load(src, "rich.yaml"); err != nil {
			b.Fatal(err)
		}
	}
}

// TestBuiltinParameters pins the values each built-in scene promises in its
// description, which tests of the simulator compare with textbook results.
func TestBuiltinParameters(t *testing.T) {
	get := func(name string) *sim.Model {
		s, err := LoadBuiltin(name)
		if err != nil {
			t.Fatal(err)
		}
		return s.Model
	}
	g0 := r3.Vec{Z: -sim.StandardGravity} // 3rd CGPM (1901)
	mu := func(m *sim.Model, i int) sim.PairProps {
		return m.Materials.Lookup(m.Bodies[i].Material, m.Static[0].Material)
	}
	tilt := func(m *sim.Model) float64 {
		return math.Acos(m.Static[0].Shape.Local.Rot.Rotate(r3.Vec{Z: 1}).Z) * 180 / math.Pi
	}

	m := get("crate-slide")
	if m.Gravity != g0 || mu(m, 0).Friction != 0.4 || m.Bodies[0].Start.Linear != (r3.Vec{X: 2}) {
		t.Errorf("crate-slide: μ %v v0 %v", mu(m, 0), m.Bodies[0].Start.Linear)
	}
	m = get("crate-ramp")
	if a := tilt(m); math.Abs(a-20) > 1e-9 || mu(m, 0).Friction != 0.5 {
		t.Errorf("crate-ramp: %g°, μ %v", a, mu(m, 0))
	}
	m = get("ball-drop")
	if b := m.Bodies[0]; mu(m, 0).Restitution != 0.75 || b.Shapes[0].Kind != contact.Sphere ||
		math.Abs(b.Start.Pose.Pos.Z-b.Shapes[0].Radius-1) > 1e-12 || b.Start.Linear != (r3.Vec{}) {
		t.Errorf("ball-drop: e %v start %v", mu(m, 0), b.Start)
	}
	m = get("dough-roll")
	if b := m.Bodies[0]; mu(m, 0).Friction != 0.3 || b.Start.Linear != (r3.Vec{X: 3}) || b.Start.Angular != (r3.Vec{}) {
		t.Errorf("dough-roll: μ %v start %v", mu(m, 0), b.Start)
	}
	m = get("crate-push")
	if l := m.Loads; len(l) != 1 || l[0].Force.Z != 0 || l[0].Force.X <= mu(m, 0).Friction*m.Bodies[0].Mass*sim.StandardGravity {
		t.Errorf("crate-push: loads %+v must be horizontal and beat μmg", l)
	}
	m = get("crate-stack")
	if len(m.Bodies) != 10 {
		t.Errorf("crate-stack: %d crates", len(m.Bodies))
	}
	m = get("spinning-tin")
	if b := m.Bodies[0]; m.Gravity != (r3.Vec{}) || len(m.Static) != 0 {
		t.Errorf("spinning-tin: gravity %v, %d static shapes", m.Gravity, len(m.Static))
	} else {
		I := b.Inertia
		w := b.Start.Angular
		// Three distinct moments; spin mostly about the largest (z), with
		// a small perturbation about the others.
		if !(I[0] < I[4] && I[4] < I[8]) || !(w.Z > 10*math.Hypot(w.X, w.Y)) || w.X == 0 || w.Y == 0 {
			t.Errorf("spinning-tin: moments %v, spin %v", I, w)
		}
	}
	m = get("mixer-balls")
	if a, b := m.Bodies[0], m.Bodies[1]; m.Gravity != (r3.Vec{}) || a.Mass != b.Mass ||
		m.Materials.Lookup(a.Material, b.Material) != (sim.PairProps{Friction: 0, Restitution: 1}) ||
		r3.Add(a.Start.Linear, b.Start.Linear) != (r3.Vec{}) || a.Start.Pose.Pos.Y != b.Start.Pose.Pos.Y {
		t.Errorf("mixer-balls: %+v %+v", a, b)
	}
	m = get("dough-chute")
	if b := m.Bodies[0]; b.Shapes[0].Kind != contact.Sphere || math.Abs(tilt(m)-20) > 1e-9 {
		t.Errorf("dough-chute: %v at %g°", b.Shapes[0].Kind, tilt(m))
	}
	m = get("tin-tip")
	tin := m.Bodies[0].Shapes[0]
	w, h := 2*tin.HalfExtents.X, 2*tin.HalfExtents.Z
	tan := math.Tan(tilt(m) * math.Pi / 180)
	// Tips before it slides: w/h < tan θ ≤ μ (textbook statics).
	if !(w/h < tan && tan <= mu(m, 0).Friction) {
		t.Errorf("tin-tip: w/h %g, tan θ %g, μ %g", w/h, tan, mu(m, 0).Friction)
	}
}
