package calibrate

import (
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"sync"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/spatial/r3"
)

// Noise gives the standard deviation σ of each logged channel; residuals
// are divided by it. Zero fields take their defaults.
type Noise struct {
	// Position of a body (m, default 1e-3), Rotation of a body (rad,
	// default 1e-2) and Joint position (rad or m, default 1e-3).
	Position, Rotation, Joint float64
	// Channels overrides single channels: "carton.x", "carton.rotation",
	// "elbow.q".
	Channels map[string]float64
}

func (n Noise) withDefaults() Noise {
	if n.Position == 0 {
		n.Position = 1e-3
	}
	if n.Rotation == 0 {
		n.Rotation = 1e-2
	}
	if n.Joint == 0 {
		n.Joint = 1e-3
	}
	return n
}

func (n *Noise) sigma(channel string, def float64) float64 {
	if v, ok := n.Channels[channel]; ok {
		return v
	}
	return def
}

// Options tune a fit. The zero value selects the defaults on each field.
type Options struct {
	// Window is the length of a multiple-shooting window in seconds
	// (default 0.5): each window restarts from the logged state.
	Window float64
	Noise  Noise
	// Smoothing is the schedule of contact smoothing κ
	// (sim.Settings.Solver.Smoothing, N·s·m/s), one Levenberg–Marquardt
	// stage per value, large to small (default DefaultSmoothing). Early
	// stages give gradients through stick/slip and touch-down; the last
	// value sets the bias the smoothing leaves (0 is exact contact, which
	// the solver does not reach in every scene).
	Smoothing []float64
	// Iterations bounds the steps per stage (default 50).
	Iterations int
	// Starts is the number of starting points tried in the first stage
	// (default 1: the initial values alone); Seed seeds the others.
	Starts int
	Seed   uint64
	// FreeStart selects which parts of each window's starting state the
	// fit adjusts (multiple shooting with free starting states) instead
	// of taking them from the log: none (the default), velocities, or
	// positions and velocities. They are nuisance parameters: fitted, used
	// in the uncertainty of the others, but not reported one by one.
	FreeStart FreeStart
	// Workers is the number of windows simulated at once (default
	// GOMAXPROCS). Results do not depend on it.
	Workers int
}

// FreeStart selects the free parts of each window's starting state.
type FreeStart int

// The choices of FreeStart.
const (
	StartFromLog      FreeStart = iota // the logged (smoothed) state
	StartVelocityFree                  // free linear velocities of free bodies and joint rates
	StartStateFree                     // free positions (not orientations) and velocities
)

var freeStartNames = [...]string{"log", "velocity", "state"}

func (f FreeStart) String() string {
	if f < 0 || int(f) >= len(freeStartNames) {
		return "unknown"
	}
	return freeStartNames[f]
}

// ParseFreeStart returns the FreeStart named s: log, velocity or state.
func ParseFreeStart(s string) (FreeStart, error) {
	for i, n := range freeStartNames {
		if n == s {
			return FreeStart(i), nil
		}
	}
	return 0, fmt.Errorf("free start %q is not one of log, velocity, state", s)
}

func (o Options) withDefaults() Options {
	if o.Window == 0 {
		o.Window = 0.5
	}
	o.Noise = o.Noise.withDefaults()
	if len(o.Smoothing) == 0 {
		o.Smoothing = DefaultSmoothing
	}
	if o.Iterations == 0 {
		o.Iterations = 50
	}
	if o.Starts == 0 {
		o.Starts = 1
	}
	if o.Workers <= 0 {
		o.Workers = runtime.GOMAXPROCS(0)
	}
	return o
}

// DefaultSmoothing is the smoothing schedule of Options' zero value.
var DefaultSmoothing = []float64{1e-5, 1e-7}

// Channel kinds of residual rows.
const (
	kindPos = iota
	kindRot
	kindJoint
)

// KindNames name the channel kinds in reports.
var KindNames = [...]string{"position", "rotation", "joint"}

// resRow is one compared quantity at one sample: a position component, an
// orientation (three rows) or a joint position.
type resRow struct {
	kind   uint8
	axis   uint8
	k      int32 // sample index within the window
	idx    int32 // body index, or single-DOF joint index in run-file order
	sigma  float64
	want   float64      // logged position or joint value
	wantQ  contact.Quat // logged orientation
	column int32        // log column, for per-channel summaries
}

