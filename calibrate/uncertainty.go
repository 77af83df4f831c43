package calibrate

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Identifiability classifies how well the data determine a parameter.
type Identifiability int

// The classes, from best to worst.
const (
	Identified Identifiability = iota
	// WeaklyIdentified: the relative standard error from the data alone
	// lies between WeakRelErr and 1.
	WeaklyIdentified
	// Confounded: only a combination with other parameters is determined
	// (a near-null direction of the scaled Jacobian involves it).
	Confounded
	// Unidentified: the residuals barely depend on the parameter, or its
	// relative standard error from the data alone exceeds 1.
	Unidentified
)

var identNames = [...]string{"identified", "weakly identified", "confounded", "not identified"}

func (c Identifiability) String() string {
	if c < 0 || int(c) >= len(identNames) {
		return "unknown"
	}
	return identNames[c]
}

// Thresholds of the identifiability classes.
const (
	// WeakRelErr is the relative standard error (data alone) above which
	// a parameter counts as weakly identified.
	WeakRelErr = 0.1
	// ConfoundedRatio: a singular value of the column-scaled Jacobian below
	// this fraction of the largest marks a near-null direction.
	ConfoundedRatio = 1e-3
	// rankRatio: directions with singular values below this fraction of
	// the largest are treated as null in the covariance.
	rankRatio = 1e-10
)

// Uncertainty describes the precision of a least-squares estimate.
type Uncertainty struct {
	// Sigma2 is the residual variance estimate ‖r_data‖²/(m − n), the
	// factor that scales the whitened data rows; DOF is m − n.
	Sigma2 float64
	DOF    int
	// Cov is the Gauss–Newton covariance (σ²⁻¹ J_dᵀJ_d + J_pᵀJ_p)⁻¹ with
	// J_d the data rows and J_p the prior rows. Rows and columns of
	// parameters the data cannot determine hold +Inf on the diagonal.
	Cov *mat.SymDense
	// StdErr[j] = √Cov[j][j]; Lower95/Upper95 are x ± t₀.₉₇₅,DOF · StdErr.
	StdErr, Lower95, Upper95 []float64
	// Corr is the correlation matrix (NaN where a variance is infinite).
	Corr *mat.SymDense
	// SingularValues of the data Jacobian with each column scaled to unit
	// length, largest first, and Condition their ratio.
	SingularValues []float64
	Condition      float64
	// DataRelErr[j] is the relative standard error of parameter j from
	// the data alone (without priors), relative to Scale[j].
	DataRelErr []float64
	// Class and Partners: the identifiability of each parameter and, for
	// Confounded ones, the parameters it is confounded with.
	Class    []Identifiability
	Partners [][]int
}

