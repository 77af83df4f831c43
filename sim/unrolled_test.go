package sim

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
	"gonum.org/v1/gonum/mat"
)

// The baseline of the gradient benchmark: a contact solve differentiated by
// unrolling its interior-point iterations, built only for the benchmark and
// its test. It solves the same relaxed conditions as contact.Solver with
// smoothing κ > 0,
//
//	y = W λ + B,  λn yn = κ,  ξ∘η = κ e (ξ = (μλn, λt), η = (β, yt)),  λ y = κ,
//
// by a primal–dual path-following method (Newton steps on the conditions
// with targets μ_k = max(κ, μ₀ σᵏ), y and β eliminated so that each step
// factors an n×n matrix W + K, a fraction-to-boundary step length), and
// differentiates the computed solution by reverse-mode through every
// iteration: the tape keeps each iterate, each Newton matrix's factors and
// each direction. The step lengths are held constant in the backward pass,
// as unrolled implementations commonly do; near convergence they are 1.

const (
	unrolledSigma = 0.2 // target reduction per iteration
	unrolledExtra = 10  // Newton iterations at the final target κ
)

// unrolledIter is one iteration on the tape.
type unrolledIter struct {
	lam, y, beta []float64
	lu           []float64
	piv          []int
	dl           []float64
	alpha, tau   float64
}

// unrolledSolve is the baseline solver with its tape.
type unrolledSolve struct {
	n, nc int
	w     []float64 // row-major n×n
	b, mu []float64
	kappa float64
	tape  []unrolledIter
	lam   []float64 // final impulses
	// backward workspace: each contact's local conditions
	g   []d3
	phi []dn
}

// newUnrolled copies the problem (W, B, μ with nc contacts first).
func newUnrolled(w *mat.SymDense, b, mu []float64, kappa float64) *unrolledSolve {
	n := len(b)
	u := &unrolledSolve{n: n, nc: len(mu), w: make([]float64, n*n), b: append([]float64(nil), b...),
		mu: append([]float64(nil), mu...), kappa: kappa}
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			u.w[i*n+j] = w.At(i, j)
		}
	}
	return u
}

// tapeBytes returns the memory of the tape.
func (u *unrolledSolve) tapeBytes() int {
	b := 0
	for _, it := range u.tape {
		b += 8 * (len(it.lam) + len(it.y) + len(it.beta) + len(it.lu) + len(it.piv) + len(it.dl) + 2)
	}
	return b
}

// dn is a dual number with derivatives along the 11 inputs of a contact's
// local conditions: (λn, λt1, λt2, yn, yt1, yt2, β, μ, dλn, dλt1, dλt2).
type dn struct {
	v float64
	d [11]float64
}

func dconst(v float64) dn { return dn{v: v} }
func dvar(v float64, i int) dn {
	x := dn{v: v}
	x.d[i] = 1
	return x
}
func (a dn) add(b dn) dn {
	for i := range a.d {
		a.d[i] += b.d[i]
	}
	a.v += b.v
	return a
}
func (a dn) sub(b dn) dn {
	for i := range a.d {
		a.d[i] -= b.d[i]
	}
	a.v -= b.v
	return a
}
func (a dn) mul(b dn) dn {
	r := dn{v: a.v * b.v}
	for i := range r.d {
		r.d[i] = a.d[i]*b.v + a.v*b.d[i]
	}
	return r
}
func (a dn) div(b dn) dn {
	q := a.v / b.v
	r := dn{v: q}
	for i := range r.d {
		r.d[i] = (a.d[i] - q*b.d[i]) / b.v
	}
	return r
}

type d3 [3]dn

// jordan returns x∘s = (xᵀs, x0 s̄ + s0 x̄) (which is also Arw(x) s).
func jordan(x, s d3) d3 {
	return d3{x[0].mul(s[0]).add(x[1].mul(s[1])).add(x[2].mul(s[2])),
		x[0].mul(s[1]).add(s[0].mul(x[1])), x[0].mul(s[2]).add(s[0].mul(x[2]))}
}

