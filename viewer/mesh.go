package viewer

import "math"

// mesh is an indexed triangle list with interleaved positions and normals
// (x, y, z, nx, ny, nz per vertex). Triangles wind counter-clockwise seen
// from outside, so back faces can be culled.
type mesh struct {
	verts   []float32
	indices []uint32
}

// The unit meshes every shape is drawn from, scaled by its model matrix.
type meshID int

const (
	meshSphere   meshID = iota // radius 1 about the origin
	meshBox                    // the cube [-1, 1]³
	meshCylinder               // radius 1 about z, z ∈ [-1, 1], capped
	meshCone                   // base radius 1 at z = 0, apex at z = 1
	meshQuad                   // the square [-1, 1]² in z = 0, facing +z
	numMeshes
)

// Tessellation density: llvmpipe renders a hundred spheres of this many
// triangles well within a frame.
const (
	sphereRings    = 16
	sphereSegments = 32
	roundSegments  = 32
)

func (m *mesh) vertex(x, y, z, nx, ny, nz float64) uint32 {
	i := uint32(len(m.verts) / 6)
	m.verts = append(m.verts, float32(x), float32(y), float32(z), float32(nx), float32(ny), float32(nz))
	return i
}

func (m *mesh) tri(a, b, c uint32) { m.indices = append(m.indices, a, b, c) }

func (m *mesh) quad(a, b, c, d uint32) { m.tri(a, b, c); m.tri(a, c, d) }

func buildMesh(id meshID) *mesh {
	switch id {
	case meshSphere:
		return sphereMesh(sphereRings, sphereSegments)
	case meshBox:
		return boxMesh()
	case meshCylinder:
		return cylinderMesh(roundSegments)
	case meshCone:
		return coneMesh(roundSegments)
	case meshQuad:
		m := &mesh{}
		a := m.vertex(-1, -1, 0, 0, 0, 1)
		b := m.vertex(1, -1, 0, 0, 0, 1)
		c := m.vertex(1, 1, 0, 0, 0, 1)
		d := m.vertex(-1, 1, 0, 0, 0, 1)
		m.quad(a, b, c, d)
		return m
	}
	panic("viewer: unknown mesh")
}

// sphereMesh is a latitude-longitude tessellation of the unit sphere.
func sphereMesh(rings, segs int) *mesh {
	m := &mesh{}
	for i := 0; i <= rings; i++ {
		theta := math.Pi * float64(i) / float64(rings) // from +z down
		st, ct := math.Sincos(theta)
		for j := 0; j <= segs; j++ {
			phi := 2 * math.Pi * float64(j) / float64(segs)
			sp, cp := math.Sincos(phi)
			x, y, z := st*cp, st*sp, ct
			m.vertex(x, y, z, x, y, z)
		}
	}
	row := uint32(segs + 1)
	for i := 0; i < rings; i++ {
		for j := 0; j < segs; j++ {
			a := uint32(i)*row + uint32(j)
			b, c, d := a+row, a+row+1, a+1
			// Skip the degenerate triangles at the poles.
			if i != 0 {
				m.tri(a, b, d)
			}
			if i != rings-1 {
				m.tri(d, b, c)
			}
		}
	}
	return m
}

func boxMesh() *mesh {
	m := &mesh{}
	// Each face: outward normal n and two in-plane axes u, v with u × v = n.
	faces := [6][3][3]float64{
		{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}},
		{{-1, 0, 0}, {0, 0, 1}, {0, 1, 0}},
		{{0, 1, 0}, {0, 0, 1}, {1, 0, 0}},
		{{0, -1, 0}, {1, 0, 0}, {0, 0, 1}},
		{{0, 0, 1}, {1, 0, 0}, {0, 1, 0}},
		{{0, 0, -1}, {0, 1, 0}, {1, 0, 0}},
	}
	for _, f := range faces {
		n, u, v := f[0], f[1], f[2]
		var idx [4]uint32
		for k, s := range [4][2]float64{{-1, -1}, {1, -1}, {1, 1}, {-1, 1}} {
			p := [3]float64{}
			for i := range p {
				p[i] = n[i] + s[0]*u[i] + s[1]*v[i]
			}
			idx[k] = m.vertex(p[0], p[1], p[2], n[0], n[1], n[2])
		}
		m.quad(idx[0], idx[1], idx[2], idx[3])
	}
	return m
}

func cylinderMesh(segs int) *mesh {
	m := &mesh{}
	for j := 0; j <= segs; j++ {
		s, c := math.Sincos(2 * math.Pi * float64(j) / float64(segs))
		m.vertex(c, s, -1, c, s, 0)
		m.vertex(c, s, 1, c, s, 0)
	}
	for j := 0; j < segs; j++ {
		a := uint32(2 * j)
		m.quad(a, a+2, a+3, a+1)
	}
	for _, z := range []float64{-1, 1} {
		centre := m.vertex(0, 0, z, 0, 0, z)
		first := uint32(len(m.verts) / 6)
		for j := 0; j <= segs; j++ {
			s, c := math.Sincos(2 * math.Pi * float64(j) / float64(segs))
			m.vertex(c, s, z, 0, 0, z)
		}
		for j := uint32(0); j < uint32(segs); j++ {
			if z > 0 {
				m.tri(centre, first+j, first+j+1)
			} else {
				m.tri(centre, first+j+1, first+j)
			}
		}
	}
	return m
}

func coneMesh(segs int) *mesh {
	m := &mesh{}
	k := 1 / math.Sqrt2 // slant normal of a cone as wide as it is tall
	for j := 0; j < segs; j++ {
		a0 := 2 * math.Pi * float64(j) / float64(segs)
		a1 := 2 * math.Pi * float64(j+1) / float64(segs)
		am := (a0 + a1) / 2
		s0, c0 := math.Sincos(a0)
		s1, c1 := math.Sincos(a1)
		sm, cm := math.Sincos(am)
		p := m.vertex(c0, s0, 0, c0*k, s0*k, k)
		q := m.vertex(c1, s1, 0, c1*k, s1*k, k)
		apex := m.vertex(0, 0, 1, cm*k, sm*k, k)
		m.tri(p, q, apex)
	}
	centre := m.vertex(0, 0, 0, 0, 0, -1)
	first := uint32(len(m.verts) / 6)
	for j := 0; j <= segs; j++ {
		s, c := math.Sincos(2 * math.Pi * float64(j) / float64(segs))
		m.vertex(c, s, 0, 0, 0, -1)
	}
	for j := uint32(0); j < uint32(segs); j++ {
		m.tri(centre, first+j+1, first+j)
	}
	return m
}
