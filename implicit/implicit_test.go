package implicit

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"
)

// qp is min ½zᵀQz − cᵀz subject to A z = θ; its optimality conditions are
// F(z, ν, θ) = (Qz + Aᵀν − c, Az − θ) = 0.
type qp struct {
	q, a *mat.Dense
	c    *mat.VecDense
}

func randomQP(rng *rand.Rand, n, m int) qp {
	g := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			g.Set(i, j, rng.NormFloat64())
		}
	}
	q := mat.NewDense(n, n, nil)
	q.Mul(g, g.T())
	for i := 0; i < n; i++ {
		q.Set(i, i, q.At(i, i)+1)
	}
	a := mat.NewDense(m, n, nil)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			a.Set(i, j, rng.NormFloat64())
		}
	}
	c := mat.NewVecDense(n, nil)
	for i := 0; i < n; i++ {
		c.SetVec(i, rng.NormFloat64())
	}
	return qp{q, a, c}
}

// kkt returns the KKT matrix F_z and the operator F_θ = (0, −I).
func (p qp) kkt() (*mat.Dense, Dense) {
	n, _ := p.q.Dims()
	m, _ := p.a.Dims()
	k := mat.NewDense(n+m, n+m, nil)
	k.Slice(0, n, 0, n).(*mat.Dense).Copy(p.q)
	k.Slice(0, n, n, n+m).(*mat.Dense).Copy(p.a.T())
	k.Slice(n, n+m, 0, n).(*mat.Dense).Copy(p.a)
	ft := mat.NewDense(n+m, m, nil)
	for i := 0; i < m; i++ {
		ft.Set(n+i, i, -1)
	}
	return k, Dense{ft}
}

// solve returns z*(θ) by solving the KKT system directly.
func (p qp) solve(theta []float64) []float64 {
	n, _ := p.q.Dims()
	m := len(theta)
	k, _ := p.kkt()
	rhs := mat.NewVecDense(n+m, nil)
	for i := 0; i < n; i++ {
		rhs.SetVec(i, p.c.AtVec(i))
	}
	for i := 0; i < m; i++ {
		rhs.SetVec(n+i, theta[i])
	}
	var x mat.VecDense
	if err := x.SolveVec(k, rhs); err != nil {
		panic(err)
	}
	return x.RawVector().Data[:n]
}

func TestQPSensitivity(t *testing.T) {
	// Closed form for an equality-constrained QP (Lagrange multipliers):
	// dz/dθ = Q⁻¹Aᵀ(AQ⁻¹Aᵀ)⁻¹, checked with gonum mat and against central
	// differences (gonum diff/fd).
	rng := rand.New(rand.NewPCG(1, 1))
	const n, m = 5, 2
	p := randomQP(rng, n, m)
	k, ft := p.kkt()
	var lu LU
	rep, err := lu.Factorize(k, 0, 1e12)
	if err != nil || rep.NearSingular {
		t.Fatalf("factorize: %v %v", rep, err)
	}
	var qi mat.Dense
	if err := qi.Inverse(p.q); err != nil {
		t.Fatal(err)
	}
	var qiat, s, si, want mat.Dense
	qiat.Mul(&qi, p.a.T())
	s.Mul(p.a, &qiat)
	if err := si.Inverse(&s); err != nil {
		t.Fatal(err)
	}
	want.Mul(&qiat, &si)
	theta := []float64{0.3, -0.7}
	var numeric mat.Dense
	numeric.ReuseAs(n, m)
	fd.Jacobian(&numeric, func(y, x []float64) { copy(y, p.solve(x)) }, theta, &fd.JacobianSettings{Formula: fd.Central})
	for j := 0; j < m; j++ {
		dth := make([]float64, m)
		dth[j] = 1
		dz := make([]float64, n+m)
		if err := JVP(&lu, ft, dz, dth, nil); err != nil {
			t.Fatal(err)
		}
		for i := 0; i < n; i++ {
			if d := math.Abs(dz[i] - want.At(i, j)); d > 1e-10 {
				t.Errorf("dz[%d]/dθ[%d] = %.12g, closed form %.12g", i, j, dz[i], want.At(i, j))
			}
			if d := math.Abs(dz[i] - numeric.At(i, j)); d > 1e-6 {
				t.Errorf("dz[%d]/dθ[%d] = %.12g, central differences %.12g", i, j, dz[i], numeric.At(i, j))
			}
		}
	}
}

