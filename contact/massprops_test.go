package contact

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/integrate"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/spatial/r3"
)

// principal returns the eigenvalues of the inertia tensor in ascending
// order, by gonum's symmetric eigen-decomposition.
func principal(t *testing.T, m Mat3) [3]float64 {
	t.Helper()
	sym := mat.NewSymDense(3, []float64{m[0], m[1], m[2], m[3], m[4], m[5], m[6], m[7], m[8]})
	var e mat.EigenSym
	if !e.Factorize(sym, false) {
		t.Fatal("eigen-decomposition failed")
	}
	v := e.Values(nil)
	return [3]float64{v[0], v[1], v[2]}
}

func TestShapeMassHandbook(t *testing.T) {
	const rho = 1250.0
	r, h := 0.1, 0.3 // radius, half length
	hx, hy, hz := 0.2, 0.15, 0.05
	mSphere := rho * 4 / 3 * math.Pi * r * r * r
	mBox := rho * 8 * hx * hy * hz
	mCyl := rho * math.Pi * r * r * 2 * h
	l := 2 * h
	tests := []struct {
		name string
		s    Shape
		mass float64
		diag r3.Vec
	}{
		// Solid sphere: I = 2/5 m r² (engineering-mechanics handbook tables).
		{"sphere", Shape{Kind: Sphere, Radius: r, Local: IdentityPose}, mSphere,
			r3.Vec{X: 0.4 * mSphere * r * r, Y: 0.4 * mSphere * r * r, Z: 0.4 * mSphere * r * r}},
		// Solid box a×b×c: m(b²+c²)/12 about the a axis, and cyclic (same tables).
		{"box", Shape{Kind: Box, HalfExtents: r3.Vec{X: hx, Y: hy, Z: hz}, Local: IdentityPose}, mBox,
			r3.Vec{X: mBox * (4*hy*hy + 4*hz*hz) / 12, Y: mBox * (4*hx*hx + 4*hz*hz) / 12, Z: mBox * (4*hx*hx + 4*hy*hy) / 12}},
		// Solid cylinder: m r²/2 about its axis, m(3r²+l²)/12 across (same tables).
		{"cylinder", Shape{Kind: Cylinder, Radius: r, HalfLength: h, Local: IdentityPose}, mCyl,
			r3.Vec{X: mCyl * (3*r*r + l*l) / 12, Y: mCyl * (3*r*r + l*l) / 12, Z: mCyl * r * r / 2}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			mp, err := ShapeMass(tc.s, rho)
			if err != nil {
				t.Fatal(err)
			}
			if !near(mp.Mass, tc.mass, 1e-14) {
				t.Errorf("mass %v, want %v", mp.Mass, tc.mass)
			}
			want := Diag3(tc.diag)
			for i := range want {
				if !near(mp.Inertia[i], want[i], 1e-13) {
					t.Errorf("inertia %v, want %v", mp.Inertia, want)
					break
				}
			}
		})
	}
}

// TestCapsuleMass checks the capsule against two outside references: the
// handbook composition (cylinder + two hemispheres, hemisphere centroid
// 3r/8 from its flat face, parallel-axis theorem) recomputed here term by
// term, and the definition of the moments as integrals over thin discs
// (a disc of radius a has m a²/2 about its axis and m a²/4 across),
// integrated numerically with gonum's integrate.Simpsons.
func TestCapsuleMass(t *testing.T) {
	const rho = 900.0
	r, h := 0.05, 0.12
	mp, err := ShapeMass(Shape{Kind: Capsule, Radius: r, HalfLength: h, Local: IdentityPose}, rho)
	if err != nil {
		t.Fatal(err)
	}
	// Handbook composition.
	mc := rho * math.Pi * r * r * 2 * h
	mh := rho * 2 / 3 * math.Pi * r * r * r // half of a sphere
	iHemiFace := 2.0 / 5 * mh * r * r       // about a diameter of its flat face
	c := 3 * r / 8
	iHemiCentroid := iHemiFace - mh*c*c
	across := mc*(3*r*r+4*h*h)/12 + 2*(iHemiCentroid+mh*(h+c)*(h+c))
	axial := mc*r*r/2 + 2*(2.0/5*mh*r*r)
	if !near(mp.Mass, mc+2*mh, 1e-14) || !near(mp.Inertia[0], across, 1e-13) || !near(mp.Inertia[8], axial, 1e-13) {
		t.Errorf("capsule %v, want mass %v, across %v, axial %v", mp, mc+2*mh, across, axial)
	}
	// Disc integration along the axis.
	const n = 20001
	zs := make([]float64, n)
	dm := make([]float64, n)
	dIx := make([]float64, n)
	dIz := make([]float64, n)
	zmax := h + r
	for i := range zs {
		z := -zmax + 2*zmax*float64(i)/float64(n-1)
		a2 := r * r
		if az := math.Abs(z); az > h {
			a2 = math.Max(0, r*r-(az-h)*(az-h))
		}
		zs[i] = z
		dm[i] = rho * math.Pi * a2
		dIz[i] = dm[i] * a2 / 2
		dIx[i] = dm[i] * (a2/4 + z*z)
	}
	m := integrate.Simpsons(zs, dm)
	ix := integrate.Simpsons(zs, dIx)
	iz := integrate.Simpsons(zs, dIz)
	if !near(mp.Mass, m, 1e-6) || !near(mp.Inertia[0], ix, 1e-6) || !near(mp.Inertia[8], iz, 1e-6) {
		t.Errorf("capsule mass %v Ixx %v Izz %v, integration gives %v %v %v", mp.Mass, mp.Inertia[0], mp.Inertia[8], m, ix, iz)
	}
}