func (r *resRow) n() int {
	if r.kind == kindRot {
		return 3
	}
	return 1
}

// window is one multiple-shooting segment of a log.
type window struct {
	log   int
	row0  int // log row of the starting state
	start sim.Frame
	times []float64
	rows  []resRow
	off   int // first residual row
	n     int // residual rows
	// free are the window's nuisance parameters (start.* offsets), whose
	// columns in the full parameter vector start at col.
	free []sim.Param
	col  int
}

// boundLog is a log matched to a model's bodies and joints.
type boundLog struct {
	log     *Log
	pos     [][3]int // per body: columns of x, y, z (−1 if absent)
	rot     [][4]int // per body: qw, qx, qy, qz
	vel     [][6]int // per body: vx, vy, vz, wx, wy, wz
	jq, jqd []int    // per single-DOF joint: q, qd
	// Ignored lists columns that name nothing the fit uses.
	Ignored []string
}

// Objective is the weighted residual vector of a set of logs as a
// function of the free parameters, cut into windows.
type Objective struct {
	model    *sim.Model
	settings sim.Settings
	params   []FreeParam
	sp       []sim.Param
	logs     []*boundLog
	windows  []*window
	nData    int
	priors   []int // parameter indices with priors
	workers  int
	// Kappa is the contact smoothing the next evaluations use.
	Kappa  float64
	joints []int // body index of each single-DOF joint, run-file order
	// nuisance counts the windows' free start parameters, which follow
	// the free parameters in the full parameter vector.
	nuisance int
}

// NewObjective matches logs to the model and cuts them into windows of
// opts.Window seconds. params must come from ResolveParams.
func NewObjective(m *sim.Model, set sim.Settings, logs []*Log, params []FreeParam, opts Options) (*Objective, error) {
	opts = opts.withDefaults()
	if !(opts.Window > 0) {
		return nil, fmt.Errorf("window %v: must be positive seconds", opts.Window)
	}
	o := &Objective{model: m, settings: set.WithDefaults(), params: params, workers: opts.Workers}
	for _, p := range params {
		o.sp = append(o.sp, p.param)
	}
	for i, b := range m.Bodies {
		if k := b.Joint.Kind; k == sim.Revolute || k == sim.Prismatic {
			o.joints = append(o.joints, i)
		}
	}
	for li, lg := range logs {
		bl, err := o.bind(lg, opts.Noise)
		if err != nil {
			return nil, err
		}
		o.logs = append(o.logs, bl)
		if err := o.cut(li, bl, opts); err != nil {
			return nil, err
		}
	}
	for _, w := range o.windows {
		w.off = o.nData
		o.nData += w.n
		w.col = len(params) + o.nuisance
		if err := o.freeStart(w, opts.FreeStart); err != nil {
			return nil, err
		}
		o.nuisance += len(w.free)
	}
	if o.nData == 0 {
		return nil, errors.New("the logs hold no samples to compare with the simulation")
	}
	for j, p := range params {
		if p.PriorSD > 0 {
			o.priors = append(o.priors, j)
		}
	}
	return o, nil
}

// freeStart lists the start.* parameters of window w.
func (o *Objective) freeStart(w *window, fs FreeStart) error {
	if fs == StartFromLog {
		return nil
	}
	var names []string
	for _, b := range o.model.Bodies {
		if b.Joint.Kind != sim.Free {
			continue
		}
		if fs == StartStateFree {
			names = append(names, "start.x:"+b.Name, "start.y:"+b.Name, "start.z:"+b.Name)
		}
		// Angular velocities stay logged: a body resting on a support
		// cannot turn into it, so their offsets are barely determined
		// and slow the fit down without changing its result.
		names = append(names, "start.vx:"+b.Name, "start.vy:"+b.Name, "start.vz:"+b.Name)
	}
	for _, bi := range o.joints {
		j := o.model.Bodies[bi].Joint.Name
		if fs == StartStateFree {
			names = append(names, "start.q:"+j)
		}
		names = append(names, "start.qd:"+j)
	}
	ps, err := sim.ParseParams(o.model, names)
	if err != nil {
		return err
	}
	w.free = ps
	return nil
}

