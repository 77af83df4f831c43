package contact

import (
	"math"

	"gonum.org/v1/gonum/blas/blas64"
)

// Second-order cone algebra for the interior-point solver.
//
// Every friction cone is mapped to the standard three-dimensional Lorentz cone
// L = {x : x0 ≥ ‖(x1, x2)‖}. Its Jordan algebra has the product
//
//	x∘y = (xᵀy, x0 y1 + y0 x1, x0 y2 + y0 x2),  identity e = (1, 0, 0),
//
// and x∘y = 0 with x, y ∈ L is equivalent to x ⊥ y. The arrow matrix Arw(x)
// is the linear map y ↦ x∘y. The helpers work on [3]float64 values so that
// the hot loops allocate nothing.

// soc3 is a vector of the three-dimensional Lorentz cone's space.
type soc3 = [3]float64

// socJordan returns x∘y.
func socJordan(x, y soc3) soc3 {
	return soc3{x[0]*y[0] + x[1]*y[1] + x[2]*y[2], x[0]*y[1] + y[0]*x[1], x[0]*y[2] + y[0]*x[2]}
}

// socDet returns x0² − ‖x1‖², the determinant of x in the Jordan algebra
// (product of its two eigenvalues x0 ± ‖x1‖), computed in factored form to
// avoid cancellation near the boundary of the cone.
func socDet(x soc3) float64 {
	n := math.Hypot(x[1], x[2])
	return (x[0] - n) * (x[0] + n)
}

// socArwSolve returns z with x∘z = r, that is Arw(x)⁻¹ r, for x in the
// interior of L.
func socArwSolve(x, r soc3) soc3 {
	z0 := (x[0]*r[0] - x[1]*r[1] - x[2]*r[2]) / socDet(x)
	return soc3{z0, (r[1] - z0*x[1]) / x[0], (r[2] - z0*x[2]) / x[0]}
}

// socStep returns the largest α ≥ 0 such that x + α d stays in L, for x in
// the interior of L, or +Inf when the whole ray stays in L.
//
// x + α d ∈ L ⇔ f(α) = a α² + b α + c ≥ 0 and x0 + α d0 ≥ 0, where
// f(0) = det x > 0. Starting inside L the ray can only leave it where f
// vanishes, so the answer is the smallest positive root of f.
func socStep(x, d soc3) float64 {
	a := d[0]*d[0] - d[1]*d[1] - d[2]*d[2]
	b := 2 * (x[0]*d[0] - x[1]*d[1] - x[2]*d[2])
	c := socDet(x)
	if c <= 0 {
		return 0
	}
	if a == 0 {
		if b < 0 {
			return -c / b
		}
		return math.Inf(1)
	}
	disc := b*b - 4*a*c
	if disc < 0 {
		// a > 0 here (a < 0 with c > 0 makes disc positive): f never vanishes.
		return math.Inf(1)
	}
	// Numerically stable roots: q = −(b + sign(b)√disc)/2, roots q/a and c/q.
	q := -0.5 * (b + math.Copysign(math.Sqrt(disc), b))
	alpha := math.Inf(1)
	if r := q / a; r > 0 {
		alpha = r
	}
	if q != 0 {
		if r := c / q; r > 0 && r < alpha {
			alpha = r
		}
	}
	return alpha
}

// scalarStep returns the largest α ≥ 0 with x + α d ≥ 0 for x > 0.
func scalarStep(x, d float64) float64 {
	if d < 0 {
		return -x / d
	}
	return math.Inf(1)
}

// ntScaling is the Nesterov–Todd scaling of one pair (x, s) of interior
// points of L: the symmetric positive definite matrix Ws with
// Ws x = Ws⁻¹ s = v. With it the linearized complementarity
// v∘(Ws dx + Ws⁻¹ ds) = r becomes ds = Ws q − Ws² dx with q = Arw(v)⁻¹ r, a
// symmetric positive definite coupling Ws² between the directions.
type ntScaling struct {
	w, winv [3][3]float64 // Ws and Ws⁻¹
	h       [3][3]float64 // Ws²
	v       soc3          // scaled point Ws x
}

// set computes the scaling of the interior pair (x, s), following the
// construction for the second-order cone of Nesterov and Todd (1997) in the
// form given by Vandenberghe for cone programming: with x̄ = x/√det x,
// s̄ = s/√det s, γ = √((1 + x̄ᵀs̄)/2), w̄ = (s̄ + J x̄)/(2γ), J = diag(1, −1, −1),
//
//	Ws = θ [w̄0 w̄1ᵀ; w̄1 I + w̄1 w̄1ᵀ/(1 + w̄0)],   θ = (det s / det x)^¼,
//	Ws⁻¹ = θ⁻¹ J W̄ J.
func (nt *ntScaling) set(x, s soc3) {
	dx, ds := math.Sqrt(socDet(x)), math.Sqrt(socDet(s))
	xb := soc3{x[0] / dx, x[1] / dx, x[2] / dx}
	sb := soc3{s[0] / ds, s[1] / ds, s[2] / ds}
	gamma := math.Sqrt((1 + xb[0]*sb[0] + xb[1]*sb[1] + xb[2]*sb[2]) / 2)
	wb := soc3{(sb[0] + xb[0]) / (2 * gamma), (sb[1] - xb[1]) / (2 * gamma), (sb[2] - xb[2]) / (2 * gamma)}
	theta := math.Sqrt(ds / dx)
	k := 1 / (1 + wb[0])
	var bar [3][3]float64
	bar[0][0] = wb[0]
	for i := 1; i < 3; i++ {
		bar[0][i] = wb[i]
		bar[i][0] = wb[i]
		for j := 1; j < 3; j++ {
			bar[i][j] = k * wb[i] * wb[j]
		}
		bar[i][i]++
	}
	for i := range 3 {
		for j := range 3 {
			nt.w[i][j] = theta * bar[i][j]
			sign := 1.0
			if (i == 0) != (j == 0) {
				sign = -1
			}
			nt.winv[i][j] = sign * bar[i][j] / theta
		}
	}
	for i := range 3 {
		for j := range 3 {
			nt.h[i][j] = nt.w[i][0]*nt.w[0][j] + nt.w[i][1]*nt.w[1][j] + nt.w[i][2]*nt.w[2][j]
		}
	}
	nt.v = mul3(&nt.w, x)
}

