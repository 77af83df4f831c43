package viewer

import (
	"fmt"
	"math"
	"time"

	"github.com/go-gl/gl/v3.3-core/gl"
	"github.com/go-gl/glfw/v3.3/glfw"
)

// ViewOptions configure the interactive viewer.
type ViewOptions struct {
	// Width and Height of the window in pixels (default 1280×800).
	Width, Height int
	// Camera settings over the fitted view.
	Camera CameraSpec
	// Style at start; the keys change it.
	Style Style
	// Frame shown at start.
	Frame int
	// Title of the window (default "stickslip view").
	Title string
}

// View opens a window that replays the scene until the user quits. It
// returns ErrNoDisplay (wrapped) when no X display is set; off-screen
// rendering (Renderer, Snapshot) still needs a display, for example Xvfb.
func View(s *Scene, opt ViewOptions) error {
	if opt.Width <= 0 || opt.Height <= 0 {
		opt.Width, opt.Height = 1280, 800
	}
	if opt.Title == "" {
		opt.Title = "stickslip view"
	}
	ctl := newController(s, opt)
	return onGL(func() error {
		win, err := newContextWindow(opt.Width, opt.Height, true, opt.Title, 4)
		if err != nil {
			return err
		}
		defer win.Destroy()
		r, err := newRenderer(s)
		if err != nil {
			return err
		}
		defer r.delete()
		ctl.attach(win)
		glfw.SwapInterval(1)
		const minFrame = time.Second / 60
		last := glfw.GetTime()
		for iter := 0; !win.ShouldClose() && !ctl.quit; iter++ {
			start := time.Now()
			if ctl.tl.Playing() || ctl.drag != dragNone {
				glfw.PollEvents()
			} else {
				glfw.WaitEventsTimeout(0.05)
			}
			now := glfw.GetTime()
			ctl.tl.Advance(now - last)
			last = now
			ctl.width, ctl.height = win.GetFramebufferSize()
			if ctl.width == 0 || ctl.height == 0 {
				continue // minimized
			}
			gl.BindFramebuffer(gl.FRAMEBUFFER, 0)
			gl.Enable(gl.MULTISAMPLE)
			in := ctl.frameInput()
			r.draw(&in)
			if e := gl.GetError(); e != gl.NO_ERROR {
				return fmt.Errorf("OpenGL error 0x%x while drawing frame %d", e, in.frame)
			}
			stop := viewTestHook != nil && viewTestHook(ctl, iter)
			win.SwapBuffers()
			if stop {
				break
			}
			// Without vertical sync (as under Xvfb) keep to about 60 frames
			// a second instead of spinning.
			if d := time.Since(start); d < minFrame {
				time.Sleep(minFrame - d)
			}
		}
		return nil
	})
}

// viewTestHook, when set by tests, runs after each frame of View is drawn
// and before it is shown, on the GL thread with the window's context
// current (so it may read the back buffer); returning true closes the
// window.
var viewTestHook func(c *controller, iter int) bool

type dragMode int

const (
	dragNone dragMode = iota
	dragOrbit
	dragPan
	dragScrub
)

// Mouse sensitivity: a drag across the window height turns the camera by
// half a turn; a wheel notch zooms by 12 %.
const (
	orbitPerPixel = math.Pi
	zoomPerNotch  = 0.88
	clickSlop     = 4   // pixels a press may move and still be a click
	pickRadius    = 12  // pixels around a contact marker that select it
	arrowStep     = 1.5 // factor of one up/down key press on arrow length
)

// controller turns input events into changes of the timeline, camera and
// style. It does no GL and is tested without a window.
type controller struct {
	scene         *Scene
	tl            *Timeline
	cam           Camera
	style         Style
	selected      ContactID
	width, height int
	quit          bool

	drag           dragMode
	pressX, pressY float64
	lastX, lastY   float64
	moved          bool
}

func newController(s *Scene, opt ViewOptions) *controller {
	times := make([]float64, len(s.run.Frames))
	for i := range s.run.Frames {
		times[i] = s.run.Frames[i].T
	}
	c := &controller{
		scene:  s,
		tl:     NewTimeline(times, EventFrames(s.events)),
		style:  opt.Style,
		width:  opt.Width,
		height: opt.Height,
	}
	if c.style.ArrowScale == 0 {
		c.style.ArrowScale = s.DefaultArrowScale()
	}
	if c.style.Selected != nil {
		c.selected = *c.style.Selected
		c.style.Selected = &c.selected
	}
	c.cam = opt.Camera.Camera(s.Bounds(), float64(opt.Width)/float64(opt.Height))
	c.tl.Seek(opt.Frame)
	return c
}

func (c *controller) frameInput() frameInput {
	f := c.tl.Frame()
	return frameInput{scene: c.scene, frame: f, cam: c.cam, width: c.width, height: c.height,
		style: &c.style, timeline: c.tl, selected: selectedIndex(c.scene, f, &c.style)}
}

func (c *controller) attach(win *glfw.Window) {
	win.SetKeyCallback(func(_ *glfw.Window, k glfw.Key, _ int, a glfw.Action, mods glfw.ModifierKey) {
		if a == glfw.Press || a == glfw.Repeat {
			c.key(k, mods)
		}
	})
	win.SetMouseButtonCallback(func(w *glfw.Window, b glfw.MouseButton, a glfw.Action, mods glfw.ModifierKey) {
		x, y := w.GetCursorPos()
		if a == glfw.Press {
			c.press(b, mods, x, y)
		} else {
			c.release(x, y)
		}
	})
	win.SetCursorPosCallback(func(_ *glfw.Window, x, y float64) { c.move(x, y) })
	win.SetScrollCallback(func(_ *glfw.Window, _, dy float64) { c.scroll(dy) })
}