// NumParams returns the length of the full parameter vector: the free
// parameters, then the windows' free start offsets.
func (o *Objective) NumParams() int { return len(o.params) + o.nuisance }

// NuisanceName describes full-vector parameter k ≥ len(params).
func (o *Objective) NuisanceName(k int) string {
	for _, w := range o.windows {
		if i := k - w.col; i >= 0 && i < len(w.free) {
			return fmt.Sprintf("%s at t = %g s of %s", w.free[i].Name, w.start.T, filepath.Base(o.logs[w.log].log.File))
		}
	}
	return fmt.Sprintf("parameter %d", k)
}

// bind finds the columns of each body and joint in lg.
func (o *Objective) bind(lg *Log, noise Noise) (*boundLog, error) {
	m := o.model
	bl := &boundLog{log: lg}
	used := make([]bool, len(lg.Columns))
	col := func(name string) int {
		i := slices.Index(lg.Columns, name)
		if i >= 0 {
			used[i] = true
		}
		return i
	}
	missing := func(what string, names []string) error {
		return &sim.FileError{File: lg.File, Line: 1, Err: fmt.Errorf("missing columns %s: %s; windows restart from the logged state, so the log needs them (columns present: %s)",
			strings.Join(names, ", "), what, strings.Join(lg.Columns, ", "))}
	}
	for _, b := range m.Bodies {
		var p [3]int
		var r [4]int
		var v [6]int
		for c := range p {
			p[c] = col(b.Name + "." + sim.BodyColumns[c])
		}
		for c := range r {
			r[c] = col(b.Name + "." + sim.BodyColumns[3+c])
		}
		for c := range v {
			v[c] = col(b.Name + "." + sim.BodyColumns[7+c])
		}
		if b.Joint.Kind == sim.Free {
			var miss []string
			for c, idx := range append(p[:], r[:]...) {
				if idx < 0 {
					miss = append(miss, b.Name+"."+sim.BodyColumns[c])
				}
			}
			if len(miss) > 0 {
				return nil, missing(fmt.Sprintf("%s is a free body, and every free body needs its position and orientation", b.Name), miss)
			}
		}
		bl.pos = append(bl.pos, p)
		bl.rot = append(bl.rot, r)
		bl.vel = append(bl.vel, v)
	}
	for _, bi := range o.joints {
		name := m.Bodies[bi].Joint.Name
		q := col(name + ".q")
		if q < 0 {
			return nil, missing(fmt.Sprintf("joint %s needs its position", name), []string{name + ".q"})
		}
		bl.jq = append(bl.jq, q)
		bl.jqd = append(bl.jqd, col(name+".qd"))
		col(name + ".tau")
		col(name + ".effort")
	}
	for i, u := range used {
		if !u {
			bl.Ignored = append(bl.Ignored, lg.Columns[i])
		}
	}
	return bl, nil
}

