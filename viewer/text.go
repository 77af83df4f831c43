package viewer

import (
	"fmt"
	"image"
	"image/draw"
	"math"
	"strings"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/math/fixed"
)

// Binding is one key or mouse action of the interactive viewer.
type Binding struct {
	Input, Action string
}

// Bindings lists the interactive viewer's inputs, as shown by its help
// overlay and by the view command's usage.
var Bindings = []Binding{
	{"space", "play / pause"},
	{"right, left", "step one frame forward / back"},
	{"page down, page up", "jump to next / previous contact event"},
	{"home, end", "first / last frame"},
	{"= and -", "replay faster / slower (0 resets real time)"},
	{"tab, shift+tab", "select next / previous contact of the frame"},
	{"escape", "clear the selection"},
	{"up, down", "longer / shorter force arrows"},
	{"f", "fit the view to the whole motion"},
	{"c, g, l, t", "show / hide contacts, grid, logged ghost, trails"},
	{"r", "loop playback on / off"},
	{"h, f1", "show / hide this help"},
	{"q", "quit"},
	{"left drag", "orbit the camera"},
	{"right drag, shift+left drag", "pan"},
	{"wheel", "zoom"},
	{"left click on a contact", "select it"},
	{"click or drag the time bar", "scrub"},
}

// HelpText returns the bindings as aligned lines.
func HelpText() []string {
	w := 0
	for _, b := range Bindings {
		w = max(w, len(b.Input))
	}
	lines := make([]string, len(Bindings))
	for i, b := range Bindings {
		lines[i] = fmt.Sprintf("%-*s  %s", w, b.Input, b.Action)
	}
	return lines
}

var face = basicfont.Face7x13

const (
	panelPad   = 6
	lineHeight = 15
)

// panelSize returns the pixel size of a text panel of the lines.
func panelSize(lines []string) (w, h int) {
	for _, l := range lines {
		w = max(w, font.MeasureString(face, l).Ceil())
	}
	return w + 2*panelPad, len(lines)*lineHeight + 2*panelPad - (lineHeight - face.Height)
}

// renderPanel draws the lines in textColor on a translucent panel into an
// image (reused from dst when large enough), with premultiplied alpha.
func renderPanel(lines []string, dst *image.RGBA) *image.RGBA {
	w, h := panelSize(lines)
	if dst == nil || cap(dst.Pix) < 4*w*h {
		dst = image.NewRGBA(image.Rect(0, 0, w, h))
	} else {
		dst.Pix = dst.Pix[:4*w*h]
		dst.Stride = 4 * w
		dst.Rect = image.Rect(0, 0, w, h)
	}
	draw.Draw(dst, dst.Rect, image.NewUniform(panelColor), image.Point{}, draw.Src)
	d := font.Drawer{Dst: dst, Src: image.NewUniform(textColor), Face: face}
	for i, l := range lines {
		d.Dot = fixed.P(panelPad, panelPad+face.Ascent+i*lineHeight)
		d.DrawString(l)
	}
	return dst
}

// formatLength writes a length with a unit that keeps it readable.
func formatLength(m float64) string {
	a := math.Abs(m)
	switch {
	case a == 0:
		return "0 m"
	case a < 1e-3:
		return fmt.Sprintf("%.3g um", m*1e6)
	case a < 1:
		return fmt.Sprintf("%.3g mm", m*1e3)
	}
	return fmt.Sprintf("%.3g m", m)
}

// statusLines returns the text of the status panel for a frame.
func (s *Scene) statusLines(frame int, tl *Timeline, st *Style, scale float64, errs []BodyError) []string {
	r := s.run
	f := &r.Frames[frame]
	state := "paused"
	speed := ""
	if tl != nil {
		if tl.Playing() {
			state = "playing"
		}
		speed = "  speed x" + formatSpeed(tl.Speed())
	} else {
		state = "snapshot"
	}
	lines := []string{
		fmt.Sprintf("frame %d / %d   t = %.4f s   %s%s", frame, len(r.Frames)-1, f.T, state, speed),
	}
	scaleText := ""
	if g := s.GridStep(); g > 0 && !st.HideGrid {
		scaleText = "grid " + formatLength(g) + "   "
	}
	if scale > 0 && !st.HideContacts {
		ref := s.GridStep()
		if ref == 0 {
			ref = niceStep(0.1 * s.bounds.Radius())
		}
		scaleText += fmt.Sprintf("arrows %s = %.3g N", formatLength(ref), ref/scale)
	}
	if scaleText != "" {
		lines = append(lines, scaleText)
	}
	n := 0
	for _, e := range s.events {
		if e.Frame == frame {
			if n == 3 {
				lines = append(lines, "  ...")
				break
			}
			lines = append(lines, fmt.Sprintf("event: %s %s/%s", eventLabel(e.Kind), e.Record.A, e.Record.B))
			n++
		}
	}
	if len(errs) > 0 {
		worst := 0
		for i := range errs {
			if errs[i].Distance > errs[worst].Distance {
				worst = i
			}
		}
		const shown = 4
		for i := 0; i < len(errs) && i < shown; i++ {
			lines = append(lines, fmt.Sprintf("log error %s: %s", errs[i].Body, formatLength(errs[i].Distance)))
		}
		if len(errs) > shown {
			lines = append(lines, fmt.Sprintf("log error largest (%s): %s", errs[worst].Body, formatLength(errs[worst].Distance)))
		}
	}
	return lines
}

func formatSpeed(v float64) string {
	if v >= 1 {
		return fmt.Sprintf("%g", v)
	}
	return fmt.Sprintf("1/%g", math.Round(1/v))
}

// joinLines is strings.Join for cache keys of panels.
func joinLines(lines []string) string { return strings.Join(lines, "\n") }