// selectStep selects the contact dir places after the selected one in the
// frame's contacts (the first or last when none is selected there).
func (c *controller) selectStep(dir int) {
	recs := c.scene.run.ContactsInFrame(c.tl.Frame())
	if len(recs) == 0 {
		return
	}
	i := selectedIndex(c.scene, c.tl.Frame(), &c.style)
	switch {
	case i < 0 && dir > 0:
		i = 0
	case i < 0:
		i = len(recs) - 1
	default:
		i = (i + dir + len(recs)) % len(recs)
	}
	c.selected = ID(&recs[i])
	c.style.Selected = &c.selected
}

func (c *controller) key(k glfw.Key, mods glfw.ModifierKey) {
	st := &c.style
	switch k {
	case glfw.KeySpace:
		c.tl.TogglePlay()
	case glfw.KeyRight:
		c.tl.Step(1)
	case glfw.KeyLeft:
		c.tl.Step(-1)
	case glfw.KeyPageDown:
		c.tl.NextEvent()
	case glfw.KeyPageUp:
		c.tl.PrevEvent()
	case glfw.KeyHome:
		c.tl.Step(-c.tl.Len())
	case glfw.KeyEnd:
		c.tl.Step(c.tl.Len())
	case glfw.KeyEqual, glfw.KeyKPAdd:
		c.tl.Faster()
	case glfw.KeyMinus, glfw.KeyKPSubtract:
		c.tl.Slower()
	case glfw.Key0, glfw.KeyKP0:
		c.tl.NormalSpeed()
	case glfw.KeyTab:
		if mods&glfw.ModShift != 0 {
			c.selectStep(-1)
		} else {
			c.selectStep(1)
		}
	case glfw.KeyEscape:
		st.Selected = nil
	case glfw.KeyUp:
		st.ArrowScale *= arrowStep
	case glfw.KeyDown:
		st.ArrowScale /= arrowStep
	case glfw.KeyF:
		c.cam.Fit(c.scene.Bounds(), float64(c.width)/float64(c.height))
	case glfw.KeyC:
		st.HideContacts = !st.HideContacts
	case glfw.KeyG:
		st.HideGrid = !st.HideGrid
	case glfw.KeyL:
		st.HideGhost = !st.HideGhost
	case glfw.KeyT:
		st.HideTrails = !st.HideTrails
	case glfw.KeyR:
		c.tl.loop = !c.tl.loop
	case glfw.KeyH, glfw.KeyF1:
		st.ShowHelp = !st.ShowHelp
	case glfw.KeyQ:
		c.quit = true
	}
}

// onTimeBar reports whether (x, y) falls on the time bar or just around it.
func (c *controller) onTimeBar(x, y float64) bool {
	x0, y0, x1, y1 := timeBar(c.width, c.height)
	return x >= x0-4 && x <= x1+4 && y >= y0-6 && y <= y1+6
}

func (c *controller) scrubTo(x float64) {
	x0, _, x1, _ := timeBar(c.width, c.height)
	c.tl.Pause()
	c.tl.Scrub((x - x0) / (x1 - x0))
}

func (c *controller) press(b glfw.MouseButton, mods glfw.ModifierKey, x, y float64) {
	c.pressX, c.pressY, c.lastX, c.lastY, c.moved = x, y, x, y, false
	switch {
	case b == glfw.MouseButtonLeft && c.onTimeBar(x, y):
		c.drag = dragScrub
		c.scrubTo(x)
	case b == glfw.MouseButtonRight, b == glfw.MouseButtonLeft && mods&glfw.ModShift != 0:
		c.drag = dragPan
	case b == glfw.MouseButtonLeft:
		c.drag = dragOrbit
	}
}

func (c *controller) move(x, y float64) {
	dx, dy := x-c.lastX, y-c.lastY
	c.lastX, c.lastY = x, y
	if math.Abs(x-c.pressX) > clickSlop || math.Abs(y-c.pressY) > clickSlop {
		c.moved = true
	}
	if c.height <= 0 {
		return
	}
	switch c.drag {
	case dragOrbit:
		k := orbitPerPixel / float64(c.height)
		c.cam.Orbit(-dx*k, dy*k)
	case dragPan:
		c.cam.Pan(dx, dy, c.height)
	case dragScrub:
		c.scrubTo(x)
	}
}

func (c *controller) release(x, y float64) {
	if c.drag == dragOrbit && !c.moved {
		// A click without a drag picks the contact under the cursor, or
		// clears the selection when there is none.
		if i, ok := c.scene.PickContact(c.tl.Frame(), c.cam, c.width, c.height, x, y, pickRadius); ok {
			c.selected = ID(&c.scene.run.ContactsInFrame(c.tl.Frame())[i])
			c.style.Selected = &c.selected
		} else {
			c.style.Selected = nil
		}
	}
	c.drag = dragNone
}

func (c *controller) scroll(dy float64) { c.cam.Zoom(math.Pow(zoomPerNotch, dy)) }