// cut splits log li into windows and lists their residual rows.
func (o *Objective) cut(li int, bl *boundLog, opts Options) error {
	lg := bl.log
	m := o.model
	n := len(lg.T)
	ok := func(i int) bool { return o.completeState(bl, i) }
	i0 := 0
	for i0 < n && !ok(i0) {
		i0++
	}
	if i0 == n {
		return &sim.FileError{File: lg.File, Err: errors.New("no row holds a complete state (every free body's position and orientation, every joint's position) to start a window from")}
	}
	for i0 < n-1 {
		end := i0 + 1
		for end < n && lg.T[end] <= lg.T[i0]+opts.Window*(1+1e-9) {
			end++
		}
		w := &window{log: li, row0: i0}
		start, err := o.frameAt(bl, i0)
		if err != nil {
			return err
		}
		w.start = start
		for i := i0 + 1; i < end; i++ {
			k := int32(len(w.times))
			added := false
			for b := range m.Bodies {
				for c, ci := range bl.pos[b] {
					if ci >= 0 && !math.IsNaN(lg.Values[ci][i]) {
						name := lg.Columns[ci]
						w.rows = append(w.rows, resRow{kind: kindPos, axis: uint8(c), k: k, idx: int32(b), column: int32(ci),
							sigma: opts.Noise.sigma(name, opts.Noise.Position), want: lg.Values[ci][i]})
						added = true
					}
				}
				if q, good := quatAt(lg, bl.rot[b], i); good {
					name := m.Bodies[b].Name + ".rotation"
					w.rows = append(w.rows, resRow{kind: kindRot, k: k, idx: int32(b), column: int32(bl.rot[b][0]),
						sigma: opts.Noise.sigma(name, opts.Noise.Rotation), wantQ: q})
					added = true
				}
			}
			for j, ci := range bl.jq {
				if !math.IsNaN(lg.Values[ci][i]) {
					w.rows = append(w.rows, resRow{kind: kindJoint, k: k, idx: int32(j), column: int32(ci),
						sigma: opts.Noise.sigma(lg.Columns[ci], opts.Noise.Joint), want: lg.Values[ci][i]})
					added = true
				}
			}
			if added {
				w.times = append(w.times, lg.T[i])
			}
		}
		for _, r := range w.rows {
			w.n += r.n()
		}
		if w.n > 0 {
			o.windows = append(o.windows, w)
		}
		// The next window starts at the last sample of this one, or
		// later if that row lacks part of the state.
		next := end - 1
		for next < n && !ok(next) {
			next++
		}
		if next <= i0 {
			next = i0 + 1
		}
		i0 = next
	}
	return nil
}

// completeState reports whether row i holds every free body's pose and
// every joint's position.
func (o *Objective) completeState(bl *boundLog, i int) bool {
	lg := bl.log
	for b, body := range o.model.Bodies {
		if body.Joint.Kind != sim.Free {
			continue
		}
		for _, c := range append(bl.pos[b][:], bl.rot[b][:]...) {
			if math.IsNaN(lg.Values[c][i]) {
				return false
			}
		}
	}
	for _, c := range bl.jq {
		if math.IsNaN(lg.Values[c][i]) {
			return false
		}
	}
	return true
}

func quatAt(lg *Log, cols [4]int, i int) (contact.Quat, bool) {
	var v [4]float64
	for c, ci := range cols {
		if ci < 0 || math.IsNaN(lg.Values[ci][i]) {
			return contact.Quat{}, false
		}
		v[c] = lg.Values[ci][i]
	}
	q := contact.Quat{W: v[0], X: v[1], Y: v[2], Z: v[3]}
	n := math.Sqrt(q.W*q.W + q.X*q.X + q.Y*q.Y + q.Z*q.Z)
	if !(n > 0.5 && n < 1.5) {
		return contact.Quat{}, false
	}
	return q.Normalize(), true
}

// smoothHalfWidth is how many samples on each side of a window start feed
// the estimate of the starting state.
const smoothHalfWidth = 5