// EstimateUncertainty computes the uncertainty of x given the Jacobian J
// and residuals r at the optimum. Rows below nData are data rows, whitened
// by an assumed noise; the rest are prior rows, already exact. scale[j] is
// a typical magnitude of parameter j for relative errors (nil: |x_j|, or 1
// where x_j is 0).
func EstimateUncertainty(J *mat.Dense, r []float64, nData int, x, scale []float64) (*Uncertainty, error) {
	m, n := J.Dims()
	if len(r) != m || len(x) != n || nData > m || nData < 0 {
		return nil, errors.New("calibrate: EstimateUncertainty: inconsistent dimensions")
	}
	if scale == nil {
		scale = make([]float64, n)
		for j, v := range x {
			scale[j] = math.Abs(v)
			if scale[j] == 0 {
				scale[j] = 1
			}
		}
	}
	u := &Uncertainty{DOF: nData - n}
	ss := 0.0
	for _, v := range r[:nData] {
		ss += v * v
	}
	if u.DOF > 0 {
		u.Sigma2 = ss / float64(u.DOF)
	} else {
		// No redundancy: trust the assumed noise.
		u.Sigma2 = 1
	}
	if u.Sigma2 == 0 {
		// A perfect fit (noise-free data): keep the assumed noise so the
		// covariance stays finite and the identifiability meaningful.
		u.Sigma2 = 1
	}
	w := 1 / math.Sqrt(u.Sigma2)
	Jd := mat.NewDense(nData, n, nil)
	Jd.Scale(w, J.Slice(0, nData, 0, n))
	Jw := mat.NewDense(m, n, nil)
	Jw.Copy(J)
	Jw.Slice(0, nData, 0, n).(*mat.Dense).Copy(Jd)

	cov, _, _, err := scaledPinv(Jw)
	if err != nil {
		return nil, err
	}
	u.Cov = cov
	dcov, sv, V, err := scaledPinv(Jd)
	if err != nil {
		return nil, err
	}
	u.SingularValues = sv
	if len(sv) > 0 && sv[len(sv)-1] > 0 {
		u.Condition = sv[0] / sv[len(sv)-1]
	} else {
		u.Condition = math.Inf(1)
	}
	q := 1.959963984540054
	if u.DOF > 0 {
		q = distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(u.DOF)}.Quantile(0.975)
	}
	u.StdErr = make([]float64, n)
	u.Lower95 = make([]float64, n)
	u.Upper95 = make([]float64, n)
	u.DataRelErr = make([]float64, n)
	u.Class = make([]Identifiability, n)
	u.Partners = make([][]int, n)
	for j := range n {
		u.StdErr[j] = math.Sqrt(cov.At(j, j))
		u.Lower95[j] = x[j] - q*u.StdErr[j]
		u.Upper95[j] = x[j] + q*u.StdErr[j]
		u.DataRelErr[j] = math.Sqrt(dcov.At(j, j)) / scale[j]
	}
	u.Corr = mat.NewSymDense(n, nil)
	for j := range n {
		for k := 0; k <= j; k++ {
			c := cov.At(j, k) / (u.StdErr[j] * u.StdErr[k])
			if math.IsInf(u.StdErr[j], 0) || math.IsInf(u.StdErr[k], 0) {
				c = math.NaN()
			}
			if j == k && !math.IsNaN(c) {
				c = 1
			}
			u.Corr.SetSym(j, k, c)
		}
	}
	// Near-null directions of the scaled data Jacobian name the
	// parameters that are only determined in combination.
	for i, s := range sv {
		if len(sv) < 2 || !(s < ConfoundedRatio*sv[0]) {
			continue
		}
		var members []int
		for j := range n {
			if math.Abs(V.At(j, i)) > 0.2 {
				members = append(members, j)
			}
		}
		if len(members) < 2 {
			continue
		}
		for _, j := range members {
			for _, k := range members {
				if k != j && !contains(u.Partners[j], k) {
					u.Partners[j] = append(u.Partners[j], k)
				}
			}
		}
	}
	for j := range n {
		switch rel := u.DataRelErr[j]; {
		case len(u.Partners[j]) > 0:
			u.Class[j] = Confounded
		case !(rel <= 1):
			u.Class[j] = Unidentified
		case rel > WeakRelErr:
			u.Class[j] = WeaklyIdentified
		default:
			u.Class[j] = Identified
		}
	}
	return u, nil
}

func contains(s []int, v int) bool {
	for _, x := range s {
		if x == v {
			return true
		}
	}
	return false
}

// scaledPinv returns (JᵀJ)⁻¹ computed through the SVD of J with unit
// columns (so that parameters of very different magnitudes do not spoil
// the rank decision), the singular values of that scaled matrix and its
// right singular vectors. Parameters in null directions, or with zero
// columns, get +Inf variance.
func scaledPinv(J *mat.Dense) (*mat.SymDense, []float64, *mat.Dense, error) {
	m, n := J.Dims()
	c := make([]float64, n)
	maxC := 0.0
	for j := range n {
		c[j] = mat.Norm(J.ColView(j), 2)
		maxC = math.Max(maxC, c[j])
	}
	Js := mat.NewDense(m, n, nil)
	zero := make([]bool, n)
	for j := range n {
		if c[j] <= 1e-300 || c[j] < 1e-13*maxC {
			zero[j] = true
			continue
		}
		for i := range m {
			Js.Set(i, j, J.At(i, j)/c[j])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(Js, mat.SVDThin) {
		return nil, nil, nil, fmt.Errorf("calibrate: SVD of the Jacobian failed")
	}
	sv := svd.Values(nil)
	var V mat.Dense
	svd.VTo(&V)
	cov := mat.NewSymDense(n, nil)
	inf := make([]bool, n)
	copy(inf, zero)
	for i, s := range sv {
		if s > rankRatio*sv[0] && s > 0 {
			for j := range n {
				for k := 0; k <= j; k++ {
					cov.SetSym(j, k, cov.At(j, k)+V.At(j, i)*V.At(k, i)/(s*s))
				}
			}
			continue
		}
		for j := range n {
			if math.Abs(V.At(j, i)) > 1e-3 {
				inf[j] = true
			}
		}
	}
	for j := range n {
		for k := 0; k <= j; k++ {
			v := cov.At(j, k) / (c[j] * c[k])
			if inf[j] || inf[k] {
				v = 0
				if j == k {
					v = math.Inf(1)
				}
			}
			cov.SetSym(j, k, v)
		}
	}
	return cov, sv, &V, nil
}
