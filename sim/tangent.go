package sim

import (
	"math"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// Forward tangent propagation through a step.
//
// Each tangent column carries (dq, dv), the derivative of the state with
// respect to one parameter, and that parameter's model tangent dm. A step's
// tangent differentiates every stage of Step exactly, by propagating
// tangents through the same recursions: kinematics, the composite-rigid-
// body mass matrix, recursive Newton–Euler, the controller, the midpoint
// passes, contact geometry (contact.PointTangent), the contact Jacobian,
// the Delassus operator, the contact solve (implicit differentiation of its
// optimality conditions, contact.Solver.JVP) and the integrator. No finite
// differences are involved.

// modelTangent is the derivative of the model's differentiable quantities
// along one parameter direction.
type modelTangent struct {
	gravity  r3.Vec
	mass     []float64
	com      []r3.Vec
	inertia  []contact.Mat3
	damping  []float64 // per body (its joint)
	friction []float64 // joint friction per body
	armature []float64
	kp, kd   []float64 // per actuator
	pairFric []float64 // per material pair
	pairRest []float64
	startQ   []float64 // seeds of the initial state
	startV   []float64
	// A control-input column: the actuator and table row of a feedforward
	// effort or PD target entry (-1: none).
	ffAct, ffRow   int
	tgtAct, tgtRow int
	anyInStep      bool // whether the tangent touches anything a step reads
}

func newModelTangent(m *Model, nq, nv int) *modelTangent {
	nb := len(m.Bodies)
	return &modelTangent{
		mass: make([]float64, nb), com: make([]r3.Vec, nb), inertia: make([]contact.Mat3, nb),
		damping: make([]float64, nb), friction: make([]float64, nb), armature: make([]float64, nb),
		kp: make([]float64, len(m.Actuators)), kd: make([]float64, len(m.Actuators)),
		pairFric: make([]float64, len(m.Materials.Pairs)), pairRest: make([]float64, len(m.Materials.Pairs)),
		startQ: make([]float64, nq), startV: make([]float64, nv),
		ffAct: -1, tgtAct: -1,
	}
}

// seed sets the tangent of parameter p (unit direction) in the simulator's
// current state.
func (dm *modelTangent) seed(s *Sim, p *Param) {
	dm.anyInStep = true
	switch p.kind {
	case pFriction:
		dm.pairFric[p.index] = 1
	case pRestitution:
		dm.pairRest[p.index] = 1
	case pMass:
		dm.mass[p.index] = 1
	case pCOM:
		c := &dm.com[p.index]
		*axisRef(&c.X, &c.Y, &c.Z, p.axis) = 1
	case pInertia:
		dm.inertia[p.index][4*p.axis] = 1
	case pDamping:
		dm.damping[p.index] = 1
	case pJointFriction:
		dm.friction[p.index] = 1
	case pArmature:
		dm.armature[p.index] = 1
	case pKp:
		dm.kp[p.index] = 1
	case pKd:
		dm.kd[p.index] = 1
	case pGravity:
		*axisRef(&dm.gravity.X, &dm.gravity.Y, &dm.gravity.Z, p.axis) = 1
	case pFeedforward:
		dm.ffAct, dm.ffRow = p.index, p.axis
	case pTarget:
		dm.tgtAct, dm.tgtRow = p.index, p.axis
	default:
		dm.anyInStep = false
		bl := &s.lay.bodies[p.index]
		switch p.kind {
		case pStartPos:
			dm.startQ[bl.qOff+p.axis] = 1
		case pStartVel:
			dm.startV[bl.vOff+3+p.axis] = 1
		case pStartAngVel:
			// Angular coordinates are in body axes: ω_b = Rᵀ ω_w.
			rot := contact.Quat{W: s.q[bl.qOff+3], X: s.q[bl.qOff+4], Y: s.q[bl.qOff+5], Z: s.q[bl.qOff+6]}
			var e r3.Vec
			*axisRef(&e.X, &e.Y, &e.Z, p.axis) = 1
			w := rot.InvRotate(e)
			dm.startV[bl.vOff], dm.startV[bl.vOff+1], dm.startV[bl.vOff+2] = w.X, w.Y, w.Z
		case pStartQ:
			dm.startQ[bl.qOff] = 1
		case pStartQD:
			dm.startV[bl.vOff] = 1
		}
	}
}

// kinTangent holds the tangents of the kinematic quantities.
type kinTangent struct {
	dp, dphi []r3.Vec  // body origin displacement and rotation, world
	ds       []motion  // per velocity coordinate
	dvel     []motion  // per body (twist from update's velocities)
	dcom     []r3.Vec  // per body
	din      []inertia // per body
	dic      []inertia // composite
	// RNEA tangent workspace
	dbvel []motion
	dacc  []motion
	dfrc  []force
}

func newKinTangent(nb, nv int) *kinTangent {
	return &kinTangent{
		dp: make([]r3.Vec, nb), dphi: make([]r3.Vec, nb), ds: make([]motion, nv),
		dvel: make([]motion, nb), dcom: make([]r3.Vec, nb), din: make([]inertia, nb), dic: make([]inertia, nb),
		dbvel: make([]motion, nb), dacc: make([]motion, nb), dfrc: make([]force, nb),
	}
}

// rotTangent returns the world rotation-vector tangent δφ of a unit
// quaternion q moving by dq: Ṙ = [δφ]× R with δφ = 2 vec(dq ⊗ q*).
func rotTangent(q, dq contact.Quat) r3.Vec {
	d := dq.Mul(q.Conj())
	return r3.Vec{X: 2 * d.X, Y: 2 * d.Y, Z: 2 * d.Z}
}

// update computes the kinematic tangents at the state (q, v) of k for the
// state tangent (dq, dv) and model tangent dm.
func (kt *kinTangent) update(m *Model, lay *layout, k *kinematics, q, v, dq, dv []float64, dm *modelTangent) {
	for i := range m.Bodies {
		b := &m.Bodies[i]
		bl := &lay.bodies[i]
		var pdp, pdphi r3.Vec
		var pdvel motion
		var prot contact.Quat = contact.IdentityQuat
		var po r3.Vec
		if bl.parent >= 0 {
			pdp, pdphi, pdvel = kt.dp[bl.parent], kt.dphi[bl.parent], kt.dvel[bl.parent]
			prot = k.pose[bl.parent].Rot
			po = k.pose[bl.parent].Pos
		}
		o := k.pose[i].Pos
		frameRot := prot.Mul(bl.jointFrame.Rot)
		dp := r3.Add(pdp, r3.Cross(pdphi, r3.Sub(o, po)))
		dphi := pdphi
		qi := q[bl.qOff : bl.qOff+bl.nq]
		dqi := dq[bl.qOff : bl.qOff+bl.nq]
		switch b.Joint.Kind {
		case Free:
			dp = r3.Add(dp, frameRot.Rotate(r3.Vec{X: dqi[0], Y: dqi[1], Z: dqi[2]}))
			dphi = r3.Add(dphi, frameRot.Rotate(rotTangent(contact.Quat{W: qi[3], X: qi[4], Y: qi[5], Z: qi[6]},
				contact.Quat{W: dqi[3], X: dqi[4], Y: dqi[5], Z: dqi[6]})))
		case Ball:
			dphi = r3.Add(dphi, frameRot.Rotate(rotTangent(contact.Quat{W: qi[0], X: qi[1], Y: qi[2], Z: qi[3]},
				contact.Quat{W: dqi[0], X: dqi[1], Y: dqi[2], Z: dqi[3]})))
		case Revolute:
			dphi = r3.Add(dphi, frameRot.Rotate(r3.Scale(dqi[0], bl.jointAxis)))
		case Prismatic:
			dp = r3.Add(dp, frameRot.Rotate(r3.Scale(dqi[0], bl.jointAxis)))
		}
		kt.dp[i], kt.dphi[i] = dp, dphi
		vel := pdvel
		for d := 0; d < bl.nv; d++ {
			sd := k.s[bl.vOff+d]
			var ds motion
			if !(b.Joint.Kind == Free && d >= 3) {
				// ω_w = R ω_c, v_O = R v_c − ω_w × o.
				vcw := r3.Add(sd.v, r3.Cross(sd.w, o))
				dw := r3.Cross(dphi, sd.w)
				dvcw := r3.Cross(dphi, vcw)
				ds = motion{w: dw, v: r3.Sub(r3.Sub(dvcw, r3.Cross(dw, o)), r3.Cross(sd.w, dp))}
			}
			kt.ds[bl.vOff+d] = ds
			vel = vel.add(ds.scale(v[bl.vOff+d])).add(sd.scale(dv[bl.vOff+d]))
		}
		kt.dvel[i] = vel
		rot := k.pose[i].Rot
		r := rot.Mat()
		c := k.com[i]
		dc := r3.Add(r3.Add(dp, r3.Cross(dphi, r3.Sub(c, o))), rot.Rotate(dm.com[i]))
		kt.dcom[i] = dc
		ic := r.Mul(b.Inertia).Mul(r.T())
		sk := contact.Skew3(dphi)
		dic := sk.Mul(ic).Add(ic.Mul(sk).Scale(-1)).Add(r.Mul(dm.inertia[i]).Mul(r.T()))
		cs, dcs := contact.Skew3(c), contact.Skew3(dc)
		ccT := cs.Mul(cs.T())
		dccT := dcs.Mul(cs.T()).Add(cs.Mul(dcs.T()))
		mass := b.Mass
		kt.din[i] = inertia{
			m:  dm.mass[i],
			h:  r3.Add(r3.Scale(dm.mass[i], c), r3.Scale(mass, dc)),
			io: dic.Add(ccT.Scale(dm.mass[i])).Add(dccT.Scale(mass)),
		}
	}
}

// massMatrix writes the tangent of the per-tree mass blocks into dmass.
func (kt *kinTangent) massMatrix(m *Model, lay *layout, k *kinematics, dm *modelTangent, dmass []float64) {
	for i := range dmass {
		dmass[i] = 0
	}
	copy(kt.dic, kt.din)
	for i := len(m.Bodies) - 1; i >= 0; i-- {
		if p := lay.bodies[i].parent; p >= 0 {
			kt.dic[p] = kt.dic[p].add(kt.dic[i])
		}
	}
	for i := range m.Bodies {
		bl := &lay.bodies[i]
		tr := &lay.trees[bl.tree]
		blk := dmass[tr.massOffset : tr.massOffset+tr.nv*tr.nv]
		for d := 0; d < bl.nv; d++ {
			di := bl.vOff + d - tr.vOff
			sd, dsd := k.s[bl.vOff+d], kt.ds[bl.vOff+d]
			f := k.ic[i].apply(sd)
			df := kt.dic[i].apply(sd).add(k.ic[i].apply(dsd))
			for j := i; j >= 0; j = lay.bodies[j].parent {
				jl := &lay.bodies[j]
				for e := 0; e < jl.nv; e++ {
					ei := jl.vOff + e - tr.vOff
					h := kt.ds[jl.vOff+e].dot(f) + k.s[jl.vOff+e].dot(df)
					blk[ei*tr.nv+di] = h
					blk[di*tr.nv+ei] = h
				}
			}
		}
		if jointDriven(m.Bodies[i].Joint.Kind) {
			for d := 0; d < bl.nv; d++ {
				di := bl.vOff + d - tr.vOff
				blk[di*tr.nv+di] += dm.armature[i]
			}
		}
	}
}

// biasPrimal holds the primal quantities of one recursive Newton–Euler
// pass that its tangent needs; they are the same for every tangent column,
// so they are computed once per pass and step.
type biasPrimal struct {
	bvel, acc, moving []motion
	iv                []force   // I·vel
	frc               []force   // body forces after the backward accumulation
	c                 []float64 // the pass's bias (unused by the tangent; the recursion writes it)
}

func newBiasPrimal(nb, nv int) *biasPrimal {
	return &biasPrimal{bvel: make([]motion, nb), acc: make([]motion, nb), moving: make([]motion, nb),
		iv: make([]force, nb), frc: make([]force, nb), c: make([]float64, nv)}
}

// compute evaluates the pass at joint velocities v and time t by the
// simulator's own recursion (kinematics.inverseDynamics with zero
// acceleration) and keeps what the tangent needs.
func (bp *biasPrimal) compute(m *Model, lay *layout, k *kinematics, v []float64, t float64) {
	k.inverseDynamics(m, lay, v, nil, t, bp.c)
	bp.take(m, lay, k, v)
}

// take keeps what the tangent needs of the recursion k has just run at
// joint velocities v.
func (bp *biasPrimal) take(m *Model, lay *layout, k *kinematics, v []float64) {
	copy(bp.bvel, k.bvel)
	copy(bp.acc, k.acc)
	copy(bp.frc, k.frc)
	for i := range m.Bodies {
		bl := &lay.bodies[i]
		var moving motion
		for d := 0; d < bl.nv; d++ {
			if !(m.Bodies[i].Joint.Kind == Free && d >= 3) {
				moving = moving.add(k.s[bl.vOff+d].scale(v[bl.vOff+d]))
			}
		}
		bp.moving[i] = moving
		bp.iv[i] = k.in[i].apply(bp.bvel[i])
	}
}

// bias writes into dc the tangent of c(q, v) for the pass bp (evaluated at
// the joint velocities v) along dv and the kinematic and model tangents.
func (kt *kinTangent) bias(m *Model, lay *layout, k *kinematics, bp *biasPrimal, v, dv []float64, t float64, dm *modelTangent, dc []float64) {
	for i := range m.Bodies {
		bl := &lay.bodies[i]
		var dpa, dpv motion
		if bl.parent >= 0 {
			dpa, dpv = kt.dacc[bl.parent], kt.dbvel[bl.parent]
		} else {
			dpa = motion{v: r3.Scale(-1, dm.gravity)}
		}
		var dvj, dmoving motion
		for d := 0; d < bl.nv; d++ {
			sd, dsd := k.s[bl.vOff+d], kt.ds[bl.vOff+d]
			dx := dsd.scale(v[bl.vOff+d]).add(sd.scale(dv[bl.vOff+d]))
			dvj = dvj.add(dx)
			if !(m.Bodies[i].Joint.Kind == Free && d >= 3) {
				dmoving = dmoving.add(dx)
			}
		}
		vel, dvel := bp.bvel[i], dpv.add(dvj)
		kt.dbvel[i] = dvel
		kt.dacc[i] = dpa.add(dvel.crossM(bp.moving[i])).add(vel.crossM(dmoving))
		in, din := k.in[i], kt.din[i]
		div := din.apply(vel).add(in.apply(dvel))
		kt.dfrc[i] = din.apply(bp.acc[i]).add(in.apply(kt.dacc[i])).add(dvel.crossF(bp.iv[i])).add(vel.crossF(div))
	}
	for li := range m.Loads {
		l := &m.Loads[li]
		f, _ := l.At(t)
		pose := k.pose[l.Body]
		p := pose.Apply(l.Point)
		dp := r3.Add(kt.dp[l.Body], r3.Cross(kt.dphi[l.Body], r3.Sub(p, pose.Pos)))
		kt.dfrc[l.Body] = kt.dfrc[l.Body].sub(force{n: r3.Cross(dp, f)})
	}
	for i := len(m.Bodies) - 1; i >= 0; i-- {
		bl := &lay.bodies[i]
		for d := 0; d < bl.nv; d++ {
			dc[bl.vOff+d] = kt.ds[bl.vOff+d].dot(bp.frc[i]) + k.s[bl.vOff+d].dot(kt.dfrc[i])
		}
		if p := bl.parent; p >= 0 {
			kt.dfrc[p] = kt.dfrc[p].add(kt.dfrc[i])
		}
	}
}

// tangentBasis returns the derivatives of tangents(n) along dn.
func tangentBasis(n, dn r3.Vec) (dt1, dt2 r3.Vec) {
	sign := math.Copysign(1, n.Z)
	a := -1 / (sign + n.Z)
	da := dn.Z / ((sign + n.Z) * (sign + n.Z))
	db := (dn.X*n.Y+n.X*dn.Y)*a + n.X*n.Y*da
	dt1 = r3.Vec{X: sign * (2*n.X*dn.X*a + n.X*n.X*da), Y: sign * db, Z: -sign * dn.X}
	dt2 = r3.Vec{X: db, Y: 2*n.Y*dn.Y*a + n.Y*n.Y*da, Z: -dn.Y}
	return dt1, dt2
}

// quatExpTangent returns the derivative of QuatExp at w along dw.
func quatExpTangent(w, dw r3.Vec) contact.Quat {
	theta := r3.Norm(w)
	if theta < 1e-8 {
		// Derivative of the Taylor branch before its normalization; the
		// normalization's derivative is second order here and vanishes
		// with w.
		wd := r3.Dot(w, dw)
		k := 0.5 - theta*theta/48
		dk := -wd / 24
		return contact.Quat{W: -wd / 4, X: k*dw.X + dk*w.X, Y: k*dw.Y + dk*w.Y, Z: k*dw.Z + dk*w.Z}
	}
	s, c := math.Sincos(theta / 2)
	k := s / theta
	dtheta := r3.Dot(w, dw) / theta
	dk := (c/2*theta - s) / (theta * theta) * dtheta
	return contact.Quat{W: -s / 2 * dtheta, X: k*dw.X + dk*w.X, Y: k*dw.Y + dk*w.Y, Z: k*dw.Z + dk*w.Z}
}

// normalizeTangent returns the derivative of q/‖q‖ along dq.
func normalizeTangent(q, dq contact.Quat) contact.Quat {
	n := q.Norm()
	u := contact.Quat{W: q.W / n, X: q.X / n, Y: q.Y / n, Z: q.Z / n}
	d := u.W*dq.W + u.X*dq.X + u.Y*dq.Y + u.Z*dq.Z
	return contact.Quat{W: (dq.W - d*u.W) / n, X: (dq.X - d*u.X) / n, Y: (dq.Y - d*u.Y) / n, Z: (dq.Z - d*u.Z) / n}
}

func quatAdd(a, b contact.Quat) contact.Quat {
	return contact.Quat{W: a.W + b.W, X: a.X + b.X, Y: a.Y + b.Y, Z: a.Z + b.Z}
}

// dot returns the pairing of two model tangents, field by field: with one
// of them a parameter's seed it reads that parameter's entry of the other.
func (dm *modelTangent) dot(o *modelTangent) float64 {
	s := r3.Dot(dm.gravity, o.gravity)
	sum := func(a, b []float64) {
		for i, x := range a {
			s += x * b[i]
		}
	}
	sum(dm.mass, o.mass)
	for i := range dm.com {
		s += r3.Dot(dm.com[i], o.com[i])
		s += frob(dm.inertia[i], o.inertia[i])
	}
	sum(dm.damping, o.damping)
	sum(dm.friction, o.friction)
	sum(dm.armature, o.armature)
	sum(dm.kp, o.kp)
	sum(dm.kd, o.kd)
	sum(dm.pairFric, o.pairFric)
	sum(dm.pairRest, o.pairRest)
	return s
}