// frameAt returns the logged state at row i as a frame. Sensor noise in a
// starting pose would launch the window from a wrong place (a carton
// logged a fraction of a millimetre inside the table is pushed out of it),
// so positions and orientations are smoothed by a local quadratic
// least-squares fit over nearby samples, and velocities the log lacks are
// the slope of the same fit. This is data preprocessing: the fit's
// derivatives never use finite differences.
func (o *Objective) frameAt(bl *boundLog, i int) (sim.Frame, error) {
	lg := bl.log
	m := o.model
	f := sim.Frame{T: lg.T[i], Bodies: make([]sim.BodyFrame, len(m.Bodies)), Joints: make([]sim.JointFrame, len(o.joints))}
	val := func(c int) float64 {
		if c < 0 {
			return math.NaN()
		}
		return lg.Values[c][i]
	}
	for b, body := range m.Bodies {
		if body.Joint.Kind != sim.Free {
			continue
		}
		p, r, v := bl.pos[b], bl.rot[b], bl.vel[b]
		q, good := quatAt(lg, r, i)
		if !good {
			return f, &sim.FileError{File: lg.File, Line: lg.Lines[i], Field: body.Name + ".qw",
				Err: errors.New("orientation is not a unit quaternion")}
		}
		var pos, lin [3]float64
		for c := range pos {
			pos[c], lin[c] = smoothAt(lg.T, lg.Values[p[c]], i)
			if lv := val(v[c]); !math.IsNaN(lv) {
				lin[c] = lv
			}
		}
		phi, ang := smoothRotation(lg, r, i)
		for c := range ang {
			if av := val(v[3+c]); !math.IsNaN(av) {
				ang[c] = av
			}
		}
		for _, x := range append(append(pos[:], lin[:]...), ang[:]...) {
			if math.IsNaN(x) {
				return f, &sim.FileError{File: lg.File, Line: lg.Lines[i], Field: body.Name,
					Err: errors.New("cannot estimate the state: too few logged samples near this row")}
			}
		}
		q = expRot(r3.Vec{X: phi[0], Y: phi[1], Z: phi[2]}).Mul(q).Normalize()
		f.Bodies[b] = sim.BodyFrame{
			Pose:    contact.Pose{Pos: r3.Vec{X: pos[0], Y: pos[1], Z: pos[2]}, Rot: q},
			Linear:  r3.Vec{X: lin[0], Y: lin[1], Z: lin[2]},
			Angular: r3.Vec{X: ang[0], Y: ang[1], Z: ang[2]},
		}
	}
	for j := range o.joints {
		q, qd := smoothAt(lg.T, lg.Values[bl.jq[j]], i)
		if v := val(bl.jqd[j]); !math.IsNaN(v) {
			qd = v
		}
		if math.IsNaN(q) || math.IsNaN(qd) {
			return f, &sim.FileError{File: lg.File, Line: lg.Lines[i], Field: lg.Columns[bl.jq[j]],
				Err: errors.New("cannot estimate the joint state: too few logged positions near this row")}
		}
		f.Joints[j] = sim.JointFrame{Q: q, QD: qd}
	}
	return f, nil
}

// smoothAt fits v ≈ a + b·(t − t_i) + c·(t − t_i)² by least squares to
// the finite samples within smoothHalfWidth rows of row i (a line when
// fewer than four are available) and returns the value a and slope b.
func smoothAt(t, v []float64, i int) (value, slope float64) {
	var ts, vs []float64
	if !math.IsNaN(v[i]) {
		ts, vs = append(ts, 0), append(vs, v[i])
	}
	for _, step := range []int{-1, 1} {
		for j, n := i+step, 0; j >= 0 && j < len(t) && n < smoothHalfWidth; j += step {
			if !math.IsNaN(v[j]) {
				ts, vs = append(ts, t[j]-t[i]), append(vs, v[j])
				n++
			}
		}
	}
	return polyFit(ts, vs)
}

// polyFit fits v ≈ a + b·t (+ c·t²) by least squares and returns a and b.
func polyFit(ts, vs []float64) (float64, float64) {
	n := len(ts)
	if n < 2 {
		return math.NaN(), math.NaN()
	}
	deg := 2
	if n < 4 {
		deg = 1
	}
	scale := 0.0
	for _, t := range ts {
		scale = math.Max(scale, math.Abs(t))
	}
	if scale == 0 {
		return math.NaN(), math.NaN()
	}
	X := mat.NewDense(n, deg+1, nil)
	for r, t := range ts {
		s := t / scale
		for c := 0; c <= deg; c++ {
			X.Set(r, c, math.Pow(s, float64(c)))
		}
	}
	var beta mat.VecDense
	if err := beta.SolveVec(X, mat.NewVecDense(n, slices.Clone(vs))); err != nil {
		return math.NaN(), math.NaN()
	}
	return beta.AtVec(0), beta.AtVec(1) / scale
}

// smoothRotation fits the world rotation vectors of nearby orientations
// relative to row i, returning the smoothed rotation vector at row i (a
// small correction to apply on the left) and the angular velocity.
func smoothRotation(lg *Log, cols [4]int, i int) (phi0, omega [3]float64) {
	for c := range phi0 {
		phi0[c], omega[c] = math.NaN(), math.NaN()
	}
	q0, ok := quatAt(lg, cols, i)
	if !ok {
		return
	}
	var ts []float64
	var phi [3][]float64
	add := func(j int) bool {
		q, ok := quatAt(lg, cols, j)
		if !ok {
			return false
		}
		p := rotationVector(q.Mul(q0.Conj()))
		ts = append(ts, lg.T[j]-lg.T[i])
		phi[0], phi[1], phi[2] = append(phi[0], p.X), append(phi[1], p.Y), append(phi[2], p.Z)
		return true
	}
	add(i)
	for _, step := range []int{-1, 1} {
		for j, n := i+step, 0; j >= 0 && j < len(lg.T) && n < smoothHalfWidth; j += step {
			if add(j) {
				n++
			}
		}
	}
	for c := range omega {
		phi0[c], omega[c] = polyFit(ts, phi[c])
	}
	return
}

