package viewer

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

func meshVertex(m *mesh, i uint32) (p, n r3.Vec) {
	v := m.verts[6*i : 6*i+6]
	return r3.Vec{X: float64(v[0]), Y: float64(v[1]), Z: float64(v[2])}, r3.Vec{X: float64(v[3]), Y: float64(v[4]), Z: float64(v[5])}
}

// signedVolume is the volume enclosed by a closed triangle mesh by the
// divergence theorem, Σ p₀·(p₁ × p₂)/6; it is positive when the triangles
// wind counter-clockwise seen from outside.
func signedVolume(m *mesh) float64 {
	v := 0.0
	for i := 0; i < len(m.indices); i += 3 {
		a, _ := meshVertex(m, m.indices[i])
		b, _ := meshVertex(m, m.indices[i+1])
		c, _ := meshVertex(m, m.indices[i+2])
		v += r3.Dot(a, r3.Cross(b, c)) / 6
	}
	return v
}

func TestMeshes(t *testing.T) {
	// Area of a regular n-gon inscribed in the unit circle: (n/2) sin(2π/n).
	ngon := func(n int) float64 { return float64(n) / 2 * math.Sin(2*math.Pi/float64(n)) }
	tests := []struct {
		id     meshID
		volume float64 // of the tessellated solid (elementary geometry)
		tol    float64
		onSurf func(p r3.Vec) bool
	}{
		{meshBox, 8, 1e-6, func(p r3.Vec) bool {
			return near(math.Max(math.Abs(p.X), math.Max(math.Abs(p.Y), math.Abs(p.Z))), 1, 1e-6)
		}},
		{meshCylinder, 2 * ngon(roundSegments), 1e-5, func(p r3.Vec) bool {
			rad := math.Hypot(p.X, p.Y)
			return (near(rad, 1, 1e-6) && math.Abs(p.Z) <= 1+1e-6) || (near(math.Abs(p.Z), 1, 1e-6) && rad <= 1+1e-6)
		}},
		{meshCone, ngon(roundSegments) / 3, 1e-5, func(p r3.Vec) bool {
			rad := math.Hypot(p.X, p.Y)
			return near(rad, 1-p.Z, 1e-6) || (near(p.Z, 0, 1e-6) && rad <= 1+1e-6)
		}},
		// An inscribed polyhedron: a little less than 4π/3.
		{meshSphere, 4 * math.Pi / 3, 0.04 * 4 * math.Pi / 3, func(p r3.Vec) bool { return near(r3.Norm(p), 1, 1e-6) }},
	}
	for _, tc := range tests {
		m := buildMesh(tc.id)
		if v := signedVolume(m); !near(v, tc.volume, tc.tol) {
			t.Errorf("mesh %d: enclosed volume %v, want %v (a wrong winding gives a negative volume)", tc.id, v, tc.volume)
		}
		for i := 0; i < len(m.verts)/6; i++ {
			p, n := meshVertex(m, uint32(i))
			if !tc.onSurf(p) {
				t.Errorf("mesh %d: vertex %v is not on the surface", tc.id, p)
				break
			}
			if !near(r3.Norm(n), 1, 1e-6) {
				t.Errorf("mesh %d: normal %v is not of unit length", tc.id, n)
				break
			}
		}
		// Every triangle faces the way its vertex normals point.
		for i := 0; i < len(m.indices); i += 3 {
			a, na := meshVertex(m, m.indices[i])
			b, _ := meshVertex(m, m.indices[i+1])
			c, _ := meshVertex(m, m.indices[i+2])
			if r3.Dot(r3.Cross(r3.Sub(b, a), r3.Sub(c, a)), na) <= 0 {
				t.Errorf("mesh %d: triangle %d winds against its normal", tc.id, i/3)
				break
			}
		}
	}
}
