package sim

import (
	"fmt"
	"math"
	"strings"
	"time"

	"stickslip/contact"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/spatial/r3"
)

// Thresholds that classify a solved contact for reports and run files.
const (
	// SlipThreshold: a contact slipping faster than this (m/s) is sliding.
	SlipThreshold = 1e-5
	// ImpulseThreshold: a contact with a smaller normal impulse (N·s) is
	// separating.
	ImpulseThreshold = 1e-9
)

// midpointPasses is the number of fixed-point passes that evaluate the
// velocity-product terms at the step's midpoint velocity. Explicit
// evaluation would pump energy into spinning bodies (the gyroscopic term
// grows ‖L‖ by O(h²) per step); the midpoint keeps it.
const midpointPasses = 2

// geom is one collision shape of the scene.
type geom struct {
	owner    int // body index, or -1 for static geometry
	shape    *contact.Shape
	material int
	name     string // the owner's name
}

// Contact is one contact point of the last step, with its solved impulse.
type Contact struct {
	// A and B are body indices (-1: static geometry named by StaticA/B).
	A, B     int
	NameA    string
	NameB    string
	Point    contact.Point
	Tangent1 r3.Vec
	Tangent2 r3.Vec
	Friction float64
	// Restitution of the material pair.
	Restitution float64
	// Target is the normal velocity the contact row asked for (restitution
	// and position correction).
	Target float64
	// Impulse (normal, tangent 1, tangent 2) in N·s and the post-step
	// relative velocity of B with respect to A in the same basis.
	Impulse  [3]float64
	Velocity [3]float64

	geomA, geomB int     // indices into the simulator's geometry
	pair         int     // material pair index, or -1 for the default
	pre          float64 // normal approach velocity before the step
	bounce       bool    // the target came from Newton's impact law
}

// Slip returns the tangential slip speed after the step.
func (c *Contact) Slip() float64 { return math.Hypot(c.Velocity[1], c.Velocity[2]) }

// State classifies the contact.
func (c *Contact) State() ContactState {
	switch {
	case c.Impulse[0] < ImpulseThreshold:
		return Separating
	case c.Slip() > SlipThreshold:
		return Sliding
	}
	return Sticking
}

// FrictionImpulse returns the friction impulse on B as a world vector.
func (c *Contact) FrictionImpulse() r3.Vec {
	return r3.Add(r3.Scale(c.Impulse[1], c.Tangent1), r3.Scale(c.Impulse[2], c.Tangent2))
}

// StepError reports a step that could not be completed.
type StepError struct {
	Step     int
	Time     float64
	Bodies   []string
	Contacts int
	Err      error
}

func (e *StepError) Error() string {
	return fmt.Sprintf("step %d (t = %.6g s): %d contacts among bodies %s: %v",
		e.Step, e.Time, e.Contacts, strings.Join(e.Bodies, ", "), e.Err)
}

func (e *StepError) Unwrap() error { return e.Err }

// Sim advances a model through time. It owns all the workspaces of a step,
// so that stepping allocates nothing once the contact count has been seen.
type Sim struct {
	model *Model
	set   Settings
	lay   *layout
	kin   *kinematics

	q, v []float64
	t    float64
	step int

	mass, chol         []float64
	c, tau, rhs, vfree []float64
	damp               []float64 // viscous joint damping per velocity coordinate
	kp, kd             []float64 // controller stiffness and damping per coordinate, this step
	tauCmd, tauAct     []float64 // actuator effort per coordinate this step: commanded, applied
	sat                []bool    // actuator saturated this step, per velocity coordinate
	q0, v0             []float64
	vpass              [midpointPasses + 1][]float64
	tan                *tangentSweep
	passRec            *[midpointPasses + 1]*biasPrimal // when set, Step keeps its Newton–Euler passes there
	ctl                Controller                       // the simulator's own copy of the model's controller
	ctlIn              ControlInput
	ctlOut             ControlOutput
	limits             []limitRow

	geoms     []geom
	boxes     []r3.Box
	geomPoses []contact.Pose
	bp        contact.BroadPhase
	pairs     [][2]int32
	pts       []contact.Point
	matProps  [][]PairProps
	matPair   [][]int // material pair index (or -1, the default) by material indices

	contacts []Contact
	rowTrees [][2]int
	ranges   []rowRange // per row, the coordinate ranges its trees span
	jac, z   []float64  // contact Jacobian rows; Z = L⁻¹Jᵀ rows
	w        mat.SymDense
	prob     contact.Problem
	lambda   []float64
	u        []float64
	solver   *contact.Solver

	lastStats contact.SolveStats

	// Profile, when not nil, accumulates the time spent in each stage.
	Profile *StepProfile
}