// expRot returns the unit quaternion of the rotation vector φ.
func expRot(phi r3.Vec) contact.Quat {
	th := r3.Norm(phi)
	if th < 1e-300 {
		return contact.Quat{W: 1}
	}
	s := math.Sin(th/2) / th
	return contact.Quat{W: math.Cos(th / 2), X: s * phi.X, Y: s * phi.Y, Z: s * phi.Z}
}

// rotationVector returns φ with exp([φ]×) = R(q), the rotation taking the
// shorter way.
func rotationVector(q contact.Quat) r3.Vec {
	if q.W < 0 {
		q = contact.Quat{W: -q.W, X: -q.X, Y: -q.Y, Z: -q.Z}
	}
	v := r3.Vec{X: q.X, Y: q.Y, Z: q.Z}
	s := r3.Norm(v)
	if s < 1e-300 {
		return r3.Scale(2, v)
	}
	return r3.Scale(2*math.Atan2(s, q.W)/s, v)
}

// invLeftJacobian returns J_l⁻¹(φ) applied to d: how the rotation vector
// φ of exp([φ]×) changes when the rotation is perturbed on the left by
// exp([δ]×), δ = d. (Standard SO(3) calculus.)
func invLeftJacobian(phi, d r3.Vec) r3.Vec {
	th := r3.Norm(phi)
	c1 := r3.Cross(phi, d)
	c2 := r3.Cross(phi, c1)
	var k float64
	if th < 1e-4 {
		k = 1.0/12 + th*th/720
	} else {
		k = 1/(th*th) - (1+math.Cos(th))/(2*th*math.Sin(th))
	}
	return r3.Add(r3.Sub(d, r3.Scale(0.5, c1)), r3.Scale(k, c2))
}

// M returns the number of residual rows: data rows, then one per prior.
func (o *Objective) M() int { return o.nData + len(o.priors) }

// DataRows returns the number of data rows.
func (o *Objective) DataRows() int { return o.nData }

// Windows returns the number of windows.
func (o *Objective) Windows() int { return len(o.windows) }

// Ignored returns the columns of log i that the fit does not use.
func (o *Objective) Ignored(i int) []string { return o.logs[i].Ignored }

// Problem returns the least-squares problem over the full parameter
// vector; the start offsets are unbounded.
func (o *Objective) Problem() Problem {
	n := o.NumParams()
	lo, hi := filled(n, math.Inf(-1)), filled(n, math.Inf(1))
	for j, p := range o.params {
		lo[j], hi[j] = p.Lower, p.Upper
	}
	return Problem{M: o.M(), Func: o.Residuals, Jac: o.Jacobian, Lower: lo, Upper: hi}
}

// Residuals writes the weighted residuals at θ into dst.
func (o *Objective) Residuals(dst, theta []float64) error {
	return o.eval(dst, nil, theta, nil)
}

// Jacobian writes ∂r/∂θ at θ into dst.
func (o *Objective) Jacobian(dst *mat.Dense, theta []float64) error {
	r := make([]float64, o.M())
	return o.eval(r, dst, theta, nil)
}

// model returns a copy of the model with θ applied.
func (o *Objective) modelAt(theta []float64) *sim.Model {
	m := sim.CopyModel(o.model)
	for j := range o.sp {
		o.sp[j].Set(m, theta[j])
	}
	return m
}