// arwSolve returns Arw(x)⁻¹ r.
func arwSolve(x, r d3) d3 {
	det := x[0].mul(x[0]).sub(x[1].mul(x[1])).sub(x[2].mul(x[2]))
	z0 := x[0].mul(r[0]).sub(x[1].mul(r[1])).sub(x[2].mul(r[2])).div(det)
	return d3{z0, r[1].sub(z0.mul(x[1])).div(x[0]), r[2].sub(z0.mul(x[2])).div(x[0])}
}

// coneLocal evaluates a frictional contact's local part of the Newton
// system at target tau: the right-hand side minus K dλ on its three rows
// (g) and the direction dβ (phi), with derivatives along the 11 inputs.
func coneLocal(lam, y []float64, beta, mu, tau float64, dl []float64) (g d3, phi dn) {
	ln, lt1, lt2 := dvar(lam[0], 0), dvar(lam[1], 1), dvar(lam[2], 2)
	yn, yt1, yt2 := dvar(y[0], 3), dvar(y[1], 4), dvar(y[2], 5)
	bt, m := dvar(beta, 6), dvar(mu, 7)
	d0, d1, d2 := dvar(dl[0], 8), dvar(dl[1], 9), dvar(dl[2], 10)
	t := dconst(tau)
	// Normal row: (τ − λn yn)/λn − (yn/λn) dλn.
	g[0] = t.sub(ln.mul(yn)).div(ln).sub(yn.div(ln).mul(d0))
	xi := d3{m.mul(ln), lt1, lt2}
	eta := d3{bt, yt1, yt2}
	dxi := d3{m.mul(d0), d1, d2}
	xe, ed := jordan(xi, eta), jordan(eta, dxi)
	v := arwSolve(xi, d3{t.sub(xe[0]).sub(ed[0]), xe[1].neg().sub(ed[1]), xe[2].neg().sub(ed[2])})
	g[1], g[2] = v[1], v[2]
	return g, v[0]
}

func (a dn) neg() dn { return dconst(0).sub(a) }

// scalarLocal is coneLocal for a scalar pair (a normal row of a
// frictionless contact or a unilateral row): derivatives along (λ, y, dλ)
// in slots 0, 3 and 8.
func scalarLocal(lam, y, tau, dl float64) dn {
	l, yy, d := dvar(lam, 0), dvar(y, 3), dvar(dl, 8)
	return dconst(tau).sub(l.mul(yy)).div(l).sub(yy.div(l).mul(d))
}

