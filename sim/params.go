package sim

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// Param addresses one differentiable parameter of a model. Parameters are
// named QUANTITY:OWNER (or QUANTITY alone for global ones):
//
//	friction:A/B, restitution:A/B      material pair (order free)
//	mass:BODY                           kg
//	com.x:BODY, com.y:BODY, com.z:BODY  centre of mass in the body frame, m
//	inertia.x:BODY, inertia.y:BODY, inertia.z:BODY
//	                                    principal moments about body axes, kg·m²
//	damping:JOINT, joint-friction:JOINT, armature:JOINT
//	kp:ACTUATOR, kd:ACTUATOR            gains of the model's PD controller
//	gravity.x, gravity.y, gravity.z     m/s²
//	start.x … start.z:BODY              initial position of a free body, m
//	start.vx … start.vz:BODY            initial linear velocity, m/s
//	start.wx … start.wz:BODY            initial angular velocity, rad/s
//	start.q:JOINT, start.qd:JOINT       initial joint position and velocity
//	feedforward.K:ACTUATOR              row K (from 0) of the feedforward effort table
//	target.K:ACTUATOR                   row K (from 0) of the PD target table
//
// Inertia is addressed by its diagonal in body axes (the principal moments
// when the body axes are principal); off-diagonal terms stay fixed.
type Param struct {
	Name  string
	kind  paramKind
	index int    // body, joint-body, actuator or material-pair index
	axis  int    // component 0..2 for vector quantities
	a, b  string // material names for pair parameters
}

type paramKind int

const (
	pFriction paramKind = iota
	pRestitution
	pMass
	pCOM
	pInertia
	pDamping
	pJointFriction
	pArmature
	pKp
	pKd
	pGravity
	pStartPos
	pStartVel
	pStartAngVel
	pStartQ
	pStartQD
	pFeedforward // a feedforward effort table entry (control input)
	pTarget      // a PD target table entry (control input)
)

var axisNames = map[string]int{"x": 0, "y": 1, "z": 2}

// ParamHelp lists the parameter name forms, for error messages and --help.
const ParamHelp = "friction:A/B, restitution:A/B, mass:BODY, com.{x,y,z}:BODY, inertia.{x,y,z}:BODY, " +
	"damping:JOINT, joint-friction:JOINT, armature:JOINT, kp:ACTUATOR, kd:ACTUATOR, gravity.{x,y,z}, " +
	"start.{x,y,z,vx,vy,vz,wx,wy,wz}:BODY, start.{q,qd}:JOINT, feedforward.K:ACTUATOR, target.K:ACTUATOR"