// eval simulates every window at θ, concurrently, writing residuals (and
// the Jacobian if J is not nil) into rows fixed per window, so that the
// result is the same for any number of workers. If frames is not nil the
// simulated frames of window w go to frames[w].
//
// theta holds the free parameters, optionally followed by the start
// offsets; without them the windows start from the logged state.
func (o *Objective) eval(r []float64, J *mat.Dense, theta []float64, frames [][]sim.Frame) error {
	if (len(theta) != len(o.params) && len(theta) != o.NumParams()) || len(r) != o.M() {
		return fmt.Errorf("calibrate: evaluation with %d parameters and %d rows, want %d and %d", len(theta), len(r), o.NumParams(), o.M())
	}
	if J != nil {
		J.Zero()
	}
	for j, p := range o.params {
		if err := p.param.CheckValue(theta[j]); err != nil {
			return err
		}
	}
	m := o.modelAt(theta)
	set := o.settings
	set.Solver.Smoothing = o.Kappa
	errs := make([]error, len(o.windows))
	next := make(chan int)
	var wg sync.WaitGroup
	for range min(o.workers, len(o.windows)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for w := range next {
				f, err := o.evalWindow(o.windows[w], m, set, theta, r, J)
				errs[w] = err
				if frames != nil {
					frames[w] = f
				}
			}
		}()
	}
	for w := range o.windows {
		next <- w
	}
	close(next)
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	for i, j := range o.priors {
		p := &o.params[j]
		r[o.nData+i] = (theta[j] - p.PriorMean) / p.PriorSD
		if J != nil {
			J.Set(o.nData+i, j, 1/p.PriorSD)
		}
	}
	return nil
}

func (o *Objective) evalWindow(w *window, m *sim.Model, set sim.Settings, theta, r []float64, J *mat.Dense) ([]sim.Frame, error) {
	lg := o.logs[w.log].log
	where := func(err error) error {
		return fmt.Errorf("%s, window starting at t = %g s (line %d): %w", lg.File, w.start.T, lg.Lines[w.row0], err)
	}
	s, err := sim.New(m, set)
	if err != nil {
		return nil, where(err)
	}
	start := w.start
	useFree := len(w.free) > 0 && len(theta) == o.NumParams()
	if useFree {
		start = offsetFrame(m, w, theta[w.col:w.col+len(w.free)])
	}
	if err := s.SetFrame(&start); err != nil {
		return nil, where(err)
	}
	var params []sim.Param
	// cols maps the sample's parameter columns to the full vector.
	var cols []int
	if J != nil {
		params = o.sp
		for j := range o.sp {
			cols = append(cols, j)
		}
		if useFree {
			params = append(slices.Clone(o.sp), w.free...)
			for i := range w.free {
				cols = append(cols, w.col+i)
			}
		}
	}
	smp, err := s.Sample(params, w.times)
	if err != nil {
		return nil, where(err)
	}
	np := len(params)
	row := w.off
	for i := range w.rows {
		rr := &w.rows[i]
		fr := &smp.Frames[rr.k]
		inv := 1 / rr.sigma
		switch rr.kind {
		case kindPos:
			p := fr.Bodies[rr.idx].Pose.Pos
			r[row] = (component(p, int(rr.axis)) - rr.want) * inv
			if J != nil {
				for j := range np {
					J.Set(row, cols[j], component(smp.DPos[rr.k][rr.idx][j], int(rr.axis))*inv)
				}
			}
			row++
		case kindRot:
			q := fr.Bodies[rr.idx].Pose.Rot
			phi := rotationVector(q.Mul(rr.wantQ.Conj()))
			r[row], r[row+1], r[row+2] = phi.X*inv, phi.Y*inv, phi.Z*inv
			if J != nil {
				for j := range np {
					d := invLeftJacobian(phi, smp.DRot[rr.k][rr.idx][j])
					J.Set(row, cols[j], d.X*inv)
					J.Set(row+1, cols[j], d.Y*inv)
					J.Set(row+2, cols[j], d.Z*inv)
				}
			}
			row += 3
		case kindJoint:
			r[row] = (fr.Joints[rr.idx].Q - rr.want) * inv
			if J != nil {
				for j := range np {
					J.Set(row, cols[j], smp.DJoint[rr.k][rr.idx][j]*inv)
				}
			}
			row++
		}
	}
	return smp.Frames, nil
}

