package viewer

import (
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

// pinhole projects p with the textbook pinhole model (focal length in
// pixels f = (h/2)/tan(fov/2), image centre at (w/2, h/2), y down), built
// from the camera's basis directly rather than from the GL matrices.
func pinhole(c Camera, p r3.Vec, w, h int) (x, y float64) {
	eye := c.Eye()
	fwd := r3.Unit(r3.Sub(c.Target, eye))
	right := r3.Unit(r3.Cross(fwd, r3.Vec{Z: 1}))
	up := r3.Cross(right, fwd)
	d := r3.Sub(p, eye)
	z := r3.Dot(d, fwd)
	f := float64(h) / 2 / math.Tan(c.FOV/2)
	return float64(w)/2 + f*r3.Dot(d, right)/z, float64(h)/2 - f*r3.Dot(d, up)/z
}

func TestCameraProjectMatchesPinhole(t *testing.T) {
	cams := []Camera{
		{Target: r3.Vec{Z: 0.1}, Distance: 2, Azimuth: 0.3, Elevation: 0.4, FOV: 0.7},
		{Target: r3.Vec{X: 1, Y: -2, Z: 0.5}, Distance: 7, Azimuth: -2.5, Elevation: -0.2, FOV: 1.2},
		{Target: r3.Vec{}, Distance: 0.3, Azimuth: math.Pi, Elevation: 1.5, FOV: 0.3},
	}
	pts := []r3.Vec{{}, {X: 0.1, Y: 0.2, Z: 0.3}, {X: -0.5, Y: 0.1}, {X: 1, Y: -1.9, Z: 0.6}}
	for ci, c := range cams {
		for _, p := range pts {
			if r3.Dot(r3.Sub(p, c.Eye()), r3.Sub(c.Target, c.Eye())) <= 0 {
				continue
			}
			x, y, ok := c.Project(p, 640, 480)
			wx, wy := pinhole(c, p, 640, 480)
			// The GL matrices are float32: allow their relative rounding.
			tol := func(v float64) float64 { return 1e-3 + 1e-5*math.Abs(v) }
			if !ok || !near(x, wx, tol(wx)) || !near(y, wy, tol(wy)) {
				t.Errorf("camera %d point %v: Project (%.4f, %.4f, %v), pinhole (%.4f, %.4f)", ci, p, x, y, ok, wx, wy)
			}
		}
	}
	// A point behind the eye does not project.
	c := cams[0]
	behind := r3.Add(c.Eye(), r3.Sub(c.Eye(), c.Target))
	if _, _, ok := c.Project(behind, 640, 480); ok {
		t.Error("point behind the camera projected")
	}
	// The target lands at the image centre.
	if x, y, _ := c.Project(c.Target, 640, 480); !near(x, 320, 1e-3) || !near(y, 240, 1e-3) {
		t.Errorf("target at (%v, %v), want the centre", x, y)
	}
}

func TestCameraFitShowsBounds(t *testing.T) {
	cases := []struct {
		b        Bounds
		w, h     int
		az, elev float64
	}{
		{Bounds{r3.Vec{X: -1, Y: -1, Z: 0}, r3.Vec{X: 1, Y: 1, Z: 0.5}}, 800, 600, 0.4, 0.3},
		{Bounds{r3.Vec{X: 0, Y: 0, Z: 0}, r3.Vec{X: 10, Y: 0.1, Z: 0.1}}, 400, 900, -1, 0.8}, // tall viewport
		{Bounds{r3.Vec{X: 5, Y: 5, Z: 5}, r3.Vec{X: 5.01, Y: 5.01, Z: 5.01}}, 1000, 200, 2, -0.3},
	}
	for i, tc := range cases {
		c := Camera{Azimuth: tc.az, Elevation: tc.elev, FOV: defaultFOV}
		c.Fit(tc.b, float64(tc.w)/float64(tc.h))
		for k := 0; k < 8; k++ {
			p := tc.b.Min
			if k&1 != 0 {
				p.X = tc.b.Max.X
			}
			if k&2 != 0 {
				p.Y = tc.b.Max.Y
			}
			if k&4 != 0 {
				p.Z = tc.b.Max.Z
			}
			x, y, ok := c.Project(p, tc.w, tc.h)
			if !ok || x < 0 || x > float64(tc.w) || y < 0 || y > float64(tc.h) {
				t.Errorf("case %d: corner %v at (%.1f, %.1f) is outside %dx%d", i, p, x, y, tc.w, tc.h)
			}
		}
		if c.Azimuth != tc.az || c.Elevation != tc.elev {
			t.Errorf("case %d: Fit changed the viewing angles", i)
		}
	}
	// An empty box still gives a usable camera.
	c := FitCamera(emptyBounds(), 1.5)
	if !(c.Distance > 0) || math.IsNaN(c.Target.X) {
		t.Errorf("fit to empty bounds: %+v", c)
	}
}

func TestCameraOrbitPanZoom(t *testing.T) {
	c := Camera{Target: r3.Vec{Z: 0.2}, Distance: 3, Azimuth: 0.5, Elevation: 0.3, FOV: 0.8}
	// Orbiting keeps the distance to the target.
	o := c
	o.Orbit(1.0, 0.2)
	if d := r3.Norm(r3.Sub(o.Eye(), o.Target)); !near(d, 3, 1e-12) {
		t.Errorf("orbit changed the distance to %v", d)
	}
	o.Orbit(0, 10)
	if o.Elevation > maxElevation {
		t.Errorf("elevation %v past the limit", o.Elevation)
	}
	// Panning by (dx, dy) pixels moves a point at the target's depth by
	// (dx, dy) pixels on screen: it follows the cursor.
	const w, h = 800, 600
	p := r3.Vec{X: 0.1, Y: -0.1, Z: 0.25}
	x0, y0, _ := c.Project(c.Target, w, h)
	p0x, p0y, _ := c.Project(p, w, h)
	pc := c
	pc.Pan(30, -20, h)
	x1, y1, _ := pc.Project(c.Target, w, h)
	if !near(x1-x0, 30, 1e-2) || !near(y1-y0, -20, 1e-2) {
		t.Errorf("pan (30, -20): the old target moved by (%.3f, %.3f) px", x1-x0, y1-y0)
	}
	if p1x, p1y, _ := pc.Project(p, w, h); !near(p1x-p0x, 30, 1) || !near(p1y-p0y, -20, 1) {
		t.Errorf("pan (30, -20): a nearby point moved by (%.3f, %.3f) px", p1x-p0x, p1y-p0y)
	}
	// Zooming scales the distance and keeps the target centred.
	z := c
	z.Zoom(0.5)
	if !near(z.Distance, 1.5, 1e-12) {
		t.Errorf("zoom 0.5: distance %v", z.Distance)
	}
	z.Zoom(-1)
	z.Zoom(0)
	if !near(z.Distance, 1.5, 1e-12) {
		t.Error("non-positive zoom factors must be ignored")
	}
}

func TestParseCameraSpec(t *testing.T) {
	deg := math.Pi / 180
	b := Bounds{r3.Vec{X: -1, Y: -1}, r3.Vec{X: 1, Y: 1, Z: 1}}
	fit := FitCamera(b, 4.0/3)
	tests := []struct {
		in      string
		want    Camera
		wantErr string
	}{
		{in: "", want: fit},
		{in: "az=30,el=20,dist=2.5,at=0:0:0.1", want: Camera{Target: r3.Vec{Z: 0.1}, Distance: 2.5, Azimuth: 30 * deg, Elevation: 20 * deg, FOV: defaultFOV}},
		{in: " fov=60 , az=-90 ", want: func() Camera {
			c := Camera{Azimuth: -90 * deg, Elevation: defaultElevation, FOV: 60 * deg}
			c.Fit(b, 4.0/3)
			return c
		}()},
		{in: "az", wantErr: "want key=value"},
		{in: "zoom=2", wantErr: "unknown key"},
		{in: "el=95", wantErr: "-89 to 89"},
		{in: "dist=0", wantErr: "positive"},
		{in: "dist=x", wantErr: "not a finite number"},
		{in: "fov=NaN", wantErr: "not a finite number"},
		{in: "at=1:2", wantErr: "X:Y:Z"},
		{in: "fov=200", wantErr: "1 to 170"},
	}
	for _, tc := range tests {
		spec, err := ParseCameraSpec(tc.in)
		if tc.wantErr != "" {
			if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
				t.Errorf("%q: error %v, want one containing %q", tc.in, err, tc.wantErr)
			}
			continue
		}
		if err != nil {
			t.Errorf("%q: %v", tc.in, err)
			continue
		}
		got := spec.Camera(b, 4.0/3)
		if !near(got.Azimuth, tc.want.Azimuth, 1e-12) || !near(got.Elevation, tc.want.Elevation, 1e-12) ||
			!near(got.Distance, tc.want.Distance, 1e-12) || !near(got.FOV, tc.want.FOV, 1e-12) ||
			r3.Norm(r3.Sub(got.Target, tc.want.Target)) > 1e-12 {
			t.Errorf("%q: camera %+v, want %+v", tc.in, got, tc.want)
		}
	}
}