// TestShapeMassLocalPose checks that a shape placed off the body origin
// and turned keeps its principal moments (eigenvalues by gonum) and puts
// its centre of mass at the local position.
func TestShapeMassLocalPose(t *testing.T) {
	s := Shape{Kind: Box, HalfExtents: r3.Vec{X: 0.3, Y: 0.2, Z: 0.1}, Local: atRot(0.1, -0.2, 0.3, r3.Vec{X: 1, Y: 2, Z: 3}, 0.9)}
	mp, err := ShapeMass(s, 1000)
	if err != nil {
		t.Fatal(err)
	}
	m := mp.Mass
	// Handbook: m(b²+c²)/12 and cyclic, ascending.
	want := [3]float64{m * (0.36 + 0.16) / 12, m * (0.36 + 0.04) / 12, m * (0.16 + 0.04) / 12}
	want[0], want[2] = want[2], want[0]
	got := principal(t, mp.Inertia)
	for i := range want {
		if !near(got[i], want[i], 1e-12) {
			t.Errorf("principal moments %v, want %v", got, want)
		}
	}
	if mp.COM != s.Local.Pos {
		t.Errorf("COM %v, want %v", mp.COM, s.Local.Pos)
	}
}

// TestCombineParallelAxis checks Combine against the parallel-axis
// theorem worked by hand: two equal spheres at ±d on x.
func TestCombineParallelAxis(t *testing.T) {
	s := Shape{Kind: Sphere, Radius: 0.1, Local: at(0.5, 0, 0)}
	a, err := ShapeMass(s, 1000)
	if err != nil {
		t.Fatal(err)
	}
	s.Local = at(-0.5, 0, 0)
	b, _ := ShapeMass(s, 1000)
	c := a.Combine(b)
	m := a.Mass
	i0 := 0.4 * m * 0.01
	// I = Σ (I₀ + m d²) across the line, Σ I₀ along it (parallel-axis theorem).
	want := Diag3(r3.Vec{X: 2 * i0, Y: 2 * (i0 + m*0.25), Z: 2 * (i0 + m*0.25)})
	if !near(c.Mass, 2*m, 1e-15) || r3.Norm(c.COM) > 1e-15 {
		t.Errorf("combined mass %v COM %v", c.Mass, c.COM)
	}
	for i := range want {
		if !near(c.Inertia[i], want[i], 1e-13) {
			t.Fatalf("combined inertia %v, want %v", c.Inertia, want)
		}
	}
	if z := (MassProps{}).Combine(a); z != a {
		t.Errorf("adding a zero mass changed %v to %v", a, z)
	}
}

// TestTriangleInequality checks that random assemblies of parts have
// principal moments obeying I₁ + I₂ ≥ I₃ (handbook property of any body).
func TestTriangleInequality(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for trial := 0; trial < 200; trial++ {
		var total MassProps
		for k := 0; k < 1+rng.IntN(4); k++ {
			s := *testShapes[1+rng.IntN(4)]
			s.Local = randomPose(rng, 0.5)
			mp, err := ShapeMass(s, 100+1000*rng.Float64())
			if err != nil {
				t.Fatal(err)
			}
			total = total.Combine(mp)
		}
		p := principal(t, total.Inertia)
		if p[0] <= 0 || p[0]+p[1] < p[2]*(1-1e-12) {
			t.Errorf("principal moments %v violate positivity or the triangle inequality", p)
		}
	}
}

func TestShapeMassErrors(t *testing.T) {
	tests := []struct {
		name    string
		s       Shape
		density float64
	}{
		{"plane", Shape{Kind: Plane, Local: IdentityPose}, 1000},
		{"zero density", Shape{Kind: Sphere, Radius: 1, Local: IdentityPose}, 0},
		{"NaN density", Shape{Kind: Sphere, Radius: 1, Local: IdentityPose}, math.NaN()},
		{"negative radius", Shape{Kind: Sphere, Radius: -1, Local: IdentityPose}, 1000},
		{"zero half extent", Shape{Kind: Box, HalfExtents: r3.Vec{X: 1, Y: 0, Z: 1}, Local: IdentityPose}, 1000},
		{"infinite cylinder", Shape{Kind: Cylinder, Radius: 1, HalfLength: math.Inf(1), Local: IdentityPose}, 1000},
		{"negative capsule length", Shape{Kind: Capsule, Radius: 1, HalfLength: -1, Local: IdentityPose}, 1000},
		{"zero quaternion", Shape{Kind: Sphere, Radius: 1}, 1000},
		{"unknown kind", Shape{Kind: ShapeKind(17), Local: IdentityPose}, 1000},
	}
	for _, tc := range tests {
		if _, err := ShapeMass(tc.s, tc.density); err == nil {
			t.Errorf("%s: no error", tc.name)
		}
	}
}