// offsetFrame returns w's starting frame with the start offsets d added.
func offsetFrame(m *sim.Model, w *window, d []float64) sim.Frame {
	f := w.start
	f.Bodies = slices.Clone(f.Bodies)
	f.Joints = slices.Clone(f.Joints)
	jointOf := map[int]int{}
	j := 0
	for i, b := range m.Bodies {
		if k := b.Joint.Kind; k == sim.Revolute || k == sim.Prismatic {
			jointOf[i] = j
			j++
		}
	}
	for i, p := range w.free {
		name := p.Name
		qty, owner, _ := strings.Cut(name, ":")
		comp := strings.TrimPrefix(qty, "start.")
		bi := slices.IndexFunc(m.Bodies, func(b sim.Body) bool { return b.Name == owner })
		if comp == "q" || comp == "qd" {
			bi = slices.IndexFunc(m.Bodies, func(b sim.Body) bool { return b.Joint.Name == owner })
			jf := &f.Joints[jointOf[bi]]
			if comp == "q" {
				jf.Q += d[i]
			} else {
				jf.QD += d[i]
			}
			continue
		}
		bf := &f.Bodies[bi]
		switch comp {
		case "x":
			bf.Pose.Pos.X += d[i]
		case "y":
			bf.Pose.Pos.Y += d[i]
		case "z":
			bf.Pose.Pos.Z += d[i]
		case "vx":
			bf.Linear.X += d[i]
		case "vy":
			bf.Linear.Y += d[i]
		case "vz":
			bf.Linear.Z += d[i]
		case "wx":
			bf.Angular.X += d[i]
		case "wy":
			bf.Angular.Y += d[i]
		case "wz":
			bf.Angular.Z += d[i]
		}
	}
	return f
}

func component(v r3.Vec, i int) float64 {
	switch i {
	case 0:
		return v.X
	case 1:
		return v.Y
	}
	return v.Z
}

// ErrorSummary measures how far simulation and logs are apart.
type ErrorSummary struct {
	// Loss is ½‖r‖² over the data rows (whitened), RMS the root mean
	// square whitened residual.
	Loss float64
	RMS  float64
	// Position (m), Rotation (rad) and Joint (rad or m) are root mean
	// square errors in natural units; NaN when no channel
	// of that kind is logged.
	Position float64
	Rotation float64
	Joint    float64
	Rows     int
}

// Errors evaluates the logs at θ and summarizes the misfit.
func (o *Objective) Errors(theta []float64) (ErrorSummary, error) {
	r := make([]float64, o.M())
	if err := o.eval(r, nil, theta, nil); err != nil {
		return ErrorSummary{}, err
	}
	return o.summarize(r), nil
}

func (o *Objective) summarize(r []float64) ErrorSummary {
	var ss [3]float64
	var cnt [3]int
	total := 0.0
	for _, w := range o.windows {
		row := w.off
		for _, rr := range w.rows {
			for c := 0; c < rr.n(); c++ {
				v := r[row] * rr.sigma
				if rr.kind == kindRot {
					// The three components add up to the squared angle.
					ss[kindRot] += v * v
					if c == 0 {
						cnt[kindRot]++
					}
				} else {
					ss[rr.kind] += v * v
					cnt[rr.kind]++
				}
				total += r[row] * r[row]
				row++
			}
		}
	}
	rms := func(k int) float64 {
		if cnt[k] == 0 {
			return math.NaN()
		}
		return math.Sqrt(ss[k] / float64(cnt[k]))
	}
	return ErrorSummary{Loss: total / 2, RMS: math.Sqrt(total / float64(o.nData)), Position: rms(kindPos), Rotation: rms(kindRot), Joint: rms(kindJoint), Rows: o.nData}
}

// Trace is a simulated trajectory of one window beside the log.
type Trace struct {
	Log    int
	Times  []float64
	Frames []sim.Frame
}

// Simulate runs every window at θ and returns their frames and the
// residuals, for plots.
func (o *Objective) Simulate(theta []float64) ([]Trace, []float64, error) {
	r := make([]float64, o.M())
	frames := make([][]sim.Frame, len(o.windows))
	if err := o.eval(r, nil, theta, frames); err != nil {
		return nil, nil, err
	}
	out := make([]Trace, len(o.windows))
	for i, w := range o.windows {
		out[i] = Trace{Log: w.log, Times: w.times, Frames: frames[i]}
	}
	return out, r, nil
}
