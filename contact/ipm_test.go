package contact

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// randomInteriorSOC returns a random point of the interior of L.
func randomInteriorSOC(rng *rand.Rand) soc3 {
	x1, x2 := rng.NormFloat64(), rng.NormFloat64()
	return soc3{math.Hypot(x1, x2) + 0.01 + rng.ExpFloat64(), x1, x2}
}

func TestNTScaling(t *testing.T) {
	// Defining properties of the Nesterov–Todd scaling (Nesterov and Todd,
	// 1997): Ws is symmetric positive definite, Ws x = Ws⁻¹ s, and Ws⁻¹ is
	// its inverse.
	rng := rand.New(rand.NewPCG(5, 6))
	for trial := range 200 {
		x, s := randomInteriorSOC(rng), randomInteriorSOC(rng)
		var nt ntScaling
		nt.set(x, s)
		v2 := mul3(&nt.winv, s)
		for i := range 3 {
			if math.Abs(nt.v[i]-v2[i]) > 1e-10*(1+math.Abs(v2[i])) {
				t.Fatalf("trial %d: Ws x = %v, Ws⁻¹ s = %v", trial, nt.v, v2)
			}
			for j := range 3 {
				if math.Abs(nt.w[i][j]-nt.w[j][i]) > 1e-12*(1+math.Abs(nt.w[i][j])) {
					t.Fatalf("trial %d: Ws not symmetric", trial)
				}
				id := nt.w[i][0]*nt.winv[0][j] + nt.w[i][1]*nt.winv[1][j] + nt.w[i][2]*nt.winv[2][j]
				want := 0.0
				if i == j {
					want = 1
				}
				if math.Abs(id-want) > 1e-10 {
					t.Fatalf("trial %d: Ws Ws⁻¹ [%d][%d] = %g", trial, i, j, id)
				}
			}
		}
		// v∘v has the same first component as x∘s: xᵀs = vᵀv.
		if d := socJordan(nt.v, nt.v)[0] - socJordan(x, s)[0]; math.Abs(d) > 1e-10*(1+socJordan(x, s)[0]) {
			t.Fatalf("trial %d: vᵀv − xᵀs = %g", trial, d)
		}
	}
}