// solve runs the iterations, keeping the tape.
func (u *unrolledSolve) solve() {
	n, nc := u.n, u.nc
	lam, y, beta := make([]float64, n), make([]float64, n), make([]float64, nc)
	// A central starting point at the first target.
	const l0, y0 = 1e-2, 1e-1
	for c := 0; c < nc; c++ {
		lam[3*c], y[3*c], beta[c] = l0, y0, y0
	}
	for i := 3 * nc; i < n; i++ {
		lam[i], y[i] = l0, y0
	}
	tau := l0 * y0
	u.tape = u.tape[:0]
	extra := 0
	for extra < unrolledExtra {
		it := unrolledIter{lam: append([]float64(nil), lam...), y: append([]float64(nil), y...), beta: append([]float64(nil), beta...),
			lu: make([]float64, n*n), piv: make([]int, n), dl: make([]float64, n), tau: tau}
		rhs := it.dl
		a := it.lu
		copy(a, u.w)
		for i := 0; i < n; i++ {
			rp := -y[i] + u.b[i]
			for j := 0; j < n; j++ {
				rp += u.w[i*n+j] * lam[j]
			}
			rhs[i] = -rp
		}
		zero := []float64{0, 0, 0}
		for c := 0; c < nc; c++ {
			i := 3 * c
			if u.mu[c] == 0 {
				g := scalarLocal(lam[i], y[i], tau, 0)
				a[i*n+i] -= g.d[8]
				rhs[i] += g.v
				for r := 1; r < 3; r++ {
					clear(a[(i+r)*n : (i+r+1)*n])
					a[(i+r)*n+i+r] = 1
					rhs[i+r] = -lam[i+r]
				}
				continue
			}
			g, _ := coneLocal(lam[i:i+3], y[i:i+3], beta[c], u.mu[c], tau, zero)
			for r := 0; r < 3; r++ {
				for s := 0; s < 3; s++ {
					a[(i+r)*n+i+s] -= g[r].d[8+s]
				}
				rhs[i+r] += g[r].v
			}
		}
		for i := 3 * nc; i < n; i++ {
			g := scalarLocal(lam[i], y[i], tau, 0)
			a[i*n+i] -= g.d[8]
			rhs[i] += g.v
		}
		if !lapack64.Getrf(blas64.General{Rows: n, Cols: n, Stride: n, Data: a}, it.piv) {
			panic("unrolled baseline: singular Newton matrix")
		}
		lapack64.Getrs(blas.NoTrans, blas64.General{Rows: n, Cols: n, Stride: n, Data: a}, blas64.General{Rows: n, Cols: 1, Stride: 1, Data: rhs}, it.piv)
		// dy = W dλ + rp; dβ from the cone conditions.
		dy := make([]float64, n)
		for i := 0; i < n; i++ {
			rp := -y[i] + u.b[i]
			for j := 0; j < n; j++ {
				rp += u.w[i*n+j] * (lam[j] + it.dl[j])
			}
			dy[i] = rp
		}
		dbeta := make([]float64, nc)
		alpha := 1.0
		for c := 0; c < nc; c++ {
			i := 3 * c
			alpha = math.Min(alpha, posStep(lam[i], it.dl[i]))
			alpha = math.Min(alpha, posStep(y[i], dy[i]))
			if u.mu[c] == 0 {
				continue
			}
			_, phi := coneLocal(lam[i:i+3], y[i:i+3], beta[c], u.mu[c], tau, it.dl[i:i+3])
			dbeta[c] = phi.v
			m := u.mu[c]
			alpha = math.Min(alpha, coneStep([3]float64{m * lam[i], lam[i+1], lam[i+2]}, [3]float64{m * it.dl[i], it.dl[i+1], it.dl[i+2]}))
			alpha = math.Min(alpha, coneStep([3]float64{beta[c], y[i+1], y[i+2]}, [3]float64{dbeta[c], dy[i+1], dy[i+2]}))
		}
		for i := 3 * nc; i < n; i++ {
			alpha = math.Min(alpha, posStep(lam[i], it.dl[i]))
			alpha = math.Min(alpha, posStep(y[i], dy[i]))
		}
		it.alpha = alpha
		for i := range lam {
			lam[i] += alpha * it.dl[i]
			y[i] += alpha * dy[i]
		}
		for c := range beta {
			beta[c] += alpha * dbeta[c]
		}
		u.tape = append(u.tape, it)
		if tau == u.kappa {
			extra++
		}
		tau = math.Max(u.kappa, unrolledSigma*tau)
	}
	u.lam = lam
}

// posStep returns the fraction-to-boundary step for x + α d > 0.
func posStep(x, d float64) float64 {
	if d >= 0 {
		return 1
	}
	return math.Min(1, -0.95*x/d)
}

// coneStep returns the fraction-to-boundary step for x + α d inside the
// second-order cone.
func coneStep(x, d [3]float64) float64 {
	a := d[0]*d[0] - d[1]*d[1] - d[2]*d[2]
	b := 2 * (x[0]*d[0] - x[1]*d[1] - x[2]*d[2])
	c := x[0]*x[0] - x[1]*x[1] - x[2]*x[2]
	best := math.Inf(1)
	if d[0] < 0 {
		best = -x[0] / d[0]
	}
	if a == 0 {
		if b < 0 {
			best = math.Min(best, -c/b)
		}
	} else if disc := b*b - 4*a*c; disc >= 0 {
		s := math.Sqrt(disc)
		for _, r := range [2]float64{(-b - s) / (2 * a), (-b + s) / (2 * a)} {
			if r > 0 {
				best = math.Min(best, r)
			}
		}
	}
	return math.Min(1, 0.95*best)
}