// StepProfile is the time spent in each stage of Step.
type StepProfile struct {
	Dynamics  time.Duration // kinematics, mass matrix, bias, free velocity, integration
	Collision time.Duration // broad and narrow phase
	Contact   time.Duration // building and solving the contact problem
}

func (s *Sim) lap(d *time.Duration, start *time.Time) {
	if s.Profile != nil {
		now := time.Now()
		*d += now.Sub(*start)
		*start = now
	}
}

// New returns a simulator at the model's initial state.
func New(m *Model, set Settings) (*Sim, error) {
	lay, err := compileLayout(m)
	if err != nil {
		return nil, err
	}
	set = set.WithDefaults()
	s := &Sim{
		model:  m,
		set:    set,
		lay:    lay,
		kin:    newKinematics(len(m.Bodies), lay.nv),
		q:      make([]float64, lay.nq),
		v:      make([]float64, lay.nv),
		mass:   make([]float64, lay.massLen),
		chol:   make([]float64, lay.massLen),
		c:      make([]float64, lay.nv),
		tau:    make([]float64, lay.nv),
		rhs:    make([]float64, lay.nv),
		vfree:  make([]float64, lay.nv),
		damp:   make([]float64, lay.nv),
		kp:     make([]float64, lay.nv),
		kd:     make([]float64, lay.nv),
		tauCmd: make([]float64, lay.nv),
		tauAct: make([]float64, lay.nv),
		sat:    make([]bool, lay.nv),
		q0:     make([]float64, lay.nq),
		v0:     make([]float64, lay.nv),
		solver: contact.NewSolver(),
	}
	for i := range s.vpass {
		s.vpass[i] = make([]float64, lay.nv)
	}
	if err := s.compileActuators(); err != nil {
		return nil, err
	}
	s.compileGeometry()
	s.Reset()
	return s, nil
}

func (s *Sim) compileActuators() error {
	m := s.model
	n := len(m.Actuators)
	for _, a := range m.Actuators {
		if a.Body < 0 || a.Body >= len(m.Bodies) {
			return fmt.Errorf("actuator %q: body index %d out of range", a.Name, a.Body)
		}
		if k := m.Bodies[a.Body].Joint.Kind; k != Revolute && k != Prismatic {
			return fmt.Errorf("actuator %q: joint of body %q is %s; actuators drive revolute or prismatic joints", a.Name, m.Bodies[a.Body].Name, k)
		}
		if a.EffortLimit < 0 {
			return fmt.Errorf("actuator %q: effort limit %g is negative", a.Name, a.EffortLimit)
		}
	}
	// Controllers keep workspaces; each simulator gets its own copy so that
	// simulators sharing a model can run concurrently.
	s.ctl = copyController(m.Controller)
	s.ctlIn = ControlInput{Q: make([]float64, n), QD: make([]float64, n)}
	s.ctlOut = ControlOutput{Effort: make([]float64, n), Stiffness: make([]float64, n), Damping: make([]float64, n)}
	return nil
}

// limitRow is an active joint limit: a one-sided row of the contact problem.
type limitRow struct {
	body  int
	dof   int
	sign  float64 // +1: lower limit (q − lower ≥ 0); −1: upper limit
	gap   float64
	force float64 // solved impulse
}