func TestAdjointIdentity(t *testing.T) {
	// vᵀ(J u) = (Jᵀv)ᵀu for J = −F_z⁻¹F_θ: JVP and VJP are transposes.
	rng := rand.New(rand.NewPCG(2, 2))
	p := randomQP(rng, 6, 3)
	k, ft := p.kkt()
	var lu LU
	if _, err := lu.Factorize(k, 0, 1e12); err != nil {
		t.Fatal(err)
	}
	u := []float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
	v := make([]float64, 9)
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	ju := make([]float64, 9)
	jtv := make([]float64, 3)
	if err := JVP(&lu, ft, ju, u, nil); err != nil {
		t.Fatal(err)
	}
	if err := VJP(&lu, ft, jtv, v, nil); err != nil {
		t.Fatal(err)
	}
	var a, b float64
	for i := range v {
		a += v[i] * ju[i]
	}
	for i := range u {
		b += jtv[i] * u[i]
	}
	if math.Abs(a-b) > 1e-12*math.Max(1, math.Abs(a)) {
		t.Errorf("vᵀ(Ju) = %.15g, (Jᵀv)ᵀu = %.15g", a, b)
	}
}

// relaxed is the scalar complementarity problem 0 ≤ z ⊥ y = z − θ ≥ 0,
// whose solution is z = max(θ, 0), relaxed to z y = κ: then
// z = (θ + √(θ² + 4κ))/2 and dz/dθ = (1 + θ/√(θ² + 4κ))/2 (closed form).
func relaxed(theta, kappa float64) (z, y float64, fz *mat.Dense, ft Dense) {
	r := math.Sqrt(theta*theta + 4*kappa)
	z = (theta + r) / 2
	y = z - theta
	// F = (z y − κ, y − z + θ).
	fz = mat.NewDense(2, 2, []float64{y, z, -1, 1})
	ft = Dense{mat.NewDense(2, 1, []float64{0, 1})}
	return z, y, fz, ft
}

func TestRelaxedComplementarity(t *testing.T) {
	for _, c := range []struct{ theta, kappa float64 }{
		{0.5, 1e-12}, {-0.5, 1e-12}, {0.5, 1e-2}, {0, 1e-2}, {-0.2, 1e-3},
	} {
		_, _, fz, ft := relaxed(c.theta, c.kappa)
		var lu LU
		if _, err := lu.Factorize(fz, 0, 1e12); err != nil {
			t.Fatal(err)
		}
		dz := make([]float64, 2)
		if err := JVP(&lu, ft, dz, []float64{1}, nil); err != nil {
			t.Fatal(err)
		}
		want := (1 + c.theta/math.Sqrt(c.theta*c.theta+4*c.kappa)) / 2
		if math.Abs(dz[0]-want) > 1e-9 {
			t.Errorf("θ = %g, κ = %g: dz/dθ = %.12g, closed form %.12g", c.theta, c.kappa, dz[0], want)
		}
	}
}

func TestNearSingularReported(t *testing.T) {
	// At θ = 0 and κ → 0 the active set is degenerate (z = y = 0): F_z is
	// singular and the derivative of max(θ, 0) does not exist.
	_, _, fz, _ := relaxed(0, 0)
	var lu LU
	rep, err := lu.Factorize(fz, 0, 1e8)
	if err == nil && !rep.NearSingular {
		t.Errorf("degenerate active set not reported: %v", rep)
	}
	rep, err = lu.Factorize(fz, 1e-8, 1e8)
	if err != nil || rep.Shift == 0 || !rep.NearSingular {
		t.Errorf("with a shift: report %v, err %v; want a shifted, near-singular factorization", rep, err)
	}
}

func TestShapeErrors(t *testing.T) {
	_, _, fz, ft := relaxed(1, 1e-3)
	var lu LU
	lu.Factorize(fz, 0, 1e12)
	if err := JVP(&lu, ft, make([]float64, 3), []float64{1}, nil); err != ErrShape {
		t.Errorf("got %v, want ErrShape", err)
	}
	if err := VJP(&lu, ft, make([]float64, 2), make([]float64, 2), nil); err != ErrShape {
		t.Errorf("got %v, want ErrShape", err)
	}
}