// vjp writes the gradients of ⟨lamBar, λ⟩ with respect to B and μ by the
// reverse sweep through the tape.
func (u *unrolledSolve) vjp(lamBar, bBar, muBar []float64) {
	n, nc := u.n, u.nc
	zl, zy, zb := append([]float64(nil), lamBar...), make([]float64, n), make([]float64, nc) // z̄ = (λ̄, ȳ, β̄)
	u.g, u.phi = make([]d3, nc), make([]dn, nc)
	clear(bBar)
	clear(muBar)
	al, ab, rpb, uu := make([]float64, n), make([]float64, nc), make([]float64, n), make([]float64, n)
	for k := len(u.tape) - 1; k >= 0; k-- {
		it := &u.tape[k]
		// z_{k+1} = z_k + α Δ: the bar of Δ is α z̄.
		for i := range al {
			al[i] = it.alpha * zl[i]
			rpb[i] = it.alpha * zy[i] // dy = W dλ + rp
		}
		for c := range ab {
			ab[c] = it.alpha * zb[c]
		}
		for i := 0; i < n; i++ { // dλ̄ += Wᵀ ȳ_Δ
			var s float64
			for j := 0; j < n; j++ {
				s += u.w[j*n+i] * rpb[j]
			}
			al[i] += s
		}
		// dβ_c = φ_c(z_c, μ_c, dλ_c); the local conditions are evaluated
		// once per contact for this and for the solve below.
		for c := 0; c < nc; c++ {
			if u.mu[c] == 0 {
				continue
			}
			i := 3 * c
			u.g[c], u.phi[c] = coneLocal(it.lam[i:i+3], it.y[i:i+3], it.beta[c], u.mu[c], it.tau, it.dl[i:i+3])
			if ab[c] == 0 {
				continue
			}
			phi := &u.phi[c]
			u.localBar(c, phi.d[:], ab[c], zl, zy, zb, muBar)
			for s := 0; s < 3; s++ {
				al[i+s] += ab[c] * phi.d[8+s]
			}
		}
		// N dλ = r: u = N⁻ᵀ dλ̄, then the bars of r − N dλ = g − rp − W dλ.
		copy(uu, al)
		lapack64.Getrs(blas.Trans, blas64.General{Rows: n, Cols: n, Stride: n, Data: it.lu}, blas64.General{Rows: n, Cols: 1, Stride: 1, Data: uu}, it.piv)
		for c := 0; c < nc; c++ {
			i := 3 * c
			if u.mu[c] == 0 {
				g := scalarLocal(it.lam[i], it.y[i], it.tau, it.dl[i])
				zl[i] += uu[i] * g.d[0]
				zy[i] += uu[i] * g.d[3]
				for r := 1; r < 3; r++ {
					zl[i+r] -= uu[i+r]
				}
				rpb[i] -= uu[i]
				continue
			}
			g := &u.g[c]
			for r := 0; r < 3; r++ {
				u.localBar(c, g[r].d[:], uu[i+r], zl, zy, zb, muBar)
				rpb[i+r] -= uu[i+r]
			}
		}
		for i := 3 * nc; i < n; i++ {
			g := scalarLocal(it.lam[i], it.y[i], it.tau, it.dl[i])
			zl[i] += uu[i] * g.d[0]
			zy[i] += uu[i] * g.d[3]
			rpb[i] -= uu[i]
		}
		// rp = W λ + B − y.
		for i := 0; i < n; i++ {
			if rpb[i] == 0 {
				continue
			}
			for j := 0; j < n; j++ {
				zl[j] += u.w[i*n+j] * rpb[i]
			}
			bBar[i] += rpb[i]
			zy[i] -= rpb[i]
		}
	}
}

// localBar adds x·∂f/∂(z_c, μ_c) for a local output f with derivatives d.
func (u *unrolledSolve) localBar(c int, d []float64, x float64, zl, zy, zb, muBar []float64) {
	i := 3 * c
	for s := 0; s < 3; s++ {
		zl[i+s] += x * d[s]
		zy[i+s] += x * d[3+s]
	}
	zb[c] += x * d[6]
	muBar[c] += x * d[7]
}