// control evaluates the controller, actuator limits and joint friction into
// tau (explicit effort), kp and kd (implicit stiffness and damping).
func (s *Sim) control() {
	m := s.model
	for i := range s.tau {
		s.tau[i], s.kp[i], s.kd[i], s.tauCmd[i], s.tauAct[i] = 0, 0, 0, 0, 0
		s.sat[i] = false
	}
	if s.ctl != nil && len(m.Actuators) > 0 {
		in, out := &s.ctlIn, &s.ctlOut
		in.T = s.t
		for i, a := range m.Actuators {
			d := s.lay.bodies[a.Body].vOff
			in.Q[i] = s.q[s.lay.bodies[a.Body].qOff]
			in.QD[i] = s.v[d]
			out.Effort[i], out.Stiffness[i], out.Damping[i] = 0, 0, 0
		}
		s.ctl.Command(in, out)
		for i, a := range m.Actuators {
			d := s.lay.bodies[a.Body].vOff
			e := out.Effort[i]
			s.tauCmd[d] += e
			if lim := a.EffortLimit; lim > 0 && math.Abs(e) > lim {
				// Saturated: the effort no longer depends on the state.
				s.tau[d] += math.Copysign(lim, e)
				s.tauAct[d] += math.Copysign(lim, e)
				s.sat[d] = true
				continue
			}
			s.tau[d] += e
			s.tauAct[d] += e
			s.kp[d] += out.Stiffness[i]
			s.kd[d] += out.Damping[i]
		}
	}
	for i := range m.Bodies {
		f := m.Bodies[i].Joint.Friction
		if f == 0 {
			continue
		}
		bl := &s.lay.bodies[i]
		if m.Bodies[i].Joint.Kind == Ball {
			w := s.v[bl.vOff : bl.vOff+3]
			e, damp := ballFriction(f, [3]float64{w[0], w[1], w[2]})
			for d := range 3 {
				s.tau[bl.vOff+d] += e[d]
				s.kd[bl.vOff+d] += damp
			}
			continue
		}
		d := bl.vOff
		e, damp := jointFriction(f, s.v[d])
		s.tau[d] += e
		s.kd[d] += damp
	}
}

// AppliedEffort returns the actuator effort at velocity coordinate d in the
// last step, after effort limits, and the commanded one.
func (s *Sim) AppliedEffort(d int) (applied, commanded float64) { return s.tauAct[d], s.tauCmd[d] }

func (s *Sim) compileGeometry() {
	m := s.model
	names := map[string]int{}
	index := func(name string) int {
		if i, ok := names[name]; ok {
			return i
		}
		names[name] = len(names)
		return len(names) - 1
	}
	for i := range m.Static {
		st := &m.Static[i]
		s.geoms = append(s.geoms, geom{owner: -1, shape: &st.Shape, material: index(st.Material), name: st.Name})
	}
	for i := range m.Bodies {
		b := &m.Bodies[i]
		for j := range b.Shapes {
			s.geoms = append(s.geoms, geom{owner: i, shape: &b.Shapes[j], material: index(b.Material), name: b.Name})
		}
	}
	matNames := make([]string, len(names))
	for n, i := range names {
		matNames[i] = n
	}
	s.matProps = make([][]PairProps, len(names))
	s.matPair = make([][]int, len(names))
	for i := range s.matProps {
		s.matProps[i] = make([]PairProps, len(names))
		s.matPair[i] = make([]int, len(names))
		for j := range s.matProps[i] {
			s.matProps[i][j] = m.Materials.Lookup(matNames[i], matNames[j])
			s.matPair[i][j] = -1
			for k, p := range m.Materials.Pairs {
				if s.matPair[i][j] < 0 && ((p.A == matNames[i] && p.B == matNames[j]) || (p.A == matNames[j] && p.B == matNames[i])) {
					s.matPair[i][j] = k
				}
			}
		}
	}
	s.boxes = make([]r3.Box, len(s.geoms))
	s.geomPoses = make([]contact.Pose, len(s.geoms))
	for i := range m.Bodies {
		if m.Bodies[i].Joint.Damping != 0 {
			bl := &s.lay.bodies[i]
			for d := 0; d < bl.nv; d++ {
				s.damp[bl.vOff+d] = m.Bodies[i].Joint.Damping
			}
		}
	}
}

// Reset returns the simulator to the model's initial state at t = 0.
func (s *Sim) Reset() {
	m := s.model
	for i := range m.Bodies {
		b := &m.Bodies[i]
		bl := &s.lay.bodies[i]
		q := s.q[bl.qOff : bl.qOff+bl.nq]
		v := s.v[bl.vOff : bl.vOff+bl.nv]
		switch b.Joint.Kind {
		case Free:
			p := b.Start.Pose
			rot := p.Rot
			if rot == (contact.Quat{}) {
				rot = contact.IdentityQuat
			}
			rot = rot.Normalize()
			copy(q, []float64{p.Pos.X, p.Pos.Y, p.Pos.Z, rot.W, rot.X, rot.Y, rot.Z})
			w := rot.InvRotate(b.Start.Angular)
			l := b.Start.Linear
			copy(v, []float64{w.X, w.Y, w.Z, l.X, l.Y, l.Z})
		case Ball:
			rot := b.Joint.Rotation
			if rot == (contact.Quat{}) {
				rot = contact.IdentityQuat
			}
			rot = rot.Normalize()
			copy(q, []float64{rot.W, rot.X, rot.Y, rot.Z})
			// The coordinates are the relative angular velocity in the
			// child's axes.
			w := rot.InvRotate(b.Joint.Spin)
			copy(v, []float64{w.X, w.Y, w.Z})
		case Revolute, Prismatic:
			q[0], v[0] = b.Joint.Position, b.Joint.Velocity
		}
	}
	s.t, s.step = 0, 0
	s.contacts = s.contacts[:0]
	s.kin.update(m, s.lay, s.q, s.v)
}

