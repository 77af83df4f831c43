package viewer

import (
	"bytes"
	"errors"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

const snapW, snapH = 400, 300

func deg(d float64) float64 { return d * math.Pi / 180 }

func at(img *image.RGBA, x, y float64) color.RGBA {
	return img.RGBAAt(int(math.Floor(x)), int(math.Floor(y)))
}

// sameHue reports whether p is c scaled by a shading factor in [0.3, 1]:
// the mesh shader only scales colours, so a lit body keeps its channel
// ratios.
func sameHue(p color.RGBA, c color.NRGBA) bool {
	k := float64(p.R) / float64(c.R)
	if k < 0.3 || k > 1.02 {
		return false
	}
	return math.Abs(float64(p.G)-k*float64(c.G)) <= 4 && math.Abs(float64(p.B)-k*float64(c.B)) <= 4
}

func exactly(p color.RGBA, c color.NRGBA, tol int) bool {
	d := func(a, b uint8) bool { return math.Abs(float64(a)-float64(b)) <= float64(tol) }
	return d(p.R, c.R) && d(p.G, c.G) && d(p.B, c.B)
}

func newRendererT(t testing.TB, s *Scene) *Renderer {
	t.Helper()
	needDisplay(t)
	rd, err := NewRenderer(s, snapW, snapH, RendererOptions{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { rd.Close() })
	return rd
}

// TestSnapshotKnownFrame checks a snapshot of a red box resting on the
// floor against the camera's projection: the body colour at the projected
// top face, the state colours at the projected contact points.
func TestSnapshotKnownFrame(t *testing.T) {
	m, r := boxOnFloor(100, 2, 50)
	s, err := NewScene(m, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	rd := newRendererT(t, s)
	cam := Camera{Target: r3.Vec{Z: 0.1}, Distance: 2, Azimuth: deg(-60), Elevation: deg(35), FOV: deg(40)}
	st := &Style{HideText: true}
	img, err := rd.Render(0, cam, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	saveOnFailure(t, img, "known-frame")
	red := BodyColor(0)
	top := r3.Vec{Z: 0.2}
	x, y, _ := cam.Project(top, snapW, snapH)
	for _, d := range [][2]float64{{0, 0}, {-3, 0}, {3, 0}, {0, -3}, {0, 3}} {
		if p := at(img, x+d[0], y+d[1]); !sameHue(p, red) {
			t.Errorf("pixel %+v near the projected top face (%.1f, %.1f) is %v, want a shade of the body colour %v", d, x, y, p, red)
		}
	}
	// A point on the floor well away from the box is not body-coloured.
	if fx, fy, _ := cam.Project(r3.Vec{X: -0.5, Y: 0.5}, snapW, snapH); sameHue(at(img, fx, fy), red) {
		t.Errorf("floor pixel (%.0f, %.0f) is body-coloured", fx, fy)
	}
	check := func(img *image.RGBA, frame int, want color.NRGBA) {
		for _, c := range r.ContactsInFrame(frame) {
			x, y, ok := cam.Project(c.Point, snapW, snapH)
			if !ok {
				t.Fatalf("contact %v behind the camera", c.Point)
			}
			if p := at(img, x, y); !exactly(p, want, 3) {
				t.Errorf("frame %d: marker at projected contact (%.1f, %.1f) is %v, want %s colour %v", frame, x, y, p, c.State, want)
			}
		}
	}
	check(img, 0, StickingColor)
	img, err = rd.Render(99, cam, st, img)
	if err != nil {
		t.Fatal(err)
	}
	check(img, 99, SlidingColor)
}

// TestSnapshotMotion renders two frames of a sliding box from above: the
// pictures differ where the box was and where it went, and nowhere far
// from it.
func TestSnapshotMotion(t *testing.T) {
	m, r := boxOnFloor(60, 10, 30) // 0.29 m along +x between frames 30 and 59
	s, err := NewScene(m, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	rd := newRendererT(t, s)
	cam := Camera{Target: r3.Vec{X: 0.15, Z: 0.1}, Distance: 2, Azimuth: deg(-90), Elevation: deg(80), FOV: deg(40)}
	st := &Style{HideText: true, HideTrails: true}
	a, err := rd.Render(30, cam, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := rd.Render(59, cam, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	saveOnFailure(t, a, "motion-a")
	saveOnFailure(t, b, "motion-b")
	red := BodyColor(0)
	left := r3.Vec{X: -0.15, Z: 0.2} // on the box at frame 30 only
	right := r3.Vec{X: 0.44, Z: 0.2} // on the box at frame 59 only
	lx, ly, _ := cam.Project(left, snapW, snapH)
	rx, ry, _ := cam.Project(right, snapW, snapH)
	if !sameHue(at(a, lx, ly), red) || sameHue(at(b, lx, ly), red) {
		t.Errorf("vacated point: frame 30 %v, frame 59 %v; want body colour, then not", at(a, lx, ly), at(b, lx, ly))
	}
	if sameHue(at(a, rx, ry), red) || !sameHue(at(b, rx, ry), red) {
		t.Errorf("reached point: frame 30 %v, frame 59 %v; want not body colour, then body colour", at(a, rx, ry), at(b, rx, ry))
	}
	// Every differing pixel lies within the projection of the box's two
	// positions (with their contact glyphs), widened by a margin.
	region := image.Rectangle{Min: image.Pt(math.MaxInt, math.MaxInt), Max: image.Pt(math.MinInt, math.MinInt)}
	for _, x := range []float64{-0.2, 0.49} {
		for _, yy := range []float64{-0.2, 0.2} {
			for _, z := range []float64{0, 0.2, 0.3} {
				px, py, _ := cam.Project(r3.Vec{X: x, Y: yy, Z: z}, snapW, snapH)
				region = region.Union(image.Rect(int(px), int(py), int(px)+1, int(py)+1))
			}
		}
	}
	region = region.Inset(-12)
	diff := 0
	for y := 0; y < snapH; y++ {
		for x := 0; x < snapW; x++ {
			if a.RGBAAt(x, y) != b.RGBAAt(x, y) {
				diff++
				if !image.Pt(x, y).In(region) {
					t.Fatalf("pixel (%d, %d) changed, outside the moving box's region %v", x, y, region)
				}
			}
		}
	}
	if diff < 1000 {
		t.Errorf("only %d pixels differ between the frames", diff)
	}
}

// TestSnapshotGhost checks that a logged trajectory shows as a translucent
// ghost at the logged position, tinted towards the ghost colour.
func TestSnapshotGhost(t *testing.T) {
	m, r := boxOnFloor(20, 0, 100)
	const logCSV = "t,crate.x,crate.y,crate.z,crate.qw,crate.qx,crate.qy,crate.qz\n0,0,0.6,0.1,1,0,0,0\n1,0,0.6,0.1,1,0,0,0\n"
	tr, err := ReadTrajectory(strings.NewReader(logCSV), "log.csv")
	if err != nil {
		t.Fatal(err)
	}
	plain, err := NewScene(m, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	withLog, err := NewScene(m, r, tr)
	if err != nil {
		t.Fatal(err)
	}
	cam := Camera{Target: r3.Vec{Y: 0.3, Z: 0.1}, Distance: 2.2, Azimuth: deg(-30), Elevation: deg(40), FOV: deg(40)}
	st := &Style{HideText: true}
	a, err := newRendererT(t, plain).Render(10, cam, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	rdLog := newRendererT(t, withLog)
	b, err := rdLog.Render(10, cam, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	hidden, err := rdLog.Render(10, cam, &Style{HideText: true, HideGhost: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	saveOnFailure(t, b, "ghost")
	gx, gy, _ := cam.Project(r3.Vec{Y: 0.6, Z: 0.2}, snapW, snapH)
	pa, pb := at(a, gx, gy), at(b, gx, gy)
	// Without a log the floor is there: grey, red ≥ blue. The ghost blends
	// GhostColor (blue-dominant) over it.
	if pa.B > pa.R {
		t.Fatalf("without a log the ghost position shows %v, expected the floor", pa)
	}
	if pb.B <= pb.R || pb == pa {
		t.Errorf("ghost position with a log shows %v (without %v), want a blue-tinted ghost", pb, pa)
	}
	// Translucent: the result lies between the floor and the ghost colour.
	if pb.B > GhostColor.B || pb.R < GhostColor.R {
		t.Errorf("ghost pixel %v is not a blend of %v and the floor %v", pb, GhostColor, pa)
	}
	if at(hidden, gx, gy) != pa {
		t.Errorf("hidden ghost still shows: %v, want %v", at(hidden, gx, gy), pa)
	}
	// The simulated box is unaffected by the log.
	bx, by, _ := cam.Project(r3.Vec{Z: 0.2}, snapW, snapH)
	if at(a, bx, by) != at(b, bx, by) {
		t.Errorf("simulated box changed with the log: %v vs %v", at(a, bx, by), at(b, bx, by))
	}
}

// TestSnapshotOverlays checks that the status panel, the selected contact's
// panel and the help are drawn where they belong, and that rendering is
// repeatable.
func TestSnapshotOverlays(t *testing.T) {
	m, r := boxOnFloor(20, 0, 100)
	s, _ := NewScene(m, r, nil)
	rd := newRendererT(t, s)
	cam := FitCamera(s.Bounds(), float64(snapW)/snapH)
	bare, _ := rd.Render(5, cam, &Style{HideText: true}, nil)
	text, _ := rd.Render(5, cam, &Style{}, nil)
	sel, _ := rd.Render(5, cam, &Style{Selected: &ContactID{"floor", "crate", 0}}, nil)
	help, _ := rd.Render(5, cam, &Style{ShowHelp: true}, nil)
	again, _ := rd.Render(5, cam, &Style{ShowHelp: true}, nil)
	saveOnFailure(t, sel, "selected")
	differs := func(a, b *image.RGBA, r image.Rectangle) bool {
		for y := r.Min.Y; y < r.Max.Y; y++ {
			for x := r.Min.X; x < r.Max.X; x++ {
				if a.RGBAAt(x, y) != b.RGBAAt(x, y) {
					return true
				}
			}
		}
		return false
	}
	topLeft := image.Rect(10, 10, 60, 30)
	topRight := image.Rect(snapW-60, 10, snapW-10, 30)
	centre := image.Rect(snapW/2-20, snapH/2-10, snapW/2+20, snapH/2+10)
	bar := image.Rect(barMargin, snapH-barMargin-barHeight, snapW-barMargin, snapH-barMargin)
	switch {
	case !differs(bare, text, topLeft):
		t.Error("no status panel at the top left")
	case !differs(bare, text, bar):
		t.Error("no time bar at the bottom")
	case differs(text, sel, topLeft) || !differs(text, sel, topRight):
		t.Error("the selected contact's panel is not (only) at the top right")
	case !differs(text, help, centre):
		t.Error("no help in the middle")
	case !bytes.Equal(help.Pix, again.Pix):
		t.Error("the same frame rendered twice differs")
	}
	// Selected contact ring: white around the marker.
	c := r.ContactsInFrame(5)[0]
	x, y, _ := cam.Project(c.Point, snapW, snapH)
	ring := at(sel, x+markerPixels*1.35, y)
	if !exactly(ring, SelectedColor, 8) {
		t.Errorf("no selection ring beside the selected marker: %v", ring)
	}
}

func TestRendererErrors(t *testing.T) {
	m, r := boxOnFloor(5, 0, 100)
	s, _ := NewScene(m, r, nil)
	if _, err := NewRenderer(s, 8, 300, RendererOptions{}); err == nil || !strings.Contains(err.Error(), "16 to 8192") {
		t.Errorf("tiny image: %v", err)
	}
	rd := newRendererT(t, s)
	if _, err := rd.Render(5, FitCamera(s.Bounds(), 1), nil, nil); err == nil || !strings.Contains(err.Error(), "frame 5 is outside the run's frames 0 to 4") {
		t.Errorf("frame out of range: %v", err)
	}
	rd.Close()
	if _, err := rd.Render(0, FitCamera(s.Bounds(), 1), nil, nil); err == nil {
		t.Error("Render after Close succeeded")
	}
}

func TestNoDisplay(t *testing.T) {
	m, r := boxOnFloor(5, 0, 100)
	s, _ := NewScene(m, r, nil)
	t.Setenv("DISPLAY", "")
	if _, err := NewRenderer(s, 64, 64, RendererOptions{}); !errors.Is(err, ErrNoDisplay) {
		t.Errorf("NewRenderer without a display: %v, want ErrNoDisplay", err)
	}
	if err := View(s, ViewOptions{}); !errors.Is(err, ErrNoDisplay) {
		t.Errorf("View without a display: %v, want ErrNoDisplay", err)
	}
}

func TestWritePNG(t *testing.T) {
	dir := t.TempDir()
	img := image.NewRGBA(image.Rect(0, 0, 3, 2))
	img.Set(1, 1, color.RGBA{10, 20, 30, 255})
	path := filepath.Join(dir, "frame.png")
	if err := os.WriteFile(path, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := WritePNG(path, img); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	got, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	if c := color.RGBAModel.Convert(got.At(1, 1)); c != (color.RGBA{10, 20, 30, 255}) {
		t.Errorf("pixel read back %v", c)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("directory holds %d entries after the write, want only the image", len(entries))
	}
	if err := WritePNG(filepath.Join(dir, "missing", "x.png"), img); err == nil {
		t.Error("writing into a missing directory succeeded")
	}
}

// saveOnFailure keeps the image in the test's output directory when the
// test fails, for a person to look at.
func saveOnFailure(t *testing.T, img *image.RGBA, name string) {
	t.Cleanup(func() {
		if t.Failed() {
			p := filepath.Join(os.TempDir(), "stickslip-viewer-"+name+".png")
			if err := WritePNG(p, img); err == nil {
				t.Logf("image kept at %s", p)
			}
		}
	})
}
