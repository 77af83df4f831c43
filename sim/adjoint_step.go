package sim

import (
	"math"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// stepAdjoint is the adjoint of one step: the transpose of the forward
// tangent step (tangentSweep.column), stage by stage in reverse order —
// integrator, contact solve and geometry, midpoint passes, controller, mass
// matrix, kinematics. It carries the state bar (qBar, vBar) from the end of
// a step to its start and accumulates the model bars of every step in gb
// and the bars of control-input parameters in ctlBar.
type stepAdjoint struct {
	params []Param
	ka     *kinAdjoint
	gb     *modelTangent
	ctlBar []float64
	passes [midpointPasses + 1]*biasPrimal
	vargs  [midpointPasses + 1][]float64
	dofOf  []int // body of each velocity coordinate

	qBar, vBar   []float64 // bars of the state after the step (in), before it (out)
	q0Bar, v0Bar []float64

	vpBar, vfBar, prevBar, tauBar, kpBar, kdBar []float64
	rb, cb, vargBar, w, u                       []float64
	aBar                                        []float64
	jacBar, lamBar, bBar, muBar                 []float64
}

func newStepAdjoint(s *Sim, params []Param) *stepAdjoint {
	nq, nv, nb := s.lay.nq, s.lay.nv, len(s.model.Bodies)
	mk := func() []float64 { return make([]float64, nv) }
	a := &stepAdjoint{
		params: params, ka: newKinAdjoint(nb, nv), gb: newModelTangent(s.model, nq, nv),
		ctlBar: make([]float64, len(params)),
		qBar:   make([]float64, nq), q0Bar: make([]float64, nq),
		vBar: mk(), v0Bar: mk(), vpBar: mk(), vfBar: mk(), prevBar: mk(), tauBar: mk(), kpBar: mk(), kdBar: mk(),
		rb: mk(), cb: mk(), vargBar: mk(), w: mk(), u: mk(),
		aBar:  make([]float64, s.lay.massLen),
		dofOf: make([]int, nv),
	}
	for p := range a.passes {
		a.passes[p] = newBiasPrimal(nb, nv)
		a.vargs[p] = mk()
	}
	for b := range s.lay.bodies {
		bl := &s.lay.bodies[b]
		for d := bl.vOff; d < bl.vOff+bl.nv; d++ {
			a.dofOf[d] = b
		}
	}
	return a
}

// step carries (qBar, vBar) back through the recorded step rec whose
// primal intermediates s holds (see Sim.prime).
func (a *stepAdjoint) step(s *Sim, rec *stepRecord) error {
	m, lay, kin := s.model, s.lay, s.kin
	h := s.set.TimeStep
	passes := &a.passes
	if rec.kept {
		// The recorded passes; their joint velocities are still needed.
		passes = &rec.passes
		s.passVelocities(&a.vargs)
	} else {
		s.primalPasses(&a.passes, &a.vargs)
	}
	a.ka.reset()
	clear(a.aBar)
	clear(a.tauBar)
	clear(a.kpBar)
	clear(a.kdBar)
	clear(a.q0Bar)
	clear(a.v0Bar)

	a.integrate(s)
	if n := 3*len(s.contacts) + len(s.limits); n > 0 {
		if err := a.contact(s, &rec.sens, n); err != nil {
			return err
		}
	} else {
		copy(a.vfBar, a.vpBar)
	}

	// Midpoint passes, last first: dv_free = dv + A⁻¹ drhs with
	// drhs = h(dτ − dc − ddamp v0 − damp dv) − dA x.
	for pass := midpointPasses; pass >= 0; pass-- {
		vfb := a.vfBar
		if pass < midpointPasses {
			vfb = a.prevBar
		}
		for i, x := range vfb {
			a.v0Bar[i] += x
		}
		copy(a.rb, vfb)
		s.solveMass(a.rb)
		for i, r := range a.rb {
			a.tauBar[i] += h * r
			a.cb[i] = -h * r
			ddb := -h * r * s.v0[i]
			a.gb.damping[a.dofOf[i]] += ddb
			a.kpBar[i] += h * ddb
			a.v0Bar[i] -= h * (s.damp[i] + h*s.kp[i]) * r
			a.w[i] = s.vpass[pass][i] - s.v0[i]
		}
		a.outerMinus(s, a.rb, a.w)
		clear(a.vargBar)
		a.ka.bias(m, lay, kin, passes[pass], a.vargs[pass], a.cb, a.vargBar, s.t, a.gb)
		if pass == 0 {
			for i, x := range a.vargBar {
				a.v0Bar[i] += x
			}
		} else {
			for i, x := range a.vargBar {
				a.v0Bar[i] += 0.5 * x
				a.prevBar[i] = 0.5 * x
			}
		}
	}

	// dA = dM + h(dD + dkd) + h² dkp on the diagonal.
	for tr := range lay.trees {
		tl := &lay.trees[tr]
		blk := a.aBar[tl.massOffset : tl.massOffset+tl.nv*tl.nv]
		for d := 0; d < tl.nv; d++ {
			i := tl.vOff + d
			x := blk[d*tl.nv+d]
			a.gb.damping[a.dofOf[i]] += h * x
			a.kdBar[i] += h * x
			a.kpBar[i] += h * h * x
		}
	}
	a.control(s)
	a.ka.massMatrix(m, lay, kin, a.aBar, a.gb)
	a.ka.update(m, lay, kin, s.q0, s.v0, a.q0Bar, a.v0Bar, a.gb)
	a.qBar, a.q0Bar = a.q0Bar, a.qBar
	a.vBar, a.v0Bar = a.v0Bar, a.vBar
	return nil
}

// outerMinus subtracts x yᵀ from the mass-block bar, per tree.
func (a *stepAdjoint) outerMinus(s *Sim, x, y []float64) {
	for tr := range s.lay.trees {
		tl := &s.lay.trees[tr]
		blk := a.aBar[tl.massOffset : tl.massOffset+tl.nv*tl.nv]
		for r := 0; r < tl.nv; r++ {
			xr := x[tl.vOff+r]
			if xr == 0 {
				continue
			}
			row := blk[r*tl.nv : (r+1)*tl.nv]
			for c := range row {
				row[c] -= xr * y[tl.vOff+c]
			}
		}
	}
}

// integrate is the adjoint of tangentSweep.integrate: from the bars of
// (dq⁺, dv⁺) it sets vpBar (the bar of dv⁺ before the copy) and the direct
// part of q0Bar.
func (a *stepAdjoint) integrate(s *Sim) {
	h := s.set.TimeStep
	copy(a.vpBar, a.vBar)
	for i := range s.model.Bodies {
		bl := &s.lay.bodies[i]
		q0 := s.q0[bl.qOff : bl.qOff+bl.nq]
		v := s.v[bl.vOff : bl.vOff+bl.nv]
		qn := a.qBar[bl.qOff : bl.qOff+bl.nq]
		qb := a.q0Bar[bl.qOff : bl.qOff+bl.nq]
		vb := a.vpBar[bl.vOff : bl.vOff+bl.nv]
		rotStep := func(off int) {
			rot := contact.Quat{W: q0[off], X: q0[off+1], Y: q0[off+2], Z: q0[off+3]}
			w := r3.Scale(h, r3.Vec{X: v[0], Y: v[1], Z: v[2]})
			e := contact.QuatExp(w)
			raw := rot.Mul(e)
			// d = (draw − (u·draw)u)/‖raw‖ is symmetric in draw.
			nr := raw.Norm()
			u := contact.Quat{W: raw.W / nr, X: raw.X / nr, Y: raw.Y / nr, Z: raw.Z / nr}
			y := contact.Quat{W: qn[off], X: qn[off+1], Y: qn[off+2], Z: qn[off+3]}
			d := u.W*y.W + u.X*y.X + u.Y*y.Y + u.Z*y.Z
			rb := contact.Quat{W: (y.W - d*u.W) / nr, X: (y.X - d*u.X) / nr, Y: (y.Y - d*u.Y) / nr, Z: (y.Z - d*u.Z) / nr}
			// draw = drot ⊗ e + rot ⊗ E'(w)[h dω].
			db := rb.Mul(e.Conj())
			qb[off] += db.W
			qb[off+1] += db.X
			qb[off+2] += db.Y
			qb[off+3] += db.Z
			eb := rot.Conj().Mul(rb)
			wb := quatExpTangentT(w, eb)
			vb[0] += h * wb.X
			vb[1] += h * wb.Y
			vb[2] += h * wb.Z
		}
		switch s.model.Bodies[i].Joint.Kind {
		case Free:
			for k := 0; k < 3; k++ {
				qb[k] += qn[k]
				vb[3+k] += h * qn[k]
			}
			rotStep(3)
		case Ball:
			rotStep(0)
		case Revolute, Prismatic:
			qb[0] += qn[0]
			vb[0] += h * qn[0]
		}
	}
}

// quatExpTangentT returns the bar of dw in quatExpTangent(w, dw) for the
// quaternion bar b.
func quatExpTangentT(w r3.Vec, b contact.Quat) r3.Vec {
	var g r3.Vec
	for k, e := range [3]r3.Vec{{X: 1}, {Y: 1}, {Z: 1}} {
		d := quatExpTangent(w, e)
		x := d.W*b.W + d.X*b.X + d.Y*b.Y + d.Z*b.Z
		*axisRef(&g.X, &g.Y, &g.Z, k) = x
	}
	return g
}

// contact is the adjoint of tangentSweep.contactTangent: from vpBar it sets
// vfBar and adds the bars of the mass blocks, the kinematic tangents, the
// joint-limit gaps (q0Bar) and the friction and restitution of the pairs.
func (a *stepAdjoint) contact(s *Sim, rec *contact.Sensitivity, n int) error {
	nv := s.lay.nv
	nc := len(s.contacts)
	a.jacBar = grow(a.jacBar, n*nv)
	a.lamBar = grow(a.lamBar, n)
	a.bBar = grow(a.bBar, n)
	a.muBar = grow(a.muBar, nc)
	// dv⁺ = dv_free + A⁻¹(w + Jᵀ dλ).
	copy(a.vfBar, a.vpBar)
	copy(a.w, a.vpBar)
	s.solveMass(a.w) // the bar of w
	s.mulRows(s.jac, a.w, a.lamBar)
	// dλ = −(W + K)⁻¹(dB_eff + M dμ).
	if err := rec.VJP(&s.w, a.bBar, a.muBar, a.lamBar); err != nil {
		return err
	}
	// dB_eff = dJ v⁺ + J(dv_free + A⁻¹ w) − dtarget.
	clear(a.u)
	s.addRowsT(s.jac, a.bBar, a.u)
	for r := 0; r < n; r++ {
		bb := a.bBar[r]
		row := a.jacBar[r*nv : (r+1)*nv]
		for _, rg := range s.rowRanges(r) {
			for d := rg[0]; d < rg[1]; d++ {
				row[d] = bb * s.v[d]
			}
		}
	}
	for d, x := range a.u {
		a.vfBar[d] += x
	}
	s.solveMass(a.u)
	for d, x := range a.u {
		a.w[d] += x
	}
	// w = dJᵀλ − dA z, z = v⁺ − v_free.
	for r := 0; r < n; r++ {
		l := s.lambda[r]
		if l == 0 {
			continue
		}
		row := a.jacBar[r*nv : (r+1)*nv]
		for _, rg := range s.rowRanges(r) {
			for d := rg[0]; d < rg[1]; d++ {
				row[d] += l * a.w[d]
			}
		}
	}
	for d := range a.u {
		a.u[d] = s.v[d] - s.vfree[d]
	}
	a.outerMinus(s, a.w, a.u)

	for k := range s.limits {
		l := &s.limits[k]
		bl := &s.lay.bodies[l.body]
		a.q0Bar[bl.qOff] += l.sign * gapTargetCoef(s, l.gap) * -a.bBar[3*nc+k]
	}
	for k := range s.contacts {
		c := &s.contacts[k]
		if c.pair >= 0 {
			a.gb.pairFric[c.pair] += a.muBar[k]
		}
		p := c.Point.Pos
		n := c.Point.Normal
		dirs := [3]r3.Vec{n, c.Tangent1, c.Tangent2}
		var dirBar [3]r3.Vec
		var posBar r3.Vec
		rows := [3][]float64{a.jacBar[3*k*nv : (3*k+1)*nv], a.jacBar[(3*k+1)*nv : (3*k+2)*nv], a.jacBar[(3*k+2)*nv : (3*k+3)*nv]}
		a.jacRowsT(s, &rows, c.B, p, &dirs, &dirBar, &posBar, 1)
		a.jacRowsT(s, &rows, c.A, p, &dirs, &dirBar, &posBar, -1)
		nBar := r3.Add(dirBar[0], tangentBasisT(n, dirBar[1], dirBar[2]))
		var gapBar float64
		tb := -a.bBar[3*k]
		if c.bounce {
			if c.pair >= 0 {
				a.gb.pairRest[c.pair] -= c.pre * tb
			}
			preBar := -c.Restitution * tb
			for _, b := range [2]int{c.A, c.B} {
				if b < 0 {
					continue
				}
				x := preBar
				if b != c.B {
					x = -x
				}
				vel := s.kin.vel[b]
				nBar = r3.Add(nBar, r3.Scale(x, vel.pointVel(p)))
				a.ka.dvel[b] = a.ka.dvel[b].add(motion{w: r3.Scale(x, r3.Cross(p, n)), v: r3.Scale(x, n)})
				posBar = r3.Add(posBar, r3.Scale(x, r3.Cross(n, vel.w)))
			}
		} else {
			gapBar = gapTargetCoef(s, c.Point.Gap) * tb
		}
		ga, gb := c.geomA, c.geomB
		taBar, tbBar := contact.PointTangentAdjoint(s.geoms[ga].shape, s.geomPoses[ga], s.geoms[gb].shape, s.geomPoses[gb],
			c.Point, posBar, nBar, gapBar)
		a.shapeTwistT(s, ga, taBar)
		a.shapeTwistT(s, gb, tbBar)
	}
	return nil
}

// jacRowsT is the adjoint of tangentSweep.djacRows for the bars of the
// contact's three rows.
func (a *stepAdjoint) jacRowsT(s *Sim, rows *[3][]float64, b int, p r3.Vec, dirs, dirBar *[3]r3.Vec, posBar *r3.Vec, sign float64) {
	for ; b >= 0; b = s.lay.bodies[b].parent {
		bl := &s.lay.bodies[b]
		for d := bl.vOff; d < bl.vOff+bl.nv; d++ {
			sd := s.kin.s[d]
			pv := sd.pointVel(p)
			var g r3.Vec
			for r := range rows {
				x := sign * rows[r][d]
				if x == 0 {
					continue
				}
				dirBar[r] = r3.Add(dirBar[r], r3.Scale(x, pv))
				g = r3.Add(g, r3.Scale(x, dirs[r]))
			}
			// dpv = ds.pointVel(p) + s.w × dp.
			a.ka.ds[d] = a.ka.ds[d].add(motion{w: r3.Cross(p, g), v: g})
			*posBar = r3.Add(*posBar, r3.Cross(g, sd.w))
		}
	}
}

// shapeTwistT is the adjoint of tangentSweep.shapeTwist.
func (a *stepAdjoint) shapeTwistT(s *Sim, g int, t contact.Twist) {
	owner := s.geoms[g].owner
	if owner < 0 {
		return
	}
	o := s.kin.pose[owner].Pos
	so := s.geomPoses[g].Pos
	a.ka.dp[owner] = r3.Add(a.ka.dp[owner], t.V)
	a.ka.dphi[owner] = r3.Add(a.ka.dphi[owner], r3.Add(r3.Cross(r3.Sub(so, o), t.V), t.W))
}

// tangentBasisT returns the bar of dn in tangentBasis(n, dn) for the bars
// of dt1 and dt2.
func tangentBasisT(n, t1Bar, t2Bar r3.Vec) r3.Vec {
	var g r3.Vec
	for k, e := range [3]r3.Vec{{X: 1}, {Y: 1}, {Z: 1}} {
		d1, d2 := tangentBasis(n, e)
		*axisRef(&g.X, &g.Y, &g.Z, k) = r3.Dot(d1, t1Bar) + r3.Dot(d2, t2Bar)
	}
	return g
}

// gapTargetCoef is the derivative of gapTarget with respect to the gap.
func gapTargetCoef(s *Sim, gap float64) float64 {
	h := s.set.TimeStep
	if gap < 0 {
		if -s.set.CorrectionRate*gap/h >= s.set.MaxCorrection {
			return 0
		}
		return -s.set.CorrectionRate / h
	}
	return -1 / h
}

// ballFrictionT is the adjoint of tangentSweep.ballFrictionTangent for the
// ball joint of body i whose coordinates start at d.
func (a *stepAdjoint) ballFrictionT(s *Sim, i, d int, f float64) {
	w := s.v0[d : d+3]
	tb, kb := a.tauBar[d:d+3], a.kdBar[d:d+3]
	c := jointFrictionWidth
	r := math.Sqrt(w[0]*w[0] + w[1]*w[1] + w[2]*w[2] + c*c)
	r3 := r * r * r
	var tw, ksum float64 // Σ τ̄_k w_k, Σ k̄d_k
	for k := range 3 {
		a.gb.friction[i] += -tb[k]*w[k]/r + kb[k]/r
		tw += tb[k] * w[k]
		ksum += kb[k]
	}
	for e := range 3 {
		a.v0Bar[d+e] += f * (-tb[e]/r + w[e]*tw/r3 - w[e]*ksum/r3)
	}
}

// control is the adjoint of the controller, actuator-limit and joint-
// friction part of tangentSweep.column: from the bars of dτ, dkp and dkd it
// adds to q0Bar, v0Bar, the gains' and joint friction's model bars and the
// control-input parameters' bars.
func (a *stepAdjoint) control(s *Sim) {
	m, lay := s.model, s.lay
	if s.ctl != nil && len(m.Actuators) > 0 {
		pd, _ := pdIn(s.ctl)
		ff, _ := ffIn(s.ctl)
		out := &s.ctlOut
		for i, act := range m.Actuators {
			d := lay.bodies[act.Body].vOff
			if s.sat[d] {
				continue
			}
			tb := a.tauBar[d]
			a.q0Bar[lay.bodies[act.Body].qOff] -= out.Stiffness[i] * tb
			a.v0Bar[d] -= out.Damping[i] * tb
			if pd != nil {
				a.gb.kp[i] += tb*(pd.q[i]-s.ctlIn.Q[i]) + a.kpBar[d]
				a.gb.kd[i] += tb*(pd.qd[i]-s.ctlIn.QD[i]) + a.kdBar[d]
			}
			for j := range a.params {
				p := &a.params[j]
				if p.index != i {
					continue
				}
				switch {
				case p.kind == pTarget && pd != nil:
					w, wr := pd.Targets.weight(s.ctlIn.T, p.axis)
					a.ctlBar[j] += tb * (pd.Kp[i]*w + pd.Kd[i]*wr)
				case p.kind == pFeedforward && ff != nil:
					w, _ := ff.Efforts.weight(s.ctlIn.T, p.axis)
					a.ctlBar[j] += tb * w
				}
			}
		}
	}
	for i := range m.Bodies {
		f := m.Bodies[i].Joint.Friction
		d := lay.bodies[i].vOff
		if lay.bodies[i].nv == 0 {
			continue
		}
		if m.Bodies[i].Joint.Kind == Ball {
			a.ballFrictionT(s, i, d, f)
			continue
		}
		v := s.v0[d]
		w := jointFrictionWidth
		r := math.Sqrt(v*v + w*w)
		tb, kb := a.tauBar[d], a.kdBar[d]
		a.gb.friction[i] += -tb*v/r + kb*w*w/(r*r*r)
		if f != 0 {
			damp := f * w * w / (r * r * r)
			a.v0Bar[d] += -damp*tb + kb*f*w*w*(-3*v/(r*r*r*r*r))
		}
	}
}