// Time returns the simulated time in seconds.
func (s *Sim) Time() float64 { return s.t }

// StepCount returns the number of steps taken since Reset.
func (s *Sim) StepCount() int { return s.step }

// Model returns the simulated model.
func (s *Sim) Model() *Model { return s.model }

// Settings returns the settings in use, with defaults filled in.
func (s *Sim) Settings() Settings { return s.set }

// Contacts returns the contacts of the last step. The slice is reused by the
// next step.
func (s *Sim) Contacts() []Contact { return s.contacts }

// SolveStats returns the statistics of the last step's contact solve.
func (s *Sim) SolveStats() contact.SolveStats { return s.lastStats }

// Body returns the world state of body i.
func (s *Sim) Body(i int) BodyFrame {
	pose := s.kin.pose[i]
	vel := s.kin.vel[i]
	return BodyFrame{Pose: pose, Linear: vel.pointVel(pose.Pos), Angular: vel.w}
}

// Q and V return the generalized coordinates and velocities (not copies).
func (s *Sim) Q() []float64 { return s.q }

// V returns the generalized velocities (not a copy).
func (s *Sim) V() []float64 { return s.v }

// Energy returns the kinetic energy ½ vᵀ M v and the gravitational potential
// energy −Σ m g·c of the current state, in joules.
func (s *Sim) Energy() (kinetic, potential float64) {
	for i := range s.model.Bodies {
		vel := s.kin.vel[i]
		kinetic += 0.5 * vel.dot(s.kin.in[i].apply(vel))
		potential -= s.model.Bodies[i].Mass * r3.Dot(s.model.Gravity, s.kin.com[i])
	}
	return kinetic, potential
}

// AngularMomentum returns the total angular momentum about the world origin.
func (s *Sim) AngularMomentum() r3.Vec {
	var l r3.Vec
	for i := range s.model.Bodies {
		l = r3.Add(l, s.kin.in[i].apply(s.kin.vel[i]).n)
	}
	return l
}

// LinearMomentum returns the total linear momentum.
func (s *Sim) LinearMomentum() r3.Vec {
	var p r3.Vec
	for i := range s.model.Bodies {
		p = r3.Add(p, s.kin.in[i].apply(s.kin.vel[i]).f)
	}
	return p
}

// solveMass solves A x = b in place per tree with the factored blocks.
func (s *Sim) solveMass(x []float64) {
	for t := range s.lay.trees {
		tr := &s.lay.trees[t]
		cholSolve(s.chol[tr.massOffset:tr.massOffset+tr.nv*tr.nv], tr.nv, x[tr.vOff:tr.vOff+tr.nv])
	}
}

// factorMass evaluates the controller and factors the per-tree blocks of
// A = M + h(D + K_d) + h² K_p at the current state.
func (s *Sim) factorMass() error {
	m, lay, h := s.model, s.lay, s.set.TimeStep
	s.control()
	s.kin.massMatrix(m, lay, s.mass)
	copy(s.chol, s.mass)
	for t := range lay.trees {
		tr := &lay.trees[t]
		blk := s.chol[tr.massOffset : tr.massOffset+tr.nv*tr.nv]
		for d := 0; d < tr.nv; d++ {
			i := tr.vOff + d
			blk[d*tr.nv+d] += h*(s.damp[i]+s.kd[i]) + h*h*s.kp[i]
		}
		if !cholesky(blk, tr.nv) {
			return s.stepError(fmt.Errorf("mass matrix of the tree rooted at body %q is not positive definite", m.Bodies[tr.bodies[0]].Name))
		}
	}
	return nil
}

