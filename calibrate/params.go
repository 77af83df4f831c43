package calibrate

import (
	"fmt"
	"math"

	"stickslip/sim"
)

// FreeParam is a parameter the fit adjusts.
type FreeParam struct {
	// Name is a sim parameter name (sim.ParamHelp lists the forms).
	Name string
	// Initial is the starting value; NaN takes the model's value.
	Initial float64
	// Lower and Upper bound the value; NaN selects the parameter's
	// natural bounds (non-negative coefficients, restitution at most 1,
	// masses and inertias above a thousandth of their initial value), and
	// ±Inf leaves a side open.
	Lower, Upper float64
	// PriorMean and PriorSD describe an optional Gaussian prior; PriorSD
	// zero means none.
	PriorMean, PriorSD float64

	param sim.Param
}

// Param returns the resolved sim parameter.
func (fp *FreeParam) Param() sim.Param { return fp.param }

// resolve checks fp against m and fills in defaults.
func (fp FreeParam) resolve(m *sim.Model) (FreeParam, error) {
	p, err := sim.ParseParam(m, fp.Name)
	if err != nil {
		return fp, err
	}
	fp.param = p
	if math.IsNaN(fp.Initial) {
		fp.Initial = p.Get(m)
	}
	userLo, userHi := !math.IsNaN(fp.Lower), !math.IsNaN(fp.Upper)
	if !userLo {
		fp.Lower = math.Inf(-1)
		switch {
		case p.Positive():
			fp.Lower = 1e-3 * fp.Initial
		case p.NonNegative():
			fp.Lower = 0
		}
	}
	if !userHi {
		fp.Upper = math.Inf(1)
		if p.CheckValue(1) == nil && p.CheckValue(1.5) != nil {
			fp.Upper = 1 // restitution
		}
	}
	if err := p.CheckValue(fp.Initial); err != nil {
		return fp, fmt.Errorf("initial value: %v", err)
	}
	for _, b := range []struct {
		user bool
		v    float64
		side string
	}{{userLo, fp.Lower, "lower"}, {userHi, fp.Upper, "upper"}} {
		if b.user && !math.IsInf(b.v, 0) {
			if err := p.CheckValue(b.v); err != nil {
				return fp, fmt.Errorf("%s bound: %v", b.side, err)
			}
		}
	}
	if !(fp.Lower < fp.Upper) {
		return fp, fmt.Errorf("bounds [%g, %g] leave no room: the lower bound must be below the upper", fp.Lower, fp.Upper)
	}
	if fp.Initial < fp.Lower || fp.Initial > fp.Upper {
		return fp, fmt.Errorf("%s: initial value %g lies outside the bounds [%g, %g]", fp.Name, fp.Initial, fp.Lower, fp.Upper)
	}
	if fp.PriorSD < 0 || math.IsNaN(fp.PriorSD) || math.IsNaN(fp.PriorMean) {
		return fp, fmt.Errorf("%s: prior needs a finite mean and a positive sd", fp.Name)
	}
	return fp, nil
}

// ResolveParams checks free parameters against m (names, bounds, initial
// values) and fills in defaults.
func ResolveParams(m *sim.Model, params []FreeParam) ([]FreeParam, error) {
	if len(params) == 0 {
		return nil, fmt.Errorf("nothing is free: name at least one parameter to fit (forms: %s)", sim.ParamHelp)
	}
	out := make([]FreeParam, len(params))
	seen := map[string]bool{}
	for i, fp := range params {
		if seen[fp.Name] {
			return nil, fmt.Errorf("parameter %s is free twice", fp.Name)
		}
		seen[fp.Name] = true
		r, err := fp.resolve(m)
		if err != nil {
			return nil, err
		}
		out[i] = r
	}
	return out, nil
}