func TestSOCStepAndArrow(t *testing.T) {
	// Checked against the definition of L: x + α d is on the boundary at the
	// returned α, and inside just before it; Arw(x)⁻¹ inverts x∘·.
	rng := rand.New(rand.NewPCG(8, 9))
	for trial := range 500 {
		x := randomInteriorSOC(rng)
		d := soc3{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
		a := socStep(x, d)
		if math.IsInf(a, 1) {
			// Then every point of the ray is in L: check a far one.
			far := soc3{x[0] + 1e6*d[0], x[1] + 1e6*d[1], x[2] + 1e6*d[2]}
			if far[0] < math.Hypot(far[1], far[2])*(1-1e-9) {
				t.Fatalf("trial %d: infinite step but x + 1e6 d ∉ L", trial)
			}
			continue
		}
		on := soc3{x[0] + a*d[0], x[1] + a*d[1], x[2] + a*d[2]}
		if r := on[0] - math.Hypot(on[1], on[2]); math.Abs(r) > 1e-9*(1+math.Abs(on[0])) {
			t.Fatalf("trial %d: x + α d not on the boundary (x0 − ‖x1‖ = %g)", trial, r)
		}
		in := soc3{x[0] + 0.99*a*d[0], x[1] + 0.99*a*d[1], x[2] + 0.99*a*d[2]}
		if in[0] < math.Hypot(in[1], in[2]) {
			t.Fatalf("trial %d: x + 0.99 α d ∉ L", trial)
		}
		r := soc3{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
		z := socArwSolve(x, r)
		back := socJordan(x, z)
		for i := range 3 {
			if math.Abs(back[i]-r[i]) > 1e-9*(1+math.Abs(r[i])) {
				t.Fatalf("trial %d: x∘(Arw(x)⁻¹ r) = %v, want %v", trial, back, r)
			}
		}
	}
}

func TestProjectCoulomb(t *testing.T) {
	// Euclidean projection onto a closed convex cone (Moreau): p ∈ K,
	// x − p ⊥ p, and x − p in the polar cone: (x − p)ᵀk ≤ 0 for k ∈ K.
	rng := rand.New(rand.NewPCG(10, 11))
	for trial := range 500 {
		mu := []float64{0, 0.3, 1, 2.5}[trial%4]
		x := soc3{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
		if trial%8 < 2 {
			// Points on the normal axis, either side of the apex: for μ = 0
			// the cone is the ray x0 ≥ 0, which a test nt ≤ μ x0 alone
			// misses.
			x[1], x[2] = 0, 0
		}
		p := projectCoulomb(mu, x)
		if math.Hypot(p[1], p[2]) > mu*p[0]+1e-12 {
			t.Fatalf("trial %d: projection outside K", trial)
		}
		r := soc3{x[0] - p[0], x[1] - p[1], x[2] - p[2]}
		if d := r[0]*p[0] + r[1]*p[1] + r[2]*p[2]; math.Abs(d) > 1e-12 {
			t.Fatalf("trial %d: (x − p)ᵀp = %g", trial, d)
		}
		for k := range 16 {
			phi := 2 * math.Pi * float64(k) / 16
			gen := soc3{1, mu * math.Cos(phi), mu * math.Sin(phi)}
			if d := r[0]*gen[0] + r[1]*gen[1] + r[2]*gen[2]; d > 1e-12 {
				t.Fatalf("trial %d: x − p not in the polar cone", trial)
			}
		}
	}
}

func TestTriangularSolves(t *testing.T) {
	// luSolve and cholSolve against gonum's Getrs and Potrs (reference
	// implementations of the same factorizations) on random systems.
	rng := rand.New(rand.NewPCG(12, 13))
	for _, n := range []int{1, 2, 7, 40} {
		a := make([]float64, n*n)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		b := make([]float64, n)
		for i := range b {
			b[i] = rng.NormFloat64()
		}
		lu := append([]float64(nil), a...)
		piv := make([]int, n)
		lapack64.Getrf(blas64.General{Rows: n, Cols: n, Stride: n, Data: lu}, piv)
		want := append([]float64(nil), b...)
		lapack64.Getrs(blas.NoTrans, blas64.General{Rows: n, Cols: n, Stride: n, Data: lu}, blas64.General{Rows: n, Cols: 1, Stride: 1, Data: want}, piv)
		got := append([]float64(nil), b...)
		luSolve(lu, n, piv, got)
		for i := range n {
			if math.Abs(got[i]-want[i]) > 1e-12*(1+math.Abs(want[i])) {
				t.Errorf("n=%d: luSolve x%d = %g, Getrs %g", n, i, got[i], want[i])
			}
		}
		// A Aᵀ + I is symmetric positive definite.
		spd := make([]float64, n*n)
		for i := range n {
			for j := range n {
				spd[i*n+j] = dot(a[i*n:(i+1)*n], a[j*n:(j+1)*n])
			}
			spd[i*n+i]++
		}
		tri, ok := lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: n, Stride: n, Data: spd})
		if !ok {
			t.Fatalf("n=%d: not positive definite", n)
		}
		want = append(want[:0], b...)
		lapack64.Potrs(tri, blas64.General{Rows: n, Cols: 1, Stride: 1, Data: want})
		got = append(got[:0], b...)
		cholSolve(spd, n, got)
		for i := range n {
			if math.Abs(got[i]-want[i]) > 1e-12*(1+math.Abs(want[i])) {
				t.Errorf("n=%d: cholSolve x%d = %g, Potrs %g", n, i, got[i], want[i])
			}
		}
	}
}