// Step advances the simulation by one time step:
//
//	(M + hD)(v⁺ − v) = h(τ − c(q, v̄) − D v) + Jᵀλ,   q⁺ = q ⊕ h v⁺,
//
// with v̄ the midpoint velocity of the smooth motion, D the joint damping,
// and the contact impulses λ from the complementarity problem.
func (s *Sim) Step() error {
	m, lay, kin := s.model, s.lay, s.kin
	h := s.set.TimeStep

	var clock time.Time
	if s.Profile != nil {
		clock = time.Now()
	}
	copy(s.q0, s.q)
	copy(s.v0, s.v)
	if err := s.factorMass(); err != nil {
		return err
	}

	// Free velocity: the smooth dynamics, with velocity-product terms at
	// the midpoint of the step. A tangent sweep or a tape keeps the
	// Newton–Euler passes.
	keep := s.passRec
	if keep == nil && s.tan != nil {
		keep = &s.tan.passes
	}
	copy(s.vfree, s.v)
	for pass := 0; pass <= midpointPasses; pass++ {
		for i := range s.rhs {
			s.rhs[i] = 0.5 * (s.v[i] + s.vfree[i])
		}
		if pass == 0 {
			copy(s.rhs, s.v)
		}
		kin.bias(m, lay, s.rhs, s.t, s.c)
		if keep != nil {
			keep[pass].take(m, lay, kin, s.rhs)
		}
		for i := range s.rhs {
			s.rhs[i] = h * (s.tau[i] - s.c[i] - (s.damp[i]+h*s.kp[i])*s.v[i])
		}
		s.solveMass(s.rhs)
		for i := range s.vfree {
			s.vfree[i] = s.v[i] + s.rhs[i]
		}
		copy(s.vpass[pass], s.vfree)
	}

	if s.Profile != nil {
		s.lap(&s.Profile.Dynamics, &clock)
	}
	s.collide()
	s.findLimits()
	if s.Profile != nil {
		s.lap(&s.Profile.Collision, &clock)
	}
	if len(s.contacts) == 0 && len(s.limits) == 0 {
		copy(s.v, s.vfree)
		s.lastStats = contact.SolveStats{}
	} else if err := s.solveContacts(); err != nil {
		return err
	}
	if s.Profile != nil {
		s.lap(&s.Profile.Contact, &clock)
	}
	s.integrate()
	if s.tan != nil {
		if err := s.tan.step(s); err != nil {
			return s.stepError(err)
		}
	}
	s.t = float64(s.step+1) * h
	s.step++
	kin.update(m, lay, s.q, s.v)
	if s.Profile != nil {
		s.lap(&s.Profile.Dynamics, &clock)
	}
	return nil
}

func (s *Sim) stepError(err error) error {
	seen := map[int]bool{}
	var bodies []string
	for _, c := range s.contacts {
		for _, b := range [2]int{c.A, c.B} {
			if b >= 0 && !seen[b] {
				seen[b] = true
				bodies = append(bodies, s.model.Bodies[b].Name)
			}
		}
	}
	if len(bodies) == 0 {
		for _, b := range s.model.Bodies {
			bodies = append(bodies, b.Name)
		}
	}
	return &StepError{Step: s.step + 1, Time: s.t + s.set.TimeStep, Bodies: bodies, Contacts: len(s.contacts), Err: err}
}

// adjacent reports whether bodies a and b are joined by a joint; such pairs
// do not collide.
func (s *Sim) adjacent(a, b int) bool {
	return (a >= 0 && s.lay.bodies[a].parent == b && b >= 0) || (b >= 0 && s.lay.bodies[b].parent == a && a >= 0)
}

// collide finds this step's contacts.
func (s *Sim) collide() {
	margin := s.set.Margin
	for i := range s.geoms {
		g := &s.geoms[i]
		if g.owner < 0 {
			s.geomPoses[i] = g.shape.Local
		} else {
			s.geomPoses[i] = s.kin.pose[g.owner].Mul(g.shape.Local)
		}
		s.boxes[i] = contact.Bounds(g.shape, s.geomPoses[i], margin)
	}
	s.pairs = s.bp.Pairs(s.boxes, s.pairs[:0])
	s.contacts = s.contacts[:0]
	for _, p := range s.pairs {
		ga, gb := &s.geoms[p[0]], &s.geoms[p[1]]
		if ga.owner == gb.owner || s.adjacent(ga.owner, gb.owner) {
			continue
		}
		s.pts = contact.Collide(ga.shape, s.geomPoses[p[0]], gb.shape, s.geomPoses[p[1]], margin, s.pts[:0])
		props := s.matProps[ga.material][gb.material]
		for _, pt := range s.pts {
			t1, t2 := tangents(pt.Normal)
			s.contacts = append(s.contacts, Contact{
				A: ga.owner, B: gb.owner, NameA: ga.name, NameB: gb.name,
				Point: pt, Tangent1: t1, Tangent2: t2,
				Friction: props.Friction, Restitution: props.Restitution,
				geomA: int(p[0]), geomB: int(p[1]), pair: s.matPair[ga.material][gb.material],
			})
		}
	}
}