// mul3 returns m x.
func mul3(m *[3][3]float64, x soc3) soc3 {
	return soc3{
		m[0][0]*x[0] + m[0][1]*x[1] + m[0][2]*x[2],
		m[1][0]*x[0] + m[1][1]*x[1] + m[1][2]*x[2],
		m[2][0]*x[0] + m[2][1]*x[1] + m[2][2]*x[2],
	}
}

// arwCoupling returns Arw(x)⁻¹ Arw(s), the coupling dη = −Arw(ξ)⁻¹Arw(η) dξ
// of the linearized Jordan product ξ∘η (the exact derivative of the relaxed
// complementarity), for x in the interior of L.
func arwCoupling(x, s soc3) [3][3]float64 {
	var h [3][3]float64
	cols := [3]soc3{{s[0], s[1], s[2]}, {s[1], s[0], 0}, {s[2], 0, s[0]}}
	for j, col := range cols {
		z := socArwSolve(x, col)
		h[0][j], h[1][j], h[2][j] = z[0], z[1], z[2]
	}
	return h
}

// luSolve overwrites b with the solution of A x = b, where lu and piv hold
// the LU factorization of the row-major n×n matrix A computed by
// lapack64.Getrf. It is lapack64.Getrs for one right-hand side, written as
// row-wise dot products: Getrs goes through a triangular solve for a
// matrix of right-hand sides, which for a single one costs several times
// the arithmetic, and the solves are a large share of each iteration.
func luSolve(lu []float64, n int, piv []int, b []float64) {
	for i, p := range piv[:n] {
		if p != i {
			b[i], b[p] = b[p], b[i]
		}
	}
	// L has a unit diagonal.
	for i := 1; i < n; i++ {
		b[i] -= dot(lu[i*n:i*n+i], b[:i])
	}
	for i := n - 1; i >= 0; i-- {
		row := lu[i*n : (i+1)*n]
		b[i] = (b[i] - dot(row[i+1:], b[i+1:n])) / row[i]
	}
}

// luSolveTrans overwrites b with the solution of Aᵀ x = b for the factors
// of luSolve (lapack64.Getrs with blas.Trans for one right-hand side):
// with P A = L U, Aᵀ = Uᵀ Lᵀ P.
func luSolveTrans(lu []float64, n int, piv []int, b []float64) {
	// Uᵀ z = b, by columns of Uᵀ: the contiguous rows of U.
	for i := range n {
		row := lu[i*n : (i+1)*n]
		b[i] /= row[i]
		if zi := b[i]; zi != 0 {
			for j := i + 1; j < n; j++ {
				b[j] -= zi * row[j]
			}
		}
	}
	// Lᵀ w = z (unit diagonal), by columns of Lᵀ: the rows of L.
	for i := n - 1; i > 0; i-- {
		if wi := b[i]; wi != 0 {
			row := lu[i*n : i*n+i]
			for j := range row {
				b[j] -= row[j] * wi
			}
		}
	}
	for i := n - 1; i >= 0; i-- {
		if p := piv[i]; p != i {
			b[i], b[p] = b[p], b[i]
		}
	}
}

// dot returns xᵀy for len(x) = len(y).
func dot(x, y []float64) float64 {
	return blas64.Dot(blas64.Vector{N: len(x), Inc: 1, Data: x}, blas64.Vector{N: len(x), Inc: 1, Data: y})
}

// cholSolve overwrites b with the solution of A x = b, where the upper
// triangle of the row-major m×m slice u holds the Cholesky factor U of
// A = UᵀU computed by lapack64.Potrf (the single right-hand side
// counterpart of lapack64.Potrs, as luSolve is of Getrs).
func cholSolve(u []float64, m int, b []float64) {
	// Uᵀ z = b, by columns of Uᵀ, which are the contiguous rows of U.
	for i := range m {
		row := u[i*m : (i+1)*m]
		b[i] /= row[i]
		if zi := b[i]; zi != 0 {
			for j := i + 1; j < m; j++ {
				b[j] -= zi * row[j]
			}
		}
	}
	// U x = z.
	for i := m - 1; i >= 0; i-- {
		row := u[i*m : (i+1)*m]
		b[i] = (b[i] - dot(row[i+1:], b[i+1:m])) / row[i]
	}
}
