package viewer

import (
	"image/color"
	"math"
	"testing"

	"github.com/go-gl/gl/v3.3-core/gl"
	"github.com/go-gl/glfw/v3.3/glfw"
	"gonum.org/v1/gonum/spatial/r3"
)

func newTestController(t *testing.T) (*controller, *Scene) {
	t.Helper()
	m, r := boxOnFloor(100, 2, 50)
	s, err := NewScene(m, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	return newController(s, ViewOptions{Width: 800, Height: 600}), s
}

func TestControllerKeys(t *testing.T) {
	c, s := newTestController(t)
	steps := []struct {
		name  string
		key   glfw.Key
		mods  glfw.ModifierKey
		check func() bool
	}{
		{"space plays", glfw.KeySpace, 0, func() bool { return c.tl.Playing() }},
		{"space pauses", glfw.KeySpace, 0, func() bool { return !c.tl.Playing() }},
		{"right steps", glfw.KeyRight, 0, func() bool { return c.tl.Frame() == 1 }},
		{"left steps back", glfw.KeyLeft, 0, func() bool { return c.tl.Frame() == 0 }},
		{"page down: next event (slip at 50)", glfw.KeyPageDown, 0, func() bool { return c.tl.Frame() == 50 }},
		{"page up: previous event (touch-down at 0)", glfw.KeyPageUp, 0, func() bool { return c.tl.Frame() == 0 }},
		{"end", glfw.KeyEnd, 0, func() bool { return c.tl.Frame() == 99 }},
		{"home", glfw.KeyHome, 0, func() bool { return c.tl.Frame() == 0 }},
		{"faster", glfw.KeyEqual, 0, func() bool { return c.tl.Speed() == 2 }},
		{"slower", glfw.KeyMinus, 0, func() bool { return c.tl.Speed() == 1 }},
		{"slower again", glfw.KeyMinus, 0, func() bool { return c.tl.Speed() == 0.5 }},
		{"real time", glfw.Key0, 0, func() bool { return c.tl.Speed() == 1 }},
		{"tab selects the first contact", glfw.KeyTab, 0, func() bool { return c.style.Selected != nil && c.style.Selected.Feature == 0 }},
		{"tab selects the next", glfw.KeyTab, 0, func() bool { return c.style.Selected.Feature == 1 }},
		{"shift+tab goes back", glfw.KeyTab, glfw.ModShift, func() bool { return c.style.Selected.Feature == 0 }},
		{"shift+tab wraps", glfw.KeyTab, glfw.ModShift, func() bool { return c.style.Selected.Feature == 3 }},
		{"escape clears", glfw.KeyEscape, 0, func() bool { return c.style.Selected == nil }},
		{"up lengthens arrows", glfw.KeyUp, 0, func() bool { return near(c.style.ArrowScale, arrowStep*s.DefaultArrowScale(), 1e-15) }},
		{"down shortens them", glfw.KeyDown, 0, func() bool { return near(c.style.ArrowScale, s.DefaultArrowScale(), 1e-15) }},
		{"c hides contacts", glfw.KeyC, 0, func() bool { return c.style.HideContacts }},
		{"g hides the grid", glfw.KeyG, 0, func() bool { return c.style.HideGrid }},
		{"l hides the ghost", glfw.KeyL, 0, func() bool { return c.style.HideGhost }},
		{"t hides trails", glfw.KeyT, 0, func() bool { return c.style.HideTrails }},
		{"r loops", glfw.KeyR, 0, func() bool { return c.tl.loop }},
		{"h shows help", glfw.KeyH, 0, func() bool { return c.style.ShowHelp }},
		{"f1 hides help", glfw.KeyF1, 0, func() bool { return !c.style.ShowHelp }},
		{"q quits", glfw.KeyQ, 0, func() bool { return c.quit }},
	}
	for _, st := range steps {
		c.key(st.key, st.mods)
		if !st.check() {
			t.Errorf("%s: state after the key is wrong (frame %d, speed %v, style %+v)", st.name, c.tl.Frame(), c.tl.Speed(), c.style)
		}
	}
	// f refits after the camera moved.
	fit := c.cam
	c.cam.Zoom(3)
	c.key(glfw.KeyF, 0)
	if !near(c.cam.Distance, fit.Distance, 1e-12) {
		t.Errorf("f: distance %v, want the fitted %v", c.cam.Distance, fit.Distance)
	}
}

func TestControllerMouse(t *testing.T) {
	c, s := newTestController(t)
	// A click on a projected contact selects it.
	rec := s.run.ContactsInFrame(0)[2]
	x, y, _ := c.cam.Project(rec.Point, c.width, c.height)
	c.press(glfw.MouseButtonLeft, 0, x+2, y)
	c.release(x+2, y)
	if c.style.Selected == nil || *c.style.Selected != ID(&rec) {
		t.Fatalf("click on contact 2 selected %v", c.style.Selected)
	}
	// The selection follows the contact to later frames.
	c.tl.Seek(70)
	if selectedIndex(s, 70, &c.style) != 2 {
		t.Error("selection lost in a later frame")
	}
	// A drag orbits instead of picking, and keeps the selection.
	az := c.cam.Azimuth
	c.press(glfw.MouseButtonLeft, 0, 100, 100)
	c.move(160, 100)
	c.release(160, 100)
	if want := az - 60*orbitPerPixel/600; !near(c.cam.Azimuth, math.Remainder(want, 2*math.Pi), 1e-12) {
		t.Errorf("drag of 60 px: azimuth %v, want %v", c.cam.Azimuth, want)
	}
	if c.style.Selected == nil {
		t.Error("a drag cleared the selection")
	}
	// A click on empty space clears it.
	c.press(glfw.MouseButtonLeft, 0, 5, 300)
	c.release(5, 300)
	if c.style.Selected != nil {
		t.Error("click on nothing kept the selection")
	}
	// Right drag pans: the target moves, the distance stays.
	target, dist := c.cam.Target, c.cam.Distance
	c.press(glfw.MouseButtonRight, 0, 300, 300)
	c.move(340, 280)
	c.release(340, 280)
	if c.cam.Target == target || c.cam.Distance != dist {
		t.Error("right drag did not pan")
	}
	// The wheel zooms in.
	c.scroll(2)
	if !near(c.cam.Distance, dist*zoomPerNotch*zoomPerNotch, 1e-12) {
		t.Errorf("two notches: distance %v, want %v", c.cam.Distance, dist*zoomPerNotch*zoomPerNotch)
	}
	// Clicking the middle of the time bar scrubs to the middle of the run
	// and dragging to its end scrubs to the last frame.
	x0, y0, x1, y1 := timeBar(c.width, c.height)
	c.tl.Play()
	c.press(glfw.MouseButtonLeft, 0, (x0+x1)/2, (y0+y1)/2)
	if f := c.tl.Frame(); f != 49 || c.tl.Playing() {
		t.Errorf("click mid-bar: frame %d playing %v, want 49 paused (0.0495 s of 0.099)", f, c.tl.Playing())
	}
	c.move(x1+50, y0)
	c.release(x1+50, y0)
	if c.tl.Frame() != 99 {
		t.Errorf("scrub past the end: frame %d, want 99", c.tl.Frame())
	}
}

// TestView opens the interactive window under the X display, plays a few
// frames through the controller and closes.
func TestView(t *testing.T) {
	needDisplay(t)
	m, r := boxOnFloor(100, 2, 50)
	s, err := NewScene(m, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	var frames []int
	var boxPixel [4]uint8
	viewTestHook = func(c *controller, iter int) bool {
		switch iter {
		case 0:
			// The window shows the body where the camera projects it: read
			// the back buffer (GL rows run bottom-up).
			x, y, _ := c.cam.Project(r3.Vec{Z: 0.2}, c.width, c.height)
			gl.ReadBuffer(gl.BACK)
			gl.ReadPixels(int32(x), int32(c.height-1-int(y)), 1, 1, gl.RGBA, gl.UNSIGNED_BYTE, gl.Ptr(&boxPixel[0]))
			c.key(glfw.KeyPageDown, 0)
			c.key(glfw.KeyH, 0)
		case 1:
			c.key(glfw.KeyTab, 0)
			c.key(glfw.KeySpace, 0)
		}
		frames = append(frames, c.tl.Frame())
		return iter == 5
	}
	defer func() { viewTestHook = nil }()
	if err := View(s, ViewOptions{Width: 320, Height: 240, Style: Style{HideText: true}}); err != nil {
		t.Fatal(err)
	}
	if p := (color.RGBA{boxPixel[0], boxPixel[1], boxPixel[2], 255}); !sameHue(p, BodyColor(0)) {
		t.Errorf("window pixel at the projected box top is %v, want a shade of %v", p, BodyColor(0))
	}
	if len(frames) != 6 || frames[0] != 50 || frames[5] <= 50 {
		t.Errorf("frames shown %v: want 6 frames, the event at 50, then playing on", frames)
	}
}