// tangents returns an orthonormal basis (t1, t2) of the plane normal to the
// unit vector n, a smooth function of n away from n.z = −1 (Duff et al.,
// "Building an Orthonormal Basis, Revisited", JCGT 2017).
func tangents(n r3.Vec) (r3.Vec, r3.Vec) {
	sign := math.Copysign(1, n.Z)
	a := -1 / (sign + n.Z)
	b := n.X * n.Y * a
	t1 := r3.Vec{X: 1 + sign*n.X*n.X*a, Y: sign * b, Z: -sign * n.X}
	t2 := r3.Vec{X: b, Y: sign + n.Y*n.Y*a, Z: -n.Y}
	return t1, t2
}

// jacobianRow writes into row the map from generalized velocity to the
// velocity of body b's material point at world point p along dir, scaled by
// sign, adding to what row holds.
func (s *Sim) jacobianRow(row []float64, b int, p, dir r3.Vec, sign float64) {
	for ; b >= 0; b = s.lay.bodies[b].parent {
		bl := &s.lay.bodies[b]
		for d := 0; d < bl.nv; d++ {
			row[bl.vOff+d] += sign * r3.Dot(dir, s.kin.s[bl.vOff+d].pointVel(p))
		}
	}
}

// rowRanges returns the velocity-coordinate ranges [start, end) of the
// distinct trees that contact-problem row r touches; the row's Jacobian is
// zero elsewhere. They are set by solveContacts.
func (s *Sim) rowRanges(r int) [][2]int {
	return s.ranges[r].r[:s.ranges[r].n]
}

// addRowsT adds Σ_r x_r row_r to dst for contact-problem rows stored like
// the Jacobian (one row of nv per entry of x), visiting only the
// coordinates each row's trees span.
func (s *Sim) addRowsT(rows, x, dst []float64) {
	nv := s.lay.nv
	for r, xr := range x {
		if xr == 0 {
			continue
		}
		row := rows[r*nv : (r+1)*nv]
		for _, rg := range s.rowRanges(r) {
			for d := rg[0]; d < rg[1]; d++ {
				dst[d] += row[d] * xr
			}
		}
	}
}

// mulRows writes row_r · v into dst[r] for rows stored like the Jacobian.
func (s *Sim) mulRows(rows, v, dst []float64) {
	nv := s.lay.nv
	for r := range dst {
		row := rows[r*nv : (r+1)*nv]
		var sum float64
		for _, rg := range s.rowRanges(r) {
			for d := rg[0]; d < rg[1]; d++ {
				sum += row[d] * v[d]
			}
		}
		dst[r] = sum
	}
}

// rowRange holds up to two coordinate ranges of a row.
type rowRange struct {
	r [2][2]int
	n int
}

// setRowRanges fills s.ranges from s.rowTrees.
func (s *Sim) setRowRanges(n int) {
	if cap(s.ranges) < n {
		s.ranges = make([]rowRange, n, 2*n)
	}
	s.ranges = s.ranges[:n]
	for r := 0; r < n; r++ {
		rt := s.rowTrees[r]
		rr := &s.ranges[r]
		rr.n = 0
		for i, t := range rt {
			if t < 0 || (i == 1 && t == rt[0]) {
				continue
			}
			tr := &s.lay.trees[t]
			rr.r[rr.n] = [2]int{tr.vOff, tr.vOff + tr.nv}
			rr.n++
		}
	}
}

func (s *Sim) treeOf(b int) int {
	if b < 0 {
		return -1
	}
	return s.lay.bodies[b].tree
}

// solveContacts builds and solves the contact problem and sets v.
func (s *Sim) solveContacts() error {
	nc := len(s.contacts)
	n := 3*nc + len(s.limits)
	s.buildRows(n)
	s.buildDelassus(n)
	s.prob.W = &s.w
	s.prob.NumCones = nc
	stats, err := s.solver.Solve(&s.prob, s.set.Solver, s.lambda)
	s.lastStats = stats
	if err != nil {
		return s.stepError(err)
	}
	// v⁺ = v_free + A⁻¹ Jᵀ λ; u = W λ + B.
	clear(s.rhs)
	s.addRowsT(s.jac, s.lambda[:n], s.rhs)
	s.solveMass(s.rhs)
	for d := range s.v {
		s.v[d] = s.vfree[d] + s.rhs[d]
	}
	for i := 0; i < n; i++ {
		u := s.prob.B[i]
		for j := 0; j < n; j++ {
			u += s.w.At(i, j) * s.lambda[j]
		}
		s.u[i] = u
	}
	for k := range s.contacts {
		c := &s.contacts[k]
		copy(c.Impulse[:], s.lambda[3*k:3*k+3])
		copy(c.Velocity[:], s.u[3*k:3*k+3])
		c.Velocity[0] += c.Target
	}
	for k := range s.limits {
		s.limits[k].force = s.lambda[3*nc+k]
	}
	return nil
}

