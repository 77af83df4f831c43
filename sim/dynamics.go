package sim

import (
	"fmt"
	"math"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// bodyLayout places one body's joint coordinates in the state vectors.
type bodyLayout struct {
	parent     int
	tree       int
	qOff, nq   int
	vOff, nv   int
	jointAxis  r3.Vec // unit axis of a revolute or prismatic joint, joint frame
	jointFrame contact.Pose
}

// treeLayout is one kinematic tree: its bodies and its contiguous range of
// velocity coordinates. The mass matrix is block diagonal by tree.
type treeLayout struct {
	bodies     []int
	vOff, nv   int
	massOffset int // offset of this tree's nv×nv block in the mass storage
}

// layout is the compiled structure of a model.
type layout struct {
	bodies []bodyLayout
	trees  []treeLayout
	nq, nv int
	// massLen is the total size of the per-tree dense mass blocks.
	massLen int
}

func compileLayout(m *Model) (*layout, error) {
	n := len(m.Bodies)
	lay := &layout{bodies: make([]bodyLayout, n)}
	root := make([]int, n)
	for i := range m.Bodies {
		b := &m.Bodies[i]
		j := &b.Joint
		if j.Parent >= i || j.Parent < -1 {
			return nil, fmt.Errorf("body %q: parent index %d must come before it (or be -1 for the world)", b.Name, j.Parent)
		}
		if j.Kind == Free && j.Parent != -1 {
			return nil, fmt.Errorf("body %q: a free joint must attach to the world", b.Name)
		}
		if j.Kind < Free || j.Kind > Ball {
			return nil, fmt.Errorf("body %q: unknown joint kind %d", b.Name, j.Kind)
		}
		bl := &lay.bodies[i]
		bl.parent = j.Parent
		bl.nq, bl.nv = j.Kind.NumQ(), j.Kind.NumV()
		bl.jointFrame = j.Frame
		if bl.jointFrame.Rot == (contact.Quat{}) {
			bl.jointFrame.Rot = contact.IdentityQuat
		}
		if j.Kind == Revolute || j.Kind == Prismatic {
			a := r3.Norm(j.Axis)
			if !(a > 0) {
				return nil, fmt.Errorf("body %q: joint %q needs a non-zero axis", b.Name, j.Name)
			}
			bl.jointAxis = r3.Scale(1/a, j.Axis)
		}
		if j.Parent == -1 {
			root[i] = i
		} else {
			root[i] = root[j.Parent]
		}
	}
	// Trees in order of their roots; bodies keep model order within a tree.
	treeOf := map[int]int{}
	for i := range m.Bodies {
		t, ok := treeOf[root[i]]
		if !ok {
			t = len(lay.trees)
			treeOf[root[i]] = t
			lay.trees = append(lay.trees, treeLayout{})
		}
		lay.bodies[i].tree = t
		lay.trees[t].bodies = append(lay.trees[t].bodies, i)
	}
	for t := range lay.trees {
		tr := &lay.trees[t]
		tr.vOff = lay.nv
		for _, i := range tr.bodies {
			bl := &lay.bodies[i]
			bl.qOff, bl.vOff = lay.nq, lay.nv
			lay.nq += bl.nq
			lay.nv += bl.nv
		}
		tr.nv = lay.nv - tr.vOff
		tr.massOffset = lay.massLen
		lay.massLen += tr.nv * tr.nv
	}
	return lay, nil
}

// jointTransform returns the pose of the child frame relative to the joint
// frame for the joint coordinates q.
func jointTransform(kind JointKind, axis r3.Vec, q []float64) contact.Pose {
	switch kind {
	case Free:
		return contact.Pose{Pos: r3.Vec{X: q[0], Y: q[1], Z: q[2]}, Rot: contact.Quat{W: q[3], X: q[4], Y: q[5], Z: q[6]}}
	case Ball:
		return contact.Pose{Rot: contact.Quat{W: q[0], X: q[1], Y: q[2], Z: q[3]}}
	case Revolute:
		return contact.Pose{Rot: contact.QuatFromAxisAngle(axis, q[0])}
	case Prismatic:
		return contact.Pose{Pos: r3.Scale(q[0], axis), Rot: contact.IdentityQuat}
	}
	return contact.IdentityPose
}

// kinematics holds the quantities of one configuration and velocity.
type kinematics struct {
	pose []contact.Pose // world pose of each body frame
	s    []motion       // world motion subspace column of each velocity coordinate
	vel  []motion       // world spatial velocity of each body
	com  []r3.Vec       // world centre of mass of each body
	in   []inertia      // world spatial inertia of each body
	ic   []inertia      // composite inertias (CRBA workspace)
	bvel []motion       // RNEA workspace
	acc  []motion       // RNEA workspace
	frc  []force        // RNEA workspace
}

func newKinematics(nb, nv int) *kinematics {
	return &kinematics{
		pose: make([]contact.Pose, nb),
		s:    make([]motion, nv),
		vel:  make([]motion, nb),
		com:  make([]r3.Vec, nb),
		in:   make([]inertia, nb),
		ic:   make([]inertia, nb),
		bvel: make([]motion, nb),
		acc:  make([]motion, nb),
		frc:  make([]force, nb),
	}
}

// update computes poses, motion subspaces, velocities and inertias from the
// state (q, v).
func (k *kinematics) update(m *Model, lay *layout, q, v []float64) {
	for i := range m.Bodies {
		b := &m.Bodies[i]
		bl := &lay.bodies[i]
		xj := jointTransform(b.Joint.Kind, bl.jointAxis, q[bl.qOff:bl.qOff+bl.nq])
		local := bl.jointFrame.Mul(xj)
		var parentVel motion
		if bl.parent >= 0 {
			k.pose[i] = k.pose[bl.parent].Mul(local)
			parentVel = k.vel[bl.parent]
		} else {
			k.pose[i] = local
		}
		pose := k.pose[i]
		o := pose.Pos
		rot := pose.Rot
		// Child-frame motion subspace columns mapped to world Plücker
		// coordinates: ω_w = R ω, v_O = R v − ω_w × o.
		col := func(d int, w, lin r3.Vec) {
			ww := rot.Rotate(w)
			k.s[bl.vOff+d] = motion{w: ww, v: r3.Sub(rot.Rotate(lin), r3.Cross(ww, o))}
		}
		var zero r3.Vec
		switch b.Joint.Kind {
		case Free:
			// Angular coordinates about the body axes; linear coordinates
			// are the world velocity of the body-frame origin, so their
			// columns are constant world translations. Integrating
			// q⁺ = q ⊕ h v⁺ then moves every point exactly as J(q) v⁺
			// predicts to first order.
			col(0, r3.Vec{X: 1}, zero)
			col(1, r3.Vec{Y: 1}, zero)
			col(2, r3.Vec{Z: 1}, zero)
			k.s[bl.vOff+3] = motion{v: r3.Vec{X: 1}}
			k.s[bl.vOff+4] = motion{v: r3.Vec{Y: 1}}
			k.s[bl.vOff+5] = motion{v: r3.Vec{Z: 1}}
		case Ball:
			col(0, r3.Vec{X: 1}, zero)
			col(1, r3.Vec{Y: 1}, zero)
			col(2, r3.Vec{Z: 1}, zero)
		case Revolute:
			// The axis is fixed in the joint frame and so in the child frame.
			col(0, bl.jointAxis, zero)
		case Prismatic:
			col(0, zero, bl.jointAxis)
		}
		vel := parentVel
		for d := 0; d < bl.nv; d++ {
			vel = vel.add(k.s[bl.vOff+d].scale(v[bl.vOff+d]))
		}
		k.vel[i] = vel
		c := pose.Apply(b.COM)
		k.com[i] = c
		r := rot.Mat()
		k.in[i] = bodyInertia(b.Mass, c, r.Mul(b.Inertia).Mul(r.T()))
	}
}

// jointDriven reports whether joints of kind k take armature, damping and
// Coulomb friction: revolute, prismatic and ball joints (on a ball joint
// they act isotropically on the relative angular velocity).
func jointDriven(k JointKind) bool { return k == Revolute || k == Prismatic || k == Ball }

// composite sums the bodies' inertias into the composite inertias of their
// subtrees (k.ic).
func (k *kinematics) composite(m *Model, lay *layout) {
	copy(k.ic, k.in)
	for i := len(m.Bodies) - 1; i >= 0; i-- {
		if p := lay.bodies[i].parent; p >= 0 {
			k.ic[p] = k.ic[p].add(k.ic[i])
		}
	}
}

// massMatrix fills the per-tree dense blocks of the joint-space mass matrix
// by the composite-rigid-body algorithm (Featherstone, Rigid Body Dynamics
// Algorithms, §6.2), adding armature to the diagonal.
func (k *kinematics) massMatrix(m *Model, lay *layout, mass []float64) {
	for i := range mass {
		mass[i] = 0
	}
	k.composite(m, lay)
	for i := range m.Bodies {
		bl := &lay.bodies[i]
		tr := &lay.trees[bl.tree]
		blk := mass[tr.massOffset : tr.massOffset+tr.nv*tr.nv]
		for d := 0; d < bl.nv; d++ {
			di := bl.vOff + d - tr.vOff
			f := k.ic[i].apply(k.s[bl.vOff+d])
			for j := i; j >= 0; j = lay.bodies[j].parent {
				jl := &lay.bodies[j]
				for e := 0; e < jl.nv; e++ {
					ei := jl.vOff + e - tr.vOff
					h := k.s[jl.vOff+e].dot(f)
					blk[ei*tr.nv+di] = h
					blk[di*tr.nv+ei] = h
				}
			}
		}
		if arm := m.Bodies[i].Joint.Armature; arm != 0 && jointDriven(m.Bodies[i].Joint.Kind) {
			for d := 0; d < bl.nv; d++ {
				di := bl.vOff + d - tr.vOff
				blk[di*tr.nv+di] += arm
			}
		}
	}
}

// bias computes c(q, v) − τ_ext by recursive Newton–Euler with zero joint
// acceleration (Featherstone, Rigid Body Dynamics Algorithms, §5.3):
// Coriolis, centrifugal and gyroscopic terms, gravity (as a fictitious base
// acceleration −g) and the external loads at time t, for the configuration of
// the last update and the joint velocities v. It writes one entry per
// velocity coordinate into c.
func (k *kinematics) bias(m *Model, lay *layout, v []float64, t float64, c []float64) {
	k.inverseDynamics(m, lay, v, nil, t, c)
}

// inverseDynamics computes M(q) a + c(q, v) − τ_ext, the joint efforts that
// produce joint accelerations a (nil: zero) by recursive Newton–Euler.
func (k *kinematics) inverseDynamics(m *Model, lay *layout, v, a []float64, t float64, c []float64) {
	g := m.Gravity
	for i := range m.Bodies {
		bl := &lay.bodies[i]
		var pa, pv motion
		if bl.parent >= 0 {
			pa, pv = k.acc[bl.parent], k.bvel[bl.parent]
		} else {
			pa = motion{v: r3.Scale(-1, g)}
		}
		// vj is the joint's twist; moving holds the part carried by columns
		// fixed in the child body, whose rate is vel ×ₘ S (Featherstone
		// §3.5). The free joint's world-fixed linear columns do not move.
		var vj, moving motion
		for d := 0; d < bl.nv; d++ {
			x := k.s[bl.vOff+d].scale(v[bl.vOff+d])
			vj = vj.add(x)
			if !(m.Bodies[i].Joint.Kind == Free && d >= 3) {
				moving = moving.add(x)
			}
		}
		vel := pv.add(vj)
		k.bvel[i] = vel
		k.acc[i] = pa.add(vel.crossM(moving))
		if a != nil {
			for d := 0; d < bl.nv; d++ {
				k.acc[i] = k.acc[i].add(k.s[bl.vOff+d].scale(a[bl.vOff+d]))
			}
		}
		k.frc[i] = k.in[i].apply(k.acc[i]).add(vel.crossF(k.in[i].apply(vel)))
	}
	for li := range m.Loads {
		l := &m.Loads[li]
		f, tq := l.At(t)
		p := k.pose[l.Body].Apply(l.Point)
		k.frc[l.Body] = k.frc[l.Body].sub(force{n: r3.Add(tq, r3.Cross(p, f)), f: f})
	}
	for i := len(m.Bodies) - 1; i >= 0; i-- {
		bl := &lay.bodies[i]
		for d := 0; d < bl.nv; d++ {
			c[bl.vOff+d] = k.s[bl.vOff+d].dot(k.frc[i])
		}
		if arm := m.Bodies[i].Joint.Armature; a != nil && arm != 0 && jointDriven(m.Bodies[i].Joint.Kind) {
			for d := 0; d < bl.nv; d++ {
				c[bl.vOff+d] += arm * a[bl.vOff+d]
			}
		}
		if p := bl.parent; p >= 0 {
			k.frc[p] = k.frc[p].add(k.frc[i])
		}
	}
}

// cholesky factors the n×n symmetric positive definite matrix a (row major)
// in place into its lower factor L, a = L Lᵀ. It reports false when a is not
// positive definite.
func cholesky(a []float64, n int) bool {
	for j := 0; j < n; j++ {
		s := a[j*n+j]
		for k := 0; k < j; k++ {
			s -= a[j*n+k] * a[j*n+k]
		}
		if !(s > 0) {
			return false
		}
		d := math.Sqrt(s)
		a[j*n+j] = d
		for i := j + 1; i < n; i++ {
			s := a[i*n+j]
			for k := 0; k < j; k++ {
				s -= a[i*n+k] * a[j*n+k]
			}
			a[i*n+j] = s / d
		}
	}
	return true
}

// cholForward solves L z = b in place (x holds b on entry).
func cholForward(l []float64, n int, x []float64) {
	for i := 0; i < n; i++ {
		s := x[i]
		for k := 0; k < i; k++ {
			s -= l[i*n+k] * x[k]
		}
		x[i] = s / l[i*n+i]
	}
}

// cholSolve solves L Lᵀ x = b in place (x holds b on entry).
func cholSolve(l []float64, n int, x []float64) {
	cholForward(l, n, x)
	for i := n - 1; i >= 0; i-- {
		s := x[i]
		for k := i + 1; k < n; k++ {
			s -= l[k*n+i] * x[k]
		}
		x[i] = s / l[i*n+i]
	}
}