// ParseParam resolves a parameter name against a model.
func ParseParam(m *Model, name string) (Param, error) {
	p := Param{Name: name}
	qty, owner, hasOwner := strings.Cut(name, ":")
	bad := func(format string, args ...any) (Param, error) {
		return Param{}, fmt.Errorf("parameter %q: %s", name, fmt.Sprintf(format, args...))
	}
	body := func() (int, error) {
		i := slices.IndexFunc(m.Bodies, func(b Body) bool { return b.Name == owner })
		if i < 0 {
			return 0, fmt.Errorf("parameter %q: no body named %q", name, owner)
		}
		return i, nil
	}
	joint := func(ball bool) (int, error) {
		i := slices.IndexFunc(m.Bodies, func(b Body) bool { return b.Joint.Name == owner && b.Joint.Name != "" })
		if i < 0 {
			return 0, fmt.Errorf("parameter %q: no joint named %q", name, owner)
		}
		switch k := m.Bodies[i].Joint.Kind; {
		case k == Ball && !ball:
			return 0, fmt.Errorf("parameter %q: joint %q is a ball joint; only its damping, joint friction and armature are parameters", name, owner)
		case k != Revolute && k != Prismatic && k != Ball:
			return 0, fmt.Errorf("parameter %q: joint %q is %s, which has no %s", name, owner, k, strings.SplitN(name, ":", 2)[0])
		}
		return i, nil
	}
	var err error
	base, comp, hasComp := strings.Cut(qty, ".")
	if hasComp && (base == "feedforward" || base == "target") {
		row, err := strconv.Atoi(comp)
		if err != nil || row < 0 {
			return bad("row %q is not a table row number (0, 1, ...)", comp)
		}
		act := slices.IndexFunc(m.Actuators, func(a Actuator) bool { return a.Name == owner })
		if act < 0 {
			return bad("no actuator named %q", owner)
		}
		var tb *Table
		if base == "feedforward" {
			ff, err := ffIn(m.Controller)
			if err != nil {
				return bad("%v", err)
			}
			p.kind, tb = pFeedforward, &ff.Efforts
		} else {
			pd, err := pdOf(m)
			if err != nil {
				return bad("%v", err)
			}
			p.kind, tb = pTarget, &pd.Targets
		}
		if row >= len(tb.Values) {
			return bad("the table has %d rows", len(tb.Values))
		}
		p.index, p.axis = act, row
		return p, nil
	}
	if hasComp {
		if _, ok := axisNames[comp]; !ok && base != "start" {
			return bad("component %q is not x, y or z", comp)
		}
		p.axis = axisNames[comp]
	}
	needOwner := base != "gravity"
	if needOwner != hasOwner || (hasOwner && owner == "") {
		if needOwner {
			return bad("needs an owner after ':' (forms: %s)", ParamHelp)
		}
		return bad("takes no owner")
	}
	switch {
	case base == "friction" || base == "restitution":
		a, b, ok := strings.Cut(owner, "/")
		if !ok || a == "" || b == "" {
			return bad("name the material pair as A/B")
		}
		p.kind, p.a, p.b = pFriction, a, b
		if base == "restitution" {
			p.kind = pRestitution
		}
		p.index = -1
		for i, mp := range m.Materials.Pairs {
			if (mp.A == a && mp.B == b) || (mp.A == b && mp.B == a) {
				p.index = i
			}
		}
		if p.index < 0 {
			return bad("the scene defines no material pair %s/%s (a default pair cannot be fitted per pair; add it to the scene's pairs)", a, b)
		}
	case base == "mass" && !hasComp:
		p.kind = pMass
		p.index, err = body()
	case base == "com" && hasComp:
		p.kind = pCOM
		p.index, err = body()
	case base == "inertia" && hasComp:
		p.kind = pInertia
		p.index, err = body()
	case base == "damping" || base == "joint-friction" || base == "armature":
		p.kind = map[string]paramKind{"damping": pDamping, "joint-friction": pJointFriction, "armature": pArmature}[base]
		p.index, err = joint(true)
	case base == "kp" || base == "kd":
		p.kind = pKp
		if base == "kd" {
			p.kind = pKd
		}
		if _, err := pdOf(m); err != nil {
			return bad("%v", err)
		}
		p.index = slices.IndexFunc(m.Actuators, func(a Actuator) bool { return a.Name == owner })
		if p.index < 0 {
			return bad("no actuator named %q", owner)
		}
	case base == "gravity" && hasComp:
		p.kind = pGravity
	case base == "start" && hasComp:
		switch comp {
		case "x", "y", "z":
			p.kind, p.axis = pStartPos, axisNames[comp]
		case "vx", "vy", "vz":
			p.kind, p.axis = pStartVel, axisNames[comp[1:]]
		case "wx", "wy", "wz":
			p.kind, p.axis = pStartAngVel, axisNames[comp[1:]]
		case "q", "qd":
			p.kind = pStartQ
			if comp == "qd" {
				p.kind = pStartQD
			}
			p.index, err = joint(false)
			return p, err
		default:
			return bad("unknown start component %q", comp)
		}
		p.index, err = body()
		if err == nil && m.Bodies[p.index].Joint.Kind != Free {
			return bad("body %q is not a free body; use start.q:JOINT", owner)
		}
	default:
		return bad("unknown quantity %q (forms: %s)", qty, ParamHelp)
	}
	return p, err
}

// ParseParams resolves several names, rejecting duplicates.
func ParseParams(m *Model, names []string) ([]Param, error) {
	var ps []Param
	seen := map[string]bool{}
	for _, n := range names {
		if seen[n] {
			return nil, fmt.Errorf("parameter %q given twice", n)
		}
		seen[n] = true
		p, err := ParseParam(m, n)
		if err != nil {
			return nil, err
		}
		ps = append(ps, p)
	}
	return ps, nil
}

// pdOf returns the model's PD controller, directly or inside a Sum.
func pdOf(m *Model) (*PD, error) { return pdIn(m.Controller) }

// ffIn returns the feedforward controller c is or contains.
func ffIn(c Controller) (*Feedforward, error) {
	switch c := c.(type) {
	case *Feedforward:
		return c, nil
	case Sum:
		for _, x := range c {
			if ff, ok := x.(*Feedforward); ok {
				return ff, nil
			}
		}
	}
	return nil, fmt.Errorf("the model has no feedforward controller")
}

// pdIn returns the PD controller c is or contains.
func pdIn(c Controller) (*PD, error) {
	switch c := c.(type) {
	case *PD:
		return c, nil
	case Sum:
		for _, x := range c {
			if pd, ok := x.(*PD); ok {
				return pd, nil
			}
		}
	}
	return nil, fmt.Errorf("the model has no PD controller")
}