// sizeRows sizes the row workspaces for n rows.
func (s *Sim) sizeRows(n int) {
	nv := s.lay.nv
	s.jac = grow(s.jac, n*nv)
	s.z = grow(s.z, n*nv)
	s.lambda = grow(s.lambda, n)
	s.u = grow(s.u, n)
	s.prob.B = grow(s.prob.B, n)
	s.prob.Mu = grow(s.prob.Mu, len(s.contacts))
	if cap(s.rowTrees) < n {
		s.rowTrees = make([][2]int, n)
	}
	s.rowTrees = s.rowTrees[:n]
}

// restoreRows sets the n rows' Jacobian from jac and their trees and
// ranges from the contacts and limits, as buildRows left them.
func (s *Sim) restoreRows(n int, jac []float64) {
	s.sizeRows(n)
	copy(s.jac, jac)
	nc := len(s.contacts)
	for k := range s.contacts {
		c := &s.contacts[k]
		for r := 0; r < 3; r++ {
			s.rowTrees[3*k+r] = [2]int{s.treeOf(c.A), s.treeOf(c.B)}
		}
	}
	for k := range s.limits {
		t := s.treeOf(s.limits[k].body)
		s.rowTrees[3*nc+k] = [2]int{t, t}
	}
	s.setRowRanges(n)
}

// buildRows fills the n contact-problem rows of the Jacobian, the trees and
// coordinate ranges they touch, the contacts' normal velocity targets and
// friction coefficients.
func (s *Sim) buildRows(n int) {
	nv := s.lay.nv
	h := s.set.TimeStep
	s.sizeRows(n)
	for i := range s.jac {
		s.jac[i] = 0
	}
	for k := range s.contacts {
		c := &s.contacts[k]
		p := c.Point.Pos
		for r, dir := range [3]r3.Vec{c.Point.Normal, c.Tangent1, c.Tangent2} {
			row := s.jac[(3*k+r)*nv : (3*k+r+1)*nv]
			s.jacobianRow(row, c.B, p, dir, 1)
			s.jacobianRow(row, c.A, p, dir, -1)
			s.rowTrees[3*k+r] = [2]int{s.treeOf(c.A), s.treeOf(c.B)}
		}
		// Normal velocity target: close at most the gap in one step, remove
		// a bounded share of any penetration, and bounce by Newton's law.
		gap := c.Point.Gap
		target := s.gapTarget(gap)
		var pre float64
		for _, b := range [2]int{c.A, c.B} {
			if b >= 0 {
				vel := s.kin.vel[b].pointVel(p)
				if b == c.B {
					pre += r3.Dot(c.Point.Normal, vel)
				} else {
					pre -= r3.Dot(c.Point.Normal, vel)
				}
			}
		}
		c.pre, c.bounce = pre, false
		if pre < -s.set.BounceThreshold && gap+h*pre < 0 && -c.Restitution*pre > target {
			target = -c.Restitution * pre
			c.bounce = true
		}
		c.Target = target
		s.prob.Mu[k] = c.Friction
	}
	for k := range s.limits {
		l := &s.limits[k]
		r := 3*len(s.contacts) + k
		s.jac[r*nv+l.dof] = l.sign
		t := s.treeOf(l.body)
		s.rowTrees[r] = [2]int{t, t}
	}
	s.setRowRanges(n)
}

