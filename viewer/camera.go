package viewer

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/spatial/r3"
)

// Camera is a perspective camera orbiting a target point.
type Camera struct {
	// Target is the point the camera looks at and orbits.
	Target r3.Vec
	// Distance from the eye to Target in metres.
	Distance float64
	// Azimuth of the eye about +z, measured from +x, and Elevation above
	// the xy-plane through Target, in radians.
	Azimuth, Elevation float64
	// FOV is the vertical field of view in radians.
	FOV float64
}

// Default viewing angles of a fitted camera: looking from the front-right,
// somewhat from above, so that resting contacts under a body are not hidden
// edge-on.
const (
	defaultAzimuth   = -60 * math.Pi / 180
	defaultElevation = 25 * math.Pi / 180
	defaultFOV       = 40 * math.Pi / 180
	maxElevation     = 89 * math.Pi / 180
)

// Bounds is an axis-aligned box in world coordinates.
type Bounds struct {
	Min, Max r3.Vec
}

// Empty reports whether b contains no point.
func (b Bounds) Empty() bool { return b.Min.X > b.Max.X || b.Min.Y > b.Max.Y || b.Min.Z > b.Max.Z }

// Center returns the centre of b.
func (b Bounds) Center() r3.Vec { return r3.Scale(0.5, r3.Add(b.Min, b.Max)) }

// Radius returns half the diagonal of b.
func (b Bounds) Radius() float64 { return 0.5 * r3.Norm(r3.Sub(b.Max, b.Min)) }

// emptyBounds returns bounds that any point extends.
func emptyBounds() Bounds {
	inf := math.Inf(1)
	return Bounds{Min: r3.Vec{X: inf, Y: inf, Z: inf}, Max: r3.Vec{X: -inf, Y: -inf, Z: -inf}}
}

// addSphere extends b to hold the ball of radius r about c.
func (b *Bounds) addSphere(c r3.Vec, r float64) {
	b.Min = r3.Vec{X: math.Min(b.Min.X, c.X-r), Y: math.Min(b.Min.Y, c.Y-r), Z: math.Min(b.Min.Z, c.Z-r)}
	b.Max = r3.Vec{X: math.Max(b.Max.X, c.X+r), Y: math.Max(b.Max.Y, c.Y+r), Z: math.Max(b.Max.Z, c.Z+r)}
}

// FitCamera returns a camera at the default viewing angles that shows the
// whole of b on a viewport of the given aspect ratio (width/height).
func FitCamera(b Bounds, aspect float64) Camera {
	c := Camera{Azimuth: defaultAzimuth, Elevation: defaultElevation, FOV: defaultFOV}
	c.Fit(b, aspect)
	return c
}

// Fit keeps the viewing angles and field of view and moves the target and
// distance so that the bounding sphere of b fills the narrower of the two
// fields of view with a small margin.
func (c *Camera) Fit(b Bounds, aspect float64) {
	if b.Empty() {
		b = Bounds{Min: r3.Vec{X: -0.5, Y: -0.5, Z: 0}, Max: r3.Vec{X: 0.5, Y: 0.5, Z: 1}}
	}
	if c.FOV <= 0 || c.FOV >= math.Pi {
		c.FOV = defaultFOV
	}
	if aspect <= 0 {
		aspect = 1
	}
	r := math.Max(b.Radius(), 1e-3)
	half := c.FOV / 2
	if hx := math.Atan(aspect * math.Tan(half)); hx < half {
		half = hx
	}
	c.Target = b.Center()
	c.Distance = 1.1 * r / math.Sin(half)
}

// Eye returns the position of the eye.
func (c Camera) Eye() r3.Vec {
	se, ce := math.Sincos(c.Elevation)
	sa, ca := math.Sincos(c.Azimuth)
	return r3.Add(c.Target, r3.Scale(c.Distance, r3.Vec{X: ce * ca, Y: ce * sa, Z: se}))
}

// basis returns the camera's right and up unit vectors in world axes.
func (c Camera) basis() (right, up r3.Vec) {
	f := r3.Unit(r3.Sub(c.Target, c.Eye()))
	right = r3.Unit(r3.Cross(f, r3.Vec{Z: 1}))
	return right, r3.Cross(right, f)
}

// Orbit turns the eye about the target by dAz in azimuth and dEl in
// elevation (radians). Elevation stays within ±89° so that up stays defined.
func (c *Camera) Orbit(dAz, dEl float64) {
	c.Azimuth = math.Remainder(c.Azimuth+dAz, 2*math.Pi)
	c.Elevation = math.Max(-maxElevation, math.Min(maxElevation, c.Elevation+dEl))
}

// Pan moves the target (and with it the eye) so that the point under the
// cursor follows a drag of (dx, dy) pixels on a viewport height pixels tall
// (dy positive downwards).
func (c *Camera) Pan(dx, dy float64, height int) {
	if height <= 0 {
		return
	}
	perPixel := 2 * c.Distance * math.Tan(c.FOV/2) / float64(height)
	right, up := c.basis()
	c.Target = r3.Add(c.Target, r3.Add(r3.Scale(-dx*perPixel, right), r3.Scale(dy*perPixel, up)))
}

