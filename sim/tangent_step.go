package sim

import (
	"math"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// tangentSweep is the forward tangent state of a simulator: one column per
// parameter.
type tangentSweep struct {
	params []Param
	dq, dv [][]float64
	dm     []*modelTangent
	kt     *kinTangent
	passes [midpointPasses + 1]*biasPrimal
	vargs  [midpointPasses + 1][]float64

	// workspaces
	dmass, dc, dtau, dkp, dkd, drhs, x, dx []float64
	dvarg, dvfree, dvplus                  []float64
	djac, dbeff, dlam, dmu, w, tmp         []float64
}

// newTangents returns a sweep with one column per parameter, seeded in the
// simulator's current state.
func newTangents(s *Sim, params []Param) *tangentSweep {
	nq, nv := s.lay.nq, s.lay.nv
	t := &tangentSweep{params: params, kt: newKinTangent(len(s.model.Bodies), nv)}
	for j := range params {
		dm := newModelTangent(s.model, nq, nv)
		dm.seed(s, &params[j])
		t.dm = append(t.dm, dm)
		t.dq = append(t.dq, append([]float64(nil), dm.startQ...))
		t.dv = append(t.dv, append([]float64(nil), dm.startV...))
	}
	mk := func() []float64 { return make([]float64, nv) }
	for p := range t.passes {
		t.passes[p] = newBiasPrimal(len(s.model.Bodies), nv)
		t.vargs[p] = mk()
	}
	t.dmass = make([]float64, s.lay.massLen)
	t.dc, t.dtau, t.dkp, t.dkd, t.drhs, t.x, t.dx = mk(), mk(), mk(), mk(), mk(), mk(), mk()
	t.dvarg, t.dvfree, t.dvplus, t.w, t.tmp = mk(), mk(), mk(), mk(), mk()
	return t
}

// step advances every tangent column through the step the simulator has
// just taken (its primal intermediates are still in place: kinematics at
// the start of the step, q0 and v0, the midpoint passes, contacts and the
// solver's last factorization).
func (t *tangentSweep) step(s *Sim) error {
	// The primal Newton–Euler passes, the same for every column, were
	// kept by Step.
	s.passVelocities(&t.vargs)
	for j := range t.dq {
		if err := t.column(s, j); err != nil {
			return err
		}
	}
	return nil
}

// primalPasses evaluates the step's Newton–Euler passes at their joint
// velocities (v0, then the midpoints of v0 and each pass's free velocity),
// keeping what tangents and adjoints need.
func (s *Sim) primalPasses(passes *[midpointPasses + 1]*biasPrimal, vargs *[midpointPasses + 1][]float64) {
	s.passVelocities(vargs)
	for pass := range passes {
		passes[pass].compute(s.model, s.lay, s.kin, vargs[pass], s.t)
	}
}

// passVelocities writes the joint velocities of the step's Newton–Euler
// passes into vargs.
func (s *Sim) passVelocities(vargs *[midpointPasses + 1][]float64) {
	for pass, varg := range vargs {
		if pass == 0 {
			copy(varg, s.v0)
			continue
		}
		for i := range varg {
			varg[i] = 0.5 * (s.v0[i] + s.vpass[pass-1][i])
		}
	}
}

func (t *tangentSweep) column(s *Sim, j int) error {
	m, lay, kin := s.model, s.lay, s.kin
	h := s.set.TimeStep
	dq, dv, dm := t.dq[j], t.dv[j], t.dm[j]
	nv := lay.nv
	kt := t.kt

	kt.update(m, lay, kin, s.q0, s.v0, dq, dv, dm)
	kt.massMatrix(m, lay, kin, dm, t.dmass)

	// Controller, actuator limits and joint friction.
	for i := range t.dtau {
		t.dtau[i], t.dkp[i], t.dkd[i] = 0, 0, 0
	}
	if s.ctl != nil && len(m.Actuators) > 0 {
		pd, _ := pdIn(s.ctl)
		out := &s.ctlOut
		for i, a := range m.Actuators {
			d := lay.bodies[a.Body].vOff
			if s.sat[d] {
				continue
			}
			qd := dq[lay.bodies[a.Body].qOff]
			t.dtau[d] += -out.Stiffness[i]*qd - out.Damping[i]*dv[d]
			if pd != nil {
				t.dtau[d] += dm.kp[i]*(pd.q[i]-s.ctlIn.Q[i]) + dm.kd[i]*(pd.qd[i]-s.ctlIn.QD[i])
				t.dkp[d] += dm.kp[i]
				t.dkd[d] += dm.kd[i]
				if dm.tgtAct == i {
					w, wr := pd.Targets.weight(s.ctlIn.T, dm.tgtRow)
					t.dtau[d] += pd.Kp[i]*w + pd.Kd[i]*wr
				}
			}
			if dm.ffAct == i {
				if ff, err := ffIn(s.ctl); err == nil {
					w, _ := ff.Efforts.weight(s.ctlIn.T, dm.ffRow)
					t.dtau[d] += w
				}
			}
		}
	}
	for i := range m.Bodies {
		f := m.Bodies[i].Joint.Friction
		df := dm.friction[i]
		if f == 0 && df == 0 {
			continue
		}
		if m.Bodies[i].Joint.Kind == Ball {
			t.ballFrictionTangent(s, lay.bodies[i].vOff, f, df, dv)
			continue
		}
		d := lay.bodies[i].vOff
		v := s.v0[d]
		w := jointFrictionWidth
		r := math.Sqrt(v*v + w*w)
		damp := f * w * w / (r * r * r)
		t.dtau[d] += -df*v/r - damp*dv[d]
		t.dkd[d] += df*w*w/(r*r*r) + f*w*w*(-3*v/(r*r*r*r*r))*dv[d]
	}
	// dA = dM + h(dD + dkd) + h² dkp on the diagonal.
	for tr := range lay.trees {
		tl := &lay.trees[tr]
		blk := t.dmass[tl.massOffset : tl.massOffset+tl.nv*tl.nv]
		for d := 0; d < tl.nv; d++ {
			i := tl.vOff + d
			blk[d*tl.nv+d] += h*(t.dampOf(s, dm, i)+t.dkd[i]) + h*h*t.dkp[i]
		}
	}

	// Midpoint passes.
	for pass := 0; pass <= midpointPasses; pass++ {
		if pass == 0 {
			copy(t.dvarg, dv)
		} else {
			for i := range t.dvarg {
				t.dvarg[i] = 0.5 * (dv[i] + t.dvfree[i])
			}
		}
		kt.bias(m, lay, kin, t.passes[pass], t.vargs[pass], t.dvarg, s.t, dm, t.dc)
		for i := 0; i < nv; i++ {
			damp := s.damp[i] + h*s.kp[i]
			ddamp := t.dampOf(s, dm, i) + h*t.dkp[i]
			t.drhs[i] = h * (t.dtau[i] - t.dc[i] - ddamp*s.v0[i] - damp*dv[i])
			t.x[i] = s.vpass[pass][i] - s.v0[i]
		}
		t.mulDA(s, t.x, t.tmp)
		for i := range t.drhs {
			t.drhs[i] -= t.tmp[i]
		}
		s.solveMass(t.drhs)
		for i := range t.dvfree {
			t.dvfree[i] = dv[i] + t.drhs[i]
		}
	}

	copy(t.dvplus, t.dvfree)
	if n := 3*len(s.contacts) + len(s.limits); n > 0 {
		if err := t.contactTangent(s, dq, dm, n); err != nil {
			return err
		}
	}
	t.integrate(s, dq, dv)
	return nil
}

// ballFrictionTangent adds the tangents of ballFriction's torque and
// damping at the ball joint whose coordinates start at d, for friction f
// with tangent df and velocity tangent dv.
func (t *tangentSweep) ballFrictionTangent(s *Sim, d int, f, df float64, dv []float64) {
	w, dw := s.v0[d:d+3], dv[d:d+3]
	c := jointFrictionWidth
	r := math.Sqrt(w[0]*w[0] + w[1]*w[1] + w[2]*w[2] + c*c)
	r3 := r * r * r
	wd := w[0]*dw[0] + w[1]*dw[1] + w[2]*dw[2]
	for k := range 3 {
		// τ_k = −F w_k / r,  kd = F/r.
		t.dtau[d+k] += -df*w[k]/r - f*dw[k]/r + f*w[k]*wd/r3
		t.dkd[d+k] += df/r - f*wd/r3
	}
}

// dampOf returns the tangent of the viscous damping at coordinate i.
func (t *tangentSweep) dampOf(s *Sim, dm *modelTangent, i int) float64 {
	return dm.damping[t.bodyOfDOF(s, i)]
}

func (t *tangentSweep) bodyOfDOF(s *Sim, i int) int {
	for b := range s.lay.bodies {
		bl := &s.lay.bodies[b]
		if i >= bl.vOff && i < bl.vOff+bl.nv {
			return b
		}
	}
	return 0
}

// mulDA writes dA x into dst, per tree block.
func (t *tangentSweep) mulDA(s *Sim, x, dst []float64) {
	for tr := range s.lay.trees {
		tl := &s.lay.trees[tr]
		blk := t.dmass[tl.massOffset : tl.massOffset+tl.nv*tl.nv]
		for r := 0; r < tl.nv; r++ {
			var sum float64
			for c := 0; c < tl.nv; c++ {
				sum += blk[r*tl.nv+c] * x[tl.vOff+c]
			}
			dst[tl.vOff+r] = sum
		}
	}
}

// shapeTwist returns the tangent twist of geometry g's frame.
func (t *tangentSweep) shapeTwist(s *Sim, g int) contact.Twist {
	owner := s.geoms[g].owner
	if owner < 0 {
		return contact.Twist{}
	}
	o := s.kin.pose[owner].Pos
	so := s.geomPoses[g].Pos
	dphi := t.kt.dphi[owner]
	return contact.Twist{V: r3.Add(t.kt.dp[owner], r3.Cross(dphi, r3.Sub(so, o))), W: dphi}
}

// djacRows adds to the contact's three rows the tangents of body b's
// Jacobian rows dirᵣ·J_b(p) when p moves by dp and dirᵣ by ddirᵣ, with the
// sign. Each coordinate's point velocity and its tangent are computed once
// for the three directions.
func (t *tangentSweep) djacRows(s *Sim, rows *[3][]float64, b int, p, dp r3.Vec, dirs, ddirs *[3]r3.Vec, sign float64) {
	for ; b >= 0; b = s.lay.bodies[b].parent {
		bl := &s.lay.bodies[b]
		for d := bl.vOff; d < bl.vOff+bl.nv; d++ {
			sd, dsd := s.kin.s[d], t.kt.ds[d]
			pv := sd.pointVel(p)
			dpv := r3.Add(dsd.pointVel(p), r3.Cross(sd.w, dp))
			for r := range rows {
				rows[r][d] += sign * (r3.Dot(ddirs[r], pv) + r3.Dot(dirs[r], dpv))
			}
		}
	}
}

func (t *tangentSweep) contactTangent(s *Sim, dq []float64, dm *modelTangent, n int) error {
	nv := s.lay.nv
	nc := len(s.contacts)
	t.djac = grow(t.djac, n*nv)
	t.dbeff = grow(t.dbeff, n)
	t.dlam = grow(t.dlam, n)
	t.dmu = grow(t.dmu, nc)
	// Rows are nonzero only on the velocity coordinates of the (at most
	// two) trees they touch; the loops below visit just those.
	for r := 0; r < n; r++ {
		row := t.djac[r*nv : (r+1)*nv]
		for _, rg := range s.rowRanges(r) {
			clear(row[rg[0]:rg[1]])
		}
	}
	for k := range s.contacts {
		c := &s.contacts[k]
		ga, gb := c.geomA, c.geomB
		dpos, dn, dgap := contact.PointTangent(s.geoms[ga].shape, s.geomPoses[ga], s.geoms[gb].shape, s.geomPoses[gb],
			c.Point, t.shapeTwist(s, ga), t.shapeTwist(s, gb))
		dt1, dt2 := tangentBasis(c.Point.Normal, dn)
		p := c.Point.Pos
		dirs := [3]r3.Vec{c.Point.Normal, c.Tangent1, c.Tangent2}
		ddirs := [3]r3.Vec{dn, dt1, dt2}
		rows := [3][]float64{t.djac[3*k*nv : (3*k+1)*nv], t.djac[(3*k+1)*nv : (3*k+2)*nv], t.djac[(3*k+2)*nv : (3*k+3)*nv]}
		t.djacRows(s, &rows, c.B, p, dpos, &dirs, &ddirs, 1)
		t.djacRows(s, &rows, c.A, p, dpos, &dirs, &ddirs, -1)
		// Target tangent.
		var dtarget float64
		if c.bounce {
			var dpre float64
			for _, b := range [2]int{c.A, c.B} {
				if b < 0 {
					continue
				}
				vel, dvel := s.kin.vel[b], t.kt.dvel[b]
				x := r3.Dot(dn, vel.pointVel(p)) + r3.Dot(c.Point.Normal, r3.Add(dvel.pointVel(p), r3.Cross(vel.w, dpos)))
				if b == c.B {
					dpre += x
				} else {
					dpre -= x
				}
			}
			var de float64
			if c.pair >= 0 {
				de = dm.pairRest[c.pair]
			}
			dtarget = -de*c.pre - c.Restitution*dpre
		} else {
			dtarget = gapTargetCoef(s, c.Point.Gap) * dgap
		}
		t.dbeff[3*k] = -dtarget
		t.dbeff[3*k+1], t.dbeff[3*k+2] = 0, 0
		t.dmu[k] = 0
		if c.pair >= 0 {
			t.dmu[k] = dm.pairFric[c.pair]
		}
	}
	for k := range s.limits {
		l := &s.limits[k]
		bl := &s.lay.bodies[l.body]
		dgap := l.sign * dq[bl.qOff]
		t.dbeff[3*nc+k] = -gapTargetCoef(s, l.gap) * dgap
	}
	// z = v⁺ − v_free;  w = dJᵀλ − dA z.
	for i := range t.x {
		t.x[i] = s.v[i] - s.vfree[i]
	}
	t.mulDA(s, t.x, t.w)
	for i := range t.w {
		t.w[i] = -t.w[i]
	}
	s.addRowsT(t.djac, s.lambda[:n], t.w)
	// A⁻¹ w.
	copy(t.tmp, t.w)
	s.solveMass(t.tmp)
	// dB_eff = dJ v⁺ + J dv_free − dtarget + J A⁻¹ w.
	for r := 0; r < n; r++ {
		row := t.djac[r*nv : (r+1)*nv]
		jr := s.jac[r*nv : (r+1)*nv]
		var sum float64
		for _, rg := range s.rowRanges(r) {
			for d := rg[0]; d < rg[1]; d++ {
				sum += row[d]*s.v[d] + jr[d]*(t.dvfree[d]+t.tmp[d])
			}
		}
		t.dbeff[r] += sum
	}
	if err := s.solver.JVP(t.dlam, t.dbeff, t.dmu); err != nil {
		return err
	}
	// dv⁺ = dv_free + A⁻¹(w + Jᵀ dλ).
	s.addRowsT(s.jac, t.dlam, t.w)
	s.solveMass(t.w)
	for d := range t.dvplus {
		t.dvplus[d] = t.dvfree[d] + t.w[d]
	}
	return nil
}

// integrate propagates the tangent through q⁺ = q ⊕ h v⁺, writing the
// post-step tangents into dq and dv.
func (t *tangentSweep) integrate(s *Sim, dq, dv []float64) {
	h := s.set.TimeStep
	for i := range s.model.Bodies {
		bl := &s.lay.bodies[i]
		q0 := s.q0[bl.qOff : bl.qOff+bl.nq]
		v := s.v[bl.vOff : bl.vOff+bl.nv]
		dqi := dq[bl.qOff : bl.qOff+bl.nq]
		dvi := t.dvplus[bl.vOff : bl.vOff+bl.nv]
		rotStep := func(off int) {
			rot := contact.Quat{W: q0[off], X: q0[off+1], Y: q0[off+2], Z: q0[off+3]}
			drot := contact.Quat{W: dqi[off], X: dqi[off+1], Y: dqi[off+2], Z: dqi[off+3]}
			w := r3.Scale(h, r3.Vec{X: v[0], Y: v[1], Z: v[2]})
			dw := r3.Scale(h, r3.Vec{X: dvi[0], Y: dvi[1], Z: dvi[2]})
			e := contact.QuatExp(w)
			raw := rot.Mul(e)
			draw := quatAdd(drot.Mul(e), rot.Mul(quatExpTangent(w, dw)))
			d := normalizeTangent(raw, draw)
			dqi[off], dqi[off+1], dqi[off+2], dqi[off+3] = d.W, d.X, d.Y, d.Z
		}
		switch s.model.Bodies[i].Joint.Kind {
		case Free:
			dqi[0] += h * dvi[3]
			dqi[1] += h * dvi[4]
			dqi[2] += h * dvi[5]
			rotStep(3)
		case Ball:
			rotStep(0)
		case Revolute, Prismatic:
			dqi[0] += h * dvi[0]
		}
	}
	copy(dv, t.dvplus)
}
