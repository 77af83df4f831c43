package sim

import (
	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// StandardGravity is g₀ = 9.80665 m/s² (3rd CGPM, 1901; ISO 80000-3).
const StandardGravity = 9.80665

// Model is everything a rollout needs that does not change with time: the
// bodies and the joints that hold them in kinematic trees, the static world
// geometry, the material pairs, the external loads and the gravity vector.
//
// Bodies are ordered so that a body's parent comes before it (Bodies[i].
// Joint.Parent < i); a loose object is a one-body tree on a free joint.
type Model struct {
	Gravity   r3.Vec
	Bodies    []Body
	Static    []StaticShape
	Materials Materials
	Loads     []Load
	// Actuators drive single-DOF joints; Controller, if not nil, commands
	// them from the state (one effort per actuator, in Actuators order).
	Actuators  []Actuator
	Controller Controller
}

// Body is one rigid body. Its frame is the one its shapes, centre of mass and
// inertia are expressed in.
type Body struct {
	Name string
	// Mass in kg, COM the centre of mass in the body frame, and Inertia the
	// inertia tensor about the centre of mass in body axes (kg·m²).
	Mass    float64
	COM     r3.Vec
	Inertia contact.Mat3
	Shapes  []contact.Shape
	// Material names the surface material of all of the body's shapes.
	Material string
	// Joint attaches the body to its parent.
	Joint Joint
	// Start is the initial state of a body on a free joint: the pose of the
	// body frame in the world, and the world-frame linear velocity of the
	// body-frame origin and angular velocity.
	Start BodyStart
}

// BodyStart is the initial pose and velocity of a free body.
type BodyStart struct {
	Pose    contact.Pose
	Linear  r3.Vec
	Angular r3.Vec
}

// JointKind is the type of a joint.
type JointKind int

// The joint types, named by the motion they allow the child relative to the
// parent.
const (
	Free JointKind = iota // 6 DOF: position and unit quaternion
	Revolute
	Prismatic
	Fixed
	Ball // 3 DOF: unit quaternion
)

var jointKindNames = [...]string{"free", "revolute", "prismatic", "fixed", "ball"}

func (k JointKind) String() string {
	if k < 0 || int(k) >= len(jointKindNames) {
		return "unknown"
	}
	return jointKindNames[k]
}

// ParseJointKind returns the kind named s and whether s names one.
func ParseJointKind(s string) (JointKind, bool) {
	for i, n := range jointKindNames {
		if n == s {
			return JointKind(i), true
		}
	}
	return 0, false
}

// NumQ returns the number of position coordinates of the joint kind.
func (k JointKind) NumQ() int {
	switch k {
	case Free:
		return 7
	case Ball:
		return 4
	case Revolute, Prismatic:
		return 1
	}
	return 0
}

// NumV returns the number of velocity coordinates of the joint kind.
func (k JointKind) NumV() int {
	switch k {
	case Free:
		return 6
	case Ball:
		return 3
	case Revolute, Prismatic:
		return 1
	}
	return 0
}

// Joint connects a body to its parent body (Parent = -1: the world).
// At zero joint coordinates the child frame coincides with Frame, the joint
// frame expressed in the parent frame; the joint then moves the child
// relative to that frame (rotation about or translation along Axis, given in
// the joint frame).
type Joint struct {
	Name   string
	Kind   JointKind
	Parent int
	Frame  contact.Pose
	Axis   r3.Vec
	// Limited joints keep Lower ≤ q ≤ Upper as one-sided contact rows.
	Limited      bool
	Lower, Upper float64
	// Damping (N·m·s/rad or N·s/m), Coulomb Friction (N·m or N) and rotor
	// Armature inertia added to the joint's diagonal of the mass matrix.
	Damping  float64
	Friction float64
	Armature float64
	// Position and Velocity are the initial coordinates of a one-DOF joint.
	Position float64
	Velocity float64
	// Rotation and Spin are the initial state of a ball joint: the child
	// frame's rotation relative to the joint frame (the zero value is the
	// identity) and the child's angular velocity relative to the parent,
	// in joint-frame axes (rad/s).
	Rotation contact.Quat
	Spin     r3.Vec
}

// StaticShape is world-fixed geometry (floors, tables, inclines).
type StaticShape struct {
	Name     string
	Shape    contact.Shape
	Material string
}

// Materials resolves the friction and restitution of a contact from the
// materials of the two surfaces.
type Materials struct {
	Default PairProps
	Pairs   []MaterialPair
}

// PairProps are the contact properties of a pair of materials.
type PairProps struct {
	// Friction is the Coulomb coefficient μ ≥ 0.
	Friction float64
	// Restitution is Newton's coefficient e ∈ [0, 1].
	Restitution float64
}

// MaterialPair gives the properties of one unordered pair of materials.
type MaterialPair struct {
	A, B string
	PairProps
}

// Lookup returns the properties of the unordered pair (a, b), or the default.
func (m *Materials) Lookup(a, b string) PairProps {
	for _, p := range m.Pairs {
		if (p.A == a && p.B == b) || (p.A == b && p.B == a) {
			return p.PairProps
		}
	}
	return m.Default
}

// Load is an external force and torque on a body, in world axes, the force
// acting at Point (body frame). Without a Schedule it is constant; with one
// its value is interpolated linearly between keys and held outside them.
type Load struct {
	Body     int
	Point    r3.Vec
	Force    r3.Vec
	Torque   r3.Vec
	Schedule []LoadKey
}

// LoadKey is the value of a scheduled load at time T.
type LoadKey struct {
	T      float64
	Force  r3.Vec
	Torque r3.Vec
}

// At returns the force and torque of the load at time t.
func (l *Load) At(t float64) (force, torque r3.Vec) {
	s := l.Schedule
	switch {
	case len(s) == 0:
		return l.Force, l.Torque
	case t <= s[0].T:
		return s[0].Force, s[0].Torque
	case t >= s[len(s)-1].T:
		return s[len(s)-1].Force, s[len(s)-1].Torque
	}
	i := 1
	for s[i].T < t {
		i++
	}
	a, b := s[i-1], s[i]
	f := (t - a.T) / (b.T - a.T)
	lerp := func(x, y r3.Vec) r3.Vec { return r3.Add(x, r3.Scale(f, r3.Sub(y, x))) }
	return lerp(a.Force, b.Force), lerp(a.Torque, b.Torque)
}

// Settings control time stepping. The zero value selects the defaults
// documented on each field.
type Settings struct {
	// TimeStep h in seconds (default 1e-3).
	TimeStep float64
	// Duration of a rollout in seconds.
	Duration float64
	// FrameEvery writes one frame to run files every that many steps
	// (default 1).
	FrameEvery int
	// Margin: contacts are included when their gap is below this many
	// metres, so that they act in the step that would close them
	// (default 5e-3).
	Margin float64
	// CorrectionRate is the fraction of a penetration removed per step
	// (default 0.2), and MaxCorrection bounds the separating speed it may
	// add in m/s (default 0.1).
	CorrectionRate float64
	MaxCorrection  float64
	// BounceThreshold: restitution applies only to approach speeds above
	// this, in m/s (default 0.05), so resting contacts do not jitter.
	BounceThreshold float64
	// Solver settings for the per-step contact problem.
	Solver contact.SolverSettings
}

// WithDefaults returns s with zero fields replaced by their defaults.
func (s Settings) WithDefaults() Settings {
	if s.TimeStep == 0 {
		s.TimeStep = 1e-3
	}
	if s.FrameEvery == 0 {
		s.FrameEvery = 1
	}
	if s.Margin == 0 {
		s.Margin = 5e-3
	}
	if s.CorrectionRate == 0 {
		s.CorrectionRate = 0.2
	}
	if s.MaxCorrection == 0 {
		s.MaxCorrection = 0.1
	}
	if s.BounceThreshold == 0 {
		s.BounceThreshold = 0.05
	}
	s.Solver = s.Solver.WithDefaults()
	return s
}
