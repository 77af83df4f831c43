package viewer

import (
	"image/color"

	"stickslip/sim"
)

// The viewer's colour scheme. Contact states use hues that no body colour
// uses, and are drawn unlit so that they read the same from every angle.
var (
	// StickingColor marks contacts whose friction holds: no slip.
	StickingColor = color.NRGBA{R: 0x2e, G: 0xc4, B: 0x5a, A: 0xff}
	// SlidingColor marks contacts on the friction cone's boundary, slipping.
	SlidingColor = color.NRGBA{R: 0xff, G: 0x9a, B: 0x10, A: 0xff}
	// SeparatingColor marks pairs within the solver's margin that carry
	// no impulse.
	SeparatingColor = color.NRGBA{R: 0x8a, G: 0x8e, B: 0xf0, A: 0xff}
	// GhostColor tints the logged trajectory; its alpha is the ghost's
	// opacity.
	GhostColor = color.NRGBA{R: 0x70, G: 0xe0, B: 0xff, A: 0x66}
	// ErrorColor draws the segment from a simulated body origin to its
	// logged position.
	ErrorColor = color.NRGBA{R: 0xff, G: 0x3c, B: 0xc8, A: 0xff}
	// SelectedColor rings the selected contact.
	SelectedColor = color.NRGBA{R: 0xff, G: 0xff, B: 0xff, A: 0xff}

	backgroundColor = color.NRGBA{R: 0x1e, G: 0x22, B: 0x2a, A: 0xff}
	groundColor     = color.NRGBA{R: 0xb4, G: 0xb2, B: 0xa8, A: 0xff}
	gridColor       = color.NRGBA{R: 0x7a, G: 0x79, B: 0x72, A: 0xff}
	gridMajorColor  = color.NRGBA{R: 0x4a, G: 0x49, B: 0x44, A: 0xff}
	staticColor     = color.NRGBA{R: 0x9c, G: 0x9a, B: 0x94, A: 0xff}
	trailSimColor   = color.NRGBA{R: 0xf0, G: 0xf0, B: 0xf0, A: 0xa0}
	panelColor      = color.NRGBA{R: 0x10, G: 0x12, B: 0x18, A: 0xc8}
	textColor       = color.NRGBA{R: 0xee, G: 0xee, B: 0xe6, A: 0xff}
	barColor        = color.NRGBA{R: 0x44, G: 0x48, B: 0x55, A: 0xff}
	barFillColor    = color.NRGBA{R: 0x9a, G: 0xa8, B: 0xc8, A: 0xff}
)

// bodyPalette colours bodies in scene order, cycling. The hues stay clear
// of the contact-state colours.
var bodyPalette = []color.NRGBA{
	{R: 0xc8, G: 0x3c, B: 0x32, A: 0xff}, // brick red
	{R: 0x3c, G: 0x6e, B: 0xbe, A: 0xff}, // steel blue
	{R: 0xd2, G: 0xb4, B: 0x3c, A: 0xff}, // ochre
	{R: 0x96, G: 0x50, B: 0xa0, A: 0xff}, // plum
	{R: 0x46, G: 0x8c, B: 0x8c, A: 0xff}, // slate teal
	{R: 0xa0, G: 0x6e, B: 0x46, A: 0xff}, // walnut
}

// BodyColor returns the colour of the i-th body of a model.
func BodyColor(i int) color.NRGBA { return bodyPalette[i%len(bodyPalette)] }

// StateColor returns the colour of contacts in state s.
func StateColor(s sim.ContactState) color.NRGBA {
	switch s {
	case sim.Sticking:
		return StickingColor
	case sim.Sliding:
		return SlidingColor
	}
	return SeparatingColor
}

type rgba [4]float32

func toRGBA(c color.NRGBA) rgba {
	return rgba{float32(c.R) / 255, float32(c.G) / 255, float32(c.B) / 255, float32(c.A) / 255}
}

// lighten mixes c with white by fraction f.
func lighten(c rgba, f float32) rgba {
	return rgba{c[0] + f*(1-c[0]), c[1] + f*(1-c[1]), c[2] + f*(1-c[2]), c[3]}
}