// Zoom multiplies the distance to the target by factor (less than one moves
// closer), keeping it positive.
func (c *Camera) Zoom(factor float64) {
	if !(factor > 0) {
		return
	}
	c.Distance = math.Max(c.Distance*factor, 1e-4)
}

// clipPlanes returns near and far distances that bracket a scene of the
// camera's scale while keeping 24-bit depth precision.
func (c Camera) clipPlanes() (near, far float64) {
	return c.Distance * 1e-2, c.Distance * 1e2
}

// viewProj returns the combined view and projection matrix for a viewport
// of the given aspect ratio.
func (c Camera) viewProj(aspect float64) mat4 {
	near, far := c.clipPlanes()
	return perspective(c.FOV, aspect, near, far).mul(lookAt(c.Eye(), c.Target, r3.Vec{Z: 1}))
}

// Project returns the pixel position of the world point p on a width×height
// viewport, origin at the top-left corner, and whether p lies in front of
// the camera.
func (c Camera) Project(p r3.Vec, width, height int) (x, y float64, ok bool) {
	vp := c.viewProj(float64(width) / float64(height))
	cx, cy, _, cw := vp.apply(p)
	if cw <= 0 {
		return 0, 0, false
	}
	x = (cx/cw + 1) / 2 * float64(width)
	y = (1 - cy/cw) / 2 * float64(height)
	return x, y, true
}

// CameraSpec is a partial camera: the fields that are set override those of
// a fitted camera. It is what --camera parses to.
type CameraSpec struct {
	Azimuth, Elevation, Distance, FOV *float64
	Target                            *r3.Vec
}

// ParseCameraSpec parses a comma-separated list of key=value settings:
//
//	az=DEG     azimuth of the eye about +z from +x, degrees
//	el=DEG     elevation of the eye above the horizon, degrees (−89 to 89)
//	dist=M     distance from the eye to the target, metres (> 0)
//	at=X:Y:Z   target point, metres
//	fov=DEG    vertical field of view, degrees (1 to 170)
//
// for example "az=30,el=20,dist=2.5,at=0:0:0.1". Settings not given keep
// their fitted values.
func ParseCameraSpec(s string) (CameraSpec, error) {
	var spec CameraSpec
	if strings.TrimSpace(s) == "" {
		return spec, nil
	}
	num := func(key, v string) (float64, error) {
		f, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
		if err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
			return 0, fmt.Errorf("camera setting %s=%q: not a finite number", key, v)
		}
		return f, nil
	}
	for _, item := range strings.Split(s, ",") {
		key, val, ok := strings.Cut(strings.TrimSpace(item), "=")
		if !ok {
			return spec, fmt.Errorf("camera setting %q: want key=value with key one of az, el, dist, at, fov", item)
		}
		switch key {
		case "az", "el", "dist", "fov":
			f, err := num(key, val)
			if err != nil {
				return spec, err
			}
			switch key {
			case "az":
				v := f * math.Pi / 180
				spec.Azimuth = &v
			case "el":
				if f < -89 || f > 89 {
					return spec, fmt.Errorf("camera setting el=%s: elevation must be within -89 to 89 degrees", val)
				}
				v := f * math.Pi / 180
				spec.Elevation = &v
			case "dist":
				if f <= 0 {
					return spec, fmt.Errorf("camera setting dist=%s: distance must be positive", val)
				}
				spec.Distance = &f
			case "fov":
				if f < 1 || f > 170 {
					return spec, fmt.Errorf("camera setting fov=%s: field of view must be within 1 to 170 degrees", val)
				}
				v := f * math.Pi / 180
				spec.FOV = &v
			}
		case "at":
			parts := strings.Split(val, ":")
			if len(parts) != 3 {
				return spec, fmt.Errorf("camera setting at=%q: want X:Y:Z in metres", val)
			}
			var xyz [3]float64
			for i, p := range parts {
				f, err := num(key, p)
				if err != nil {
					return spec, err
				}
				xyz[i] = f
			}
			spec.Target = &r3.Vec{X: xyz[0], Y: xyz[1], Z: xyz[2]}
		default:
			return spec, fmt.Errorf("camera setting %q: unknown key %q; want az, el, dist, at or fov", item, key)
		}
	}
	return spec, nil
}

// Camera returns the camera that shows b on a viewport of the given aspect
// ratio with the settings of s: angles and field of view first, then a fit
// to b, then the target and distance if s sets them.
func (s CameraSpec) Camera(b Bounds, aspect float64) Camera {
	c := Camera{Azimuth: defaultAzimuth, Elevation: defaultElevation, FOV: defaultFOV}
	if s.Azimuth != nil {
		c.Azimuth = *s.Azimuth
	}
	if s.Elevation != nil {
		c.Elevation = *s.Elevation
	}
	if s.FOV != nil {
		c.FOV = *s.FOV
	}
	c.Fit(b, aspect)
	if s.Target != nil {
		c.Target = *s.Target
	}
	if s.Distance != nil {
		c.Distance = *s.Distance
	}
	return c
}
