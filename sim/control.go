package sim

import (
	"fmt"
	"math"
	"slices"
)

// Actuator applies a force or torque along a single-DOF joint.
type Actuator struct {
	Name string
	// Body is the index of the body whose joint the actuator drives; that
	// joint must be revolute or prismatic.
	Body int
	// EffortLimit bounds |effort| (N·m or N); zero means no limit.
	EffortLimit float64
}

// ControlInput is what a controller sees: the time and, per actuator, its
// joint's position and velocity.
type ControlInput struct {
	T     float64
	Q, QD []float64
}

// ControlOutput is what a controller writes, per actuator: the effort and
// its local stiffness −∂effort/∂q and damping −∂effort/∂qd. The step uses
// the last two to treat the controller implicitly, so that stiff gains stay
// stable at large time steps.
type ControlOutput struct {
	Effort    []float64
	Stiffness []float64
	Damping   []float64
}

// Controller computes actuator commands from the state. Implementations add
// their contribution to out (which the caller zeroes), so controllers
// compose by summation.
type Controller interface {
	Command(in *ControlInput, out *ControlOutput)
}

// Table is a time table of values, interpolated linearly between rows and
// held constant outside them.
type Table struct {
	Times  []float64
	Values [][]float64 // one row per time, one column per actuator
}

// Validate checks that the times increase and every row has n columns.
func (tb *Table) Validate(n int) error {
	if len(tb.Times) == 0 {
		return fmt.Errorf("table has no rows")
	}
	if len(tb.Values) != len(tb.Times) {
		return fmt.Errorf("table has %d times but %d rows of values", len(tb.Times), len(tb.Values))
	}
	for i, row := range tb.Values {
		if len(row) != n {
			return fmt.Errorf("table row %d has %d values, want %d", i+1, len(row), n)
		}
		if i > 0 && !(tb.Times[i] > tb.Times[i-1]) {
			return fmt.Errorf("table row %d: time %g does not increase (previous %g)", i+1, tb.Times[i], tb.Times[i-1])
		}
	}
	return nil
}

// clone returns a copy of the table that shares no storage with it.
func (tb *Table) clone() Table {
	c := Table{Times: slices.Clone(tb.Times), Values: make([][]float64, len(tb.Values))}
	for i, row := range tb.Values {
		c.Values[i] = slices.Clone(row)
	}
	return c
}

// weight returns the derivative of At(t) with respect to row k's values
// (the linear interpolation's hat function at row k), and of Rate(t).
func (tb *Table) weight(t float64, k int) (value, rate float64) {
	i, f, ok := tb.segment(t)
	if !ok {
		last := len(tb.Times) - 1
		if (t < tb.Times[0] && k == 0) || (t >= tb.Times[last] && k == last) {
			return 1, 0
		}
		return 0, 0
	}
	dt := tb.Times[i+1] - tb.Times[i]
	switch k {
	case i:
		return 1 - f, -1 / dt
	case i + 1:
		return f, 1 / dt
	}
	return 0, 0
}

// segment returns the row index i with Times[i] ≤ t < Times[i+1] and the
// fraction of the way from row i to i+1; ok is false outside the table.
func (tb *Table) segment(t float64) (i int, f float64, ok bool) {
	n := len(tb.Times)
	if n < 2 || t < tb.Times[0] || t >= tb.Times[n-1] {
		return 0, 0, false
	}
	lo, hi := 0, n-1
	for hi-lo > 1 {
		m := (lo + hi) / 2
		if tb.Times[m] <= t {
			lo = m
		} else {
			hi = m
		}
	}
	return lo, (t - tb.Times[lo]) / (tb.Times[lo+1] - tb.Times[lo]), true
}

// At writes the interpolated values at time t into dst.
func (tb *Table) At(t float64, dst []float64) {
	i, f, ok := tb.segment(t)
	if !ok {
		row := tb.Values[0]
		if t >= tb.Times[len(tb.Times)-1] {
			row = tb.Values[len(tb.Values)-1]
		}
		copy(dst, row)
		return
	}
	a, b := tb.Values[i], tb.Values[i+1]
	for k := range dst {
		dst[k] = a[k] + f*(b[k]-a[k])
	}
}

// Rate writes the slope of the table at time t into dst (zero outside it).
func (tb *Table) Rate(t float64, dst []float64) {
	i, _, ok := tb.segment(t)
	if !ok {
		for k := range dst {
			dst[k] = 0
		}
		return
	}
	a, b := tb.Values[i], tb.Values[i+1]
	dt := tb.Times[i+1] - tb.Times[i]
	for k := range dst {
		dst[k] = (b[k] - a[k]) / dt
	}
}

// PD tracks a target trajectory: effort = Kp (q* − q) + Kd (q̇* − q̇), with
// q* interpolated from Targets and q̇* its slope.
type PD struct {
	Kp, Kd  []float64 // per actuator
	Targets Table
	q, qd   []float64 // workspace
}

// Command implements Controller.
func (c *PD) Command(in *ControlInput, out *ControlOutput) {
	n := len(in.Q)
	if len(c.q) != n {
		c.q, c.qd = make([]float64, n), make([]float64, n)
	}
	c.Targets.At(in.T, c.q)
	c.Targets.Rate(in.T, c.qd)
	for i := 0; i < n; i++ {
		out.Effort[i] += c.Kp[i]*(c.q[i]-in.Q[i]) + c.Kd[i]*(c.qd[i]-in.QD[i])
		out.Stiffness[i] += c.Kp[i]
		out.Damping[i] += c.Kd[i]
	}
}

// Feedforward plays back an effort table.
type Feedforward struct {
	Efforts Table
	e       []float64
}

// Command implements Controller.
func (c *Feedforward) Command(in *ControlInput, out *ControlOutput) {
	if len(c.e) != len(in.Q) {
		c.e = make([]float64, len(in.Q))
	}
	c.Efforts.At(in.T, c.e)
	for i, e := range c.e {
		out.Effort[i] += e
	}
}

// Sum adds the commands of several controllers.
type Sum []Controller

// Command implements Controller.
func (s Sum) Command(in *ControlInput, out *ControlOutput) {
	for _, c := range s {
		c.Command(in, out)
	}
}

// jointFrictionWidth is the velocity (rad/s or m/s) over which Coulomb joint
// friction ramps from zero to its full value: the friction torque is
// −F·v/√(v² + w²), a smooth stand-in for the set-valued law that the step
// treats implicitly.
const jointFrictionWidth = 1e-3

// ballFriction returns the smoothed Coulomb friction torque of a ball joint
// at relative angular velocity w (body axes), −F·w/r with r = √(|w|² + c²)
// and the width c of jointFriction, and the isotropic damping F/r with
// which the step treats it implicitly. F/r is −∂torque/∂w across w (and at
// w = 0); along w the exact value is smaller, F c²/r³, but an isotropic
// damping keeps the torque's direction, so a spin does not wander off its
// axis.
func ballFriction(f float64, w [3]float64) (effort [3]float64, damping float64) {
	c := jointFrictionWidth
	r := math.Sqrt(w[0]*w[0] + w[1]*w[1] + w[2]*w[2] + c*c)
	for d := range 3 {
		effort[d] = -f * w[d] / r
	}
	return effort, f / r
}

// jointFriction returns the smoothed Coulomb friction effort at velocity v
// and its damping −∂/∂v.
func jointFriction(f, v float64) (effort, damping float64) {
	if f == 0 {
		return 0, 0
	}
	w := jointFrictionWidth
	r := math.Sqrt(v*v + w*w)
	return -f * v / r, f * w * w / (r * r * r)
}
