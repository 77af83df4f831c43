package viewer

import (
	"math"
	"strings"
	"testing"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

func TestNewSceneErrors(t *testing.T) {
	m, r := boxOnFloor(3, 0, 10)
	tests := []struct {
		name   string
		edit   func(m *sim.Model, r *sim.Run)
		log    *Trajectory
		errHas string
	}{
		{"unknown body", func(m *sim.Model, r *sim.Run) { r.BodyNames = []string{"pallet"} }, nil, `run body "pallet" is not a body of the scene (its bodies: crate)`},
		{"no frames", func(m *sim.Model, r *sim.Run) { r.Frames = nil }, nil, "no frames"},
		{"bad step", func(m *sim.Model, r *sim.Run) { r.TimeStep = 0 }, nil, "time step"},
		{"short frame", func(m *sim.Model, r *sim.Run) { r.Frames[1].Bodies = nil }, nil, "frame 1 has 0 bodies"},
		{"log without run bodies", func(*sim.Model, *sim.Run) {}, &Trajectory{Bodies: []string{"cart"}}, "the log names no body of the run"},
	}
	for _, tc := range tests {
		mm := *m
		rr := *r
		rr.Frames = append([]sim.Frame(nil), r.Frames...)
		tc.edit(&mm, &rr)
		_, err := NewScene(&mm, &rr, tc.log)
		if err == nil || !strings.Contains(err.Error(), tc.errHas) {
			t.Errorf("%s: error %v, want one containing %q", tc.name, err, tc.errHas)
		}
	}
	if _, err := NewScene(m, r, nil); err != nil {
		t.Errorf("valid scene: %v", err)
	}
}

func TestSceneBoundsAndGrid(t *testing.T) {
	m, r := boxOnFloor(201, 1, 100) // slides 0.1 m along x after frame 100
	s, err := NewScene(m, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	b := s.Bounds()
	// The box's bounding ball (radius |half extents| = 0.3 m) about its
	// centre at x from 0 to 0.1 m, z = 0.1 m.
	rb := math.Sqrt(0.2*0.2 + 0.2*0.2 + 0.1*0.1)
	want := Bounds{r3.Vec{X: -rb, Y: -rb, Z: 0.1 - rb}, r3.Vec{X: 0.1 + rb, Y: rb, Z: 0.1 + rb}}
	if r3.Norm(r3.Sub(b.Min, want.Min)) > 1e-9 || r3.Norm(r3.Sub(b.Max, want.Max)) > 1e-9 {
		t.Errorf("bounds %v, want %v", b, want)
	}
	// The grid step is a 1-2-5 number; the patch covers the bounds.
	g := s.grid[0]
	if st := g.step / math.Pow(10, math.Floor(math.Log10(g.step))); !near(st, 1, 1e-9) && !near(st, 2, 1e-9) && !near(st, 5, 1e-9) {
		t.Errorf("grid step %v is not 1, 2 or 5 times a power of ten", g.step)
	}
	if g.centre[0]-g.half > b.Min.X || g.centre[0]+g.half < b.Max.X || g.centre[1]-g.half > b.Min.Y || g.centre[1]+g.half < b.Max.Y {
		t.Errorf("ground patch %+v does not cover %v", g, b)
	}
	for _, tc := range []struct{ in, want float64 }{{0.07, 0.1}, {0.1, 0.1}, {0.11, 0.2}, {0.3, 0.5}, {6, 10}, {0, 1}} {
		if got := niceStep(tc.in); !near(got, tc.want, 1e-12) {
			t.Errorf("niceStep(%v) = %v, want %v", tc.in, got, tc.want)
		}
	}
}

func TestRotationTo(t *testing.T) {
	for _, d := range []r3.Vec{{Z: 1}, {Z: -1}, {X: 1}, {Y: -1}, r3.Unit(r3.Vec{X: 1, Y: 2, Z: -3})} {
		if got := rotationTo(d).Rotate(r3.Vec{Z: 1}); r3.Norm(r3.Sub(got, d)) > 1e-12 {
			t.Errorf("rotationTo(%v) takes z to %v", d, got)
		}
	}
}

// arrowTip returns where a shaft+head pair of glyph instances ends.
func arrowTip(cone instance) r3.Vec {
	m := cone.model
	base := r3.Vec{X: float64(m[12]), Y: float64(m[13]), Z: float64(m[14])}
	axis := r3.Vec{X: float64(m[8]), Y: float64(m[9]), Z: float64(m[10])}
	return r3.Add(base, axis)
}

func TestBuildContactGlyphs(t *testing.T) {
	m, r := boxOnFloor(60, 1, 30)
	s, err := NewScene(m, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	cam := FitCamera(s.Bounds(), 4.0/3)
	var d drawList
	// Frame 10: four sticking contacts, normal force only: shaft + head
	// per contact, then four markers.
	s.build(10, cam, 600, &Style{}, &d)
	if len(d.opaque) != 1 || len(d.ground) != 1 {
		t.Fatalf("%d opaque, %d ground instances, want 1 and 1", len(d.opaque), len(d.ground))
	}
	if len(d.glyphs) != 4*2+4 {
		t.Fatalf("%d glyphs at frame 10, want 12", len(d.glyphs))
	}
	// Arrow length is force (impulse / h) times the scale; the default
	// scale makes the largest force a quarter of the scene radius long.
	scale := s.DefaultArrowScale()
	recs := r.ContactsInFrame(10)
	fn := recs[0].NormalImpulse / r.TimeStep
	if !near(fn*scale, 0.25*s.Bounds().Radius(), 1e-9) {
		t.Errorf("largest force drawn %v m long, want a quarter of the radius %v", fn*scale, s.Bounds().Radius())
	}
	for i := 0; i < 4; i++ {
		tip := arrowTip(d.glyphs[2*i+1])
		want := r3.Add(recs[i].Point, r3.Scale(fn*scale, recs[i].Normal))
		if r3.Norm(r3.Sub(tip, want)) > 1e-6 {
			t.Errorf("contact %d: normal arrow ends at %v, want %v", i, tip, want)
		}
	}
	for i, g := range d.glyphs[8:] {
		if !g.unlit || g.color != toRGBA(StickingColor) {
			t.Errorf("marker %d: unlit %v colour %v, want the sticking colour unlit", i, g.unlit, g.color)
		}
	}
	// Frame 40: sliding, with friction arrows along -x; a doubled arrow
	// scale doubles them.
	st := &Style{ArrowScale: 2 * scale, Selected: &ContactID{"floor", "crate", 1}}
	s.build(40, cam, 600, st, &d)
	if len(d.glyphs) != 4*4+4+1 {
		t.Fatalf("%d glyphs at frame 40, want 21 (with the selection ring)", len(d.glyphs))
	}
	recs = r.ContactsInFrame(40)
	ff := recs[0].FrictionImpulse.X / r.TimeStep
	tip := arrowTip(d.glyphs[3])
	want := r3.Add(recs[0].Point, r3.Vec{X: ff * 2 * scale})
	if r3.Norm(r3.Sub(tip, want)) > 1e-6 {
		t.Errorf("friction arrow ends at %v, want %v", tip, want)
	}
	if g := d.glyphs[len(d.glyphs)-1]; g.color != toRGBA(SlidingColor) {
		t.Errorf("sliding marker colour %v", g.color)
	}
	// Hidden contacts draw no glyphs.
	s.build(40, cam, 600, &Style{HideContacts: true}, &d)
	if len(d.glyphs) != 0 {
		t.Errorf("%d glyphs with contacts hidden", len(d.glyphs))
	}
}

func TestPickContactAndText(t *testing.T) {
	m, r := boxOnFloor(10, 0, 100)
	s, _ := NewScene(m, r, nil)
	cam := FitCamera(s.Bounds(), 4.0/3)
	recs := r.ContactsInFrame(3)
	for i := range recs {
		x, y, _ := cam.Project(recs[i].Point, 800, 600)
		got, ok := s.PickContact(3, cam, 800, 600, x+3, y-2, 12)
		if !ok || got != i {
			t.Errorf("click near contact %d picked %d %v", i, got, ok)
		}
	}
	if _, ok := s.PickContact(3, cam, 800, 600, 2, 2, 12); ok {
		t.Error("click in a corner picked a contact")
	}
	lines := ContactText(&recs[0], r.TimeStep)
	all := strings.Join(lines, "\n")
	for _, want := range []string{"floor / crate", "sticking", "4.903 N", "gap"} {
		if !strings.Contains(all, want) {
			t.Errorf("contact text lacks %q:\n%s", want, all)
		}
	}
}

func TestPositionErrorsAndStatus(t *testing.T) {
	m, r := boxOnFloor(11, 0, 100)
	// The log has the crate 30 mm beside the simulation in y.
	tr := &Trajectory{Times: []float64{0, 0.01}, Bodies: []string{"crate"},
		Pos:   [][]r3.Vec{{{Y: 0.03, Z: 0.1}, {Y: 0.03, Z: 0.1}}},
		Valid: [][]bool{{true, true}}, Rot: [][]contact.Quat{nil}}
	s, err := NewScene(m, r, tr)
	if err != nil {
		t.Fatal(err)
	}
	errs := s.PositionErrors(5, nil)
	if len(errs) != 1 || !near(errs[0].Distance, 0.03, 1e-12) {
		t.Fatalf("position errors %+v, want 30 mm", errs)
	}
	lines := s.statusLines(5, nil, &Style{}, s.DefaultArrowScale(), errs)
	all := strings.Join(lines, "\n")
	for _, want := range []string{"frame 5 / 10", "t = 0.0050 s", "log error crate: 30 mm", "grid "} {
		if !strings.Contains(all, want) {
			t.Errorf("status lacks %q:\n%s", want, all)
		}
	}
	// Frame 0 is a touch-down of all four contacts: three shown, then "...".
	lines = s.statusLines(0, nil, &Style{}, 0, nil)
	if n := strings.Count(strings.Join(lines, "\n"), "event: touch-down floor/crate"); n != 3 {
		t.Errorf("%d event lines at frame 0, want 3:\n%s", n, strings.Join(lines, "\n"))
	}
	var d drawList
	s.build(5, FitCamera(s.Bounds(), 1), 400, &Style{}, &d)
	if len(d.ghosts) != 1 || len(d.overlayLines) != 14 {
		t.Errorf("%d ghost instances and %d error-line floats, want 1 and 14", len(d.ghosts), len(d.overlayLines))
	}
	s.build(5, FitCamera(s.Bounds(), 1), 400, &Style{HideGhost: true}, &d)
	if len(d.ghosts) != 0 {
		t.Error("hidden ghost drawn")
	}
}

func TestHelpText(t *testing.T) {
	lines := HelpText()
	if len(lines) != len(Bindings) {
		t.Fatalf("%d help lines for %d bindings", len(lines), len(Bindings))
	}
	col := strings.Index(lines[0], Bindings[0].Action)
	for i, l := range lines {
		if strings.Index(l, Bindings[i].Action) != col {
			t.Errorf("help line %d is not aligned: %q", i, l)
		}
	}
}