// buildDelassus computes the Delassus operator W = J A⁻¹ Jᵀ and
// B = J v_free − target for the rows of buildRows.
func (s *Sim) buildDelassus(n int) {
	nv := s.lay.nv
	nc := len(s.contacts)
	// Z = L⁻¹ Jᵀ row by row (A = L Lᵀ per tree), by forward substitution
	// only in the trees a row touches; then W = Z Zᵀ, summed over the trees
	// two rows share, is symmetric and positive semidefinite by
	// construction.
	copy(s.z, s.jac)
	for r := 0; r < n; r++ {
		zr := s.z[r*nv : (r+1)*nv]
		for i, t := range s.rowTrees[r] {
			if t < 0 || (i == 1 && t == s.rowTrees[r][0]) {
				continue
			}
			tr := &s.lay.trees[t]
			cholForward(s.chol[tr.massOffset:tr.massOffset+tr.nv*tr.nv], tr.nv, zr[tr.vOff:tr.vOff+tr.nv])
		}
	}
	// B = J v_free − target.
	s.w.Reset()
	s.w.ReuseAsSym(n)
	raw := s.w.RawSymmetric()
	for i := 0; i < n; i++ {
		zi := s.z[i*nv : (i+1)*nv]
		ri := &s.ranges[i]
		wi := raw.Data[i*raw.Stride : i*raw.Stride+n]
		for j := i; j < n; j++ {
			zj := s.z[j*nv : (j+1)*nv]
			rj := &s.ranges[j]
			var sum float64
			for a := 0; a < ri.n; a++ {
				rg := ri.r[a]
				if rj.r[0][0] != rg[0] && (rj.n < 2 || rj.r[1][0] != rg[0]) {
					continue
				}
				for d := rg[0]; d < rg[1]; d++ {
					sum += zi[d] * zj[d]
				}
			}
			wi[j] = sum
		}
		var b float64
		ji := s.jac[i*nv : (i+1)*nv]
		for a := 0; a < ri.n; a++ {
			rg := ri.r[a]
			for d := rg[0]; d < rg[1]; d++ {
				b += ji[d] * s.vfree[d]
			}
		}
		switch {
		case i >= 3*nc:
			b -= s.gapTarget(s.limits[i-3*nc].gap)
		case i%3 == 0:
			b -= s.contacts[i/3].Target
		}
		s.prob.B[i] = b
	}
}

// gapTarget returns the least normal velocity a row may have: it may close
// a positive gap within the step, and must remove a bounded share of a
// negative one.
func (s *Sim) gapTarget(gap float64) float64 {
	if gap < 0 {
		return math.Min(-s.set.CorrectionRate*gap/s.set.TimeStep, s.set.MaxCorrection)
	}
	return -gap / s.set.TimeStep
}

// findLimits collects the joint limits within the margin of being reached.
func (s *Sim) findLimits() {
	s.limits = s.limits[:0]
	for i := range s.model.Bodies {
		j := &s.model.Bodies[i].Joint
		if !j.Limited {
			continue
		}
		bl := &s.lay.bodies[i]
		q := s.q[bl.qOff]
		if gap := q - j.Lower; gap < s.set.Margin {
			s.limits = append(s.limits, limitRow{body: i, dof: bl.vOff, sign: 1, gap: gap})
		}
		if gap := j.Upper - q; gap < s.set.Margin {
			s.limits = append(s.limits, limitRow{body: i, dof: bl.vOff, sign: -1, gap: gap})
		}
	}
}

// integrate advances q by h v⁺ on each joint's manifold.
func (s *Sim) integrate() {
	h := s.set.TimeStep
	for i := range s.model.Bodies {
		bl := &s.lay.bodies[i]
		q := s.q[bl.qOff : bl.qOff+bl.nq]
		v := s.v[bl.vOff : bl.vOff+bl.nv]
		switch s.model.Bodies[i].Joint.Kind {
		case Free:
			q[0] += h * v[3]
			q[1] += h * v[4]
			q[2] += h * v[5]
			rot := contact.Quat{W: q[3], X: q[4], Y: q[5], Z: q[6]}
			rot = rot.Mul(contact.QuatExp(r3.Scale(h, r3.Vec{X: v[0], Y: v[1], Z: v[2]}))).Normalize()
			q[3], q[4], q[5], q[6] = rot.W, rot.X, rot.Y, rot.Z
		case Ball:
			rot := contact.Quat{W: q[0], X: q[1], Y: q[2], Z: q[3]}
			rot = rot.Mul(contact.QuatExp(r3.Scale(h, r3.Vec{X: v[0], Y: v[1], Z: v[2]}))).Normalize()
			q[0], q[1], q[2], q[3] = rot.W, rot.X, rot.Y, rot.Z
		case Revolute, Prismatic:
			q[0] += h * v[0]
		}
	}
}

// grow returns s resized to n, reusing its storage when it can.
func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n, 2*n)
	}
	return s[:n]
}