// ref returns a pointer to the parameter's storage in m.
func (p *Param) ref(m *Model) *float64 {
	switch p.kind {
	case pFriction:
		return &m.Materials.Pairs[p.index].Friction
	case pRestitution:
		return &m.Materials.Pairs[p.index].Restitution
	case pMass:
		return &m.Bodies[p.index].Mass
	case pCOM:
		return axisRef(&m.Bodies[p.index].COM.X, &m.Bodies[p.index].COM.Y, &m.Bodies[p.index].COM.Z, p.axis)
	case pInertia:
		return &m.Bodies[p.index].Inertia[4*p.axis]
	case pDamping:
		return &m.Bodies[p.index].Joint.Damping
	case pJointFriction:
		return &m.Bodies[p.index].Joint.Friction
	case pArmature:
		return &m.Bodies[p.index].Joint.Armature
	case pKp, pKd:
		pd, _ := pdOf(m)
		if p.kind == pKp {
			return &pd.Kp[p.index]
		}
		return &pd.Kd[p.index]
	case pGravity:
		return axisRef(&m.Gravity.X, &m.Gravity.Y, &m.Gravity.Z, p.axis)
	case pStartPos:
		s := &m.Bodies[p.index].Start.Pose.Pos
		return axisRef(&s.X, &s.Y, &s.Z, p.axis)
	case pStartVel:
		s := &m.Bodies[p.index].Start.Linear
		return axisRef(&s.X, &s.Y, &s.Z, p.axis)
	case pStartAngVel:
		s := &m.Bodies[p.index].Start.Angular
		return axisRef(&s.X, &s.Y, &s.Z, p.axis)
	case pStartQ:
		return &m.Bodies[p.index].Joint.Position
	case pStartQD:
		return &m.Bodies[p.index].Joint.Velocity
	case pFeedforward:
		ff, _ := ffIn(m.Controller)
		return &ff.Efforts.Values[p.axis][p.index]
	case pTarget:
		pd, _ := pdOf(m)
		return &pd.Targets.Values[p.axis][p.index]
	}
	panic("sim: unknown parameter kind")
}

func axisRef(x, y, z *float64, i int) *float64 {
	switch i {
	case 0:
		return x
	case 1:
		return y
	}
	return z
}

// Get returns the parameter's value in m.
func (p *Param) Get(m *Model) float64 { return *p.ref(m) }

// Set writes v into m. Use it on a copy (CopyModel) when m is shared.
func (p *Param) Set(m *Model, v float64) { *p.ref(m) = v }

// Positive reports whether the parameter must stay positive to keep the
// model physical (masses, inertias, gains, coefficients).
func (p *Param) Positive() bool {
	switch p.kind {
	case pMass, pInertia:
		return true
	}
	return false
}

// NonNegative reports whether the parameter must not be negative.
func (p *Param) NonNegative() bool {
	switch p.kind {
	case pFriction, pRestitution, pDamping, pJointFriction, pArmature, pKp, pKd, pMass, pInertia:
		return true
	}
	return false
}

// CheckValue reports whether v is a valid value of the parameter.
func (p *Param) CheckValue(v float64) error {
	switch {
	case math.IsNaN(v) || math.IsInf(v, 0):
		return fmt.Errorf("parameter %s: %v is not finite", p.Name, v)
	case p.Positive() && !(v > 0):
		return fmt.Errorf("parameter %s: %g must be positive", p.Name, v)
	case p.NonNegative() && v < 0:
		return fmt.Errorf("parameter %s: %g must not be negative", p.Name, v)
	case p.kind == pRestitution && v > 1:
		return fmt.Errorf("parameter %s: %g must be at most 1", p.Name, v)
	}
	return nil
}

// CopyModel returns a deep copy of m that parameters can be set on without
// touching m. Shapes, names and tables that parameters never address are
// shared.
func CopyModel(m *Model) *Model {
	c := *m
	c.Bodies = slices.Clone(m.Bodies)
	c.Materials.Pairs = slices.Clone(m.Materials.Pairs)
	c.Loads = slices.Clone(m.Loads)
	c.Actuators = slices.Clone(m.Actuators)
	c.Controller = copyController(m.Controller)
	return &c
}

// copyController returns a copy of c that shares no mutable state with it
// (gains and the controllers' workspaces), so that simulators running
// concurrently on one model never share a controller.
func copyController(c Controller) Controller {
	switch x := c.(type) {
	case *PD:
		return &PD{Kp: slices.Clone(x.Kp), Kd: slices.Clone(x.Kd), Targets: x.Targets.clone()}
	case *Feedforward:
		return &Feedforward{Efforts: x.Efforts.clone()}
	case Sum:
		s := make(Sum, len(x))
		for i := range x {
			s[i] = copyController(x[i])
		}
		return s
	}
	return c
}
