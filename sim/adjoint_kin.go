package sim

import (
	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// Adjoints of the kinematic, mass-matrix and Newton–Euler tangents of
// tangent.go. Each function here is the transpose of the linear map of its
// forward twin: it takes the gradients ("bars") of a scalar with respect to
// the forward map's outputs and adds the gradients with respect to its
// inputs. A bar has the shape of the tangent it belongs to; motion bars
// pair component by component with motion tangents (⟨ā, a⟩ = ā.w·a.w +
// ā.v·a.v), force bars with force tangents, and inertia bars with inertia
// tangents (⟨Ī, I⟩ = m̄m + h̄·h + Σ Īo∘Io). Their dot-product tests against
// the forward functions are in adjoint_test.go.

// kinAdjoint holds the bars of the kinematic tangents (kinTangent) and the
// workspace of the Newton–Euler adjoint.
type kinAdjoint struct {
	dp, dphi []r3.Vec
	ds       []motion // per velocity coordinate
	dvel     []motion
	din      []inertia
	dic      []inertia
	// Newton–Euler workspace
	dbvel, dacc []motion
	dfrc        []force
}

func newKinAdjoint(nb, nv int) *kinAdjoint {
	return &kinAdjoint{
		dp: make([]r3.Vec, nb), dphi: make([]r3.Vec, nb), ds: make([]motion, nv), dvel: make([]motion, nb),
		din: make([]inertia, nb), dic: make([]inertia, nb),
		dbvel: make([]motion, nb), dacc: make([]motion, nb), dfrc: make([]force, nb),
	}
}

func (ka *kinAdjoint) reset() {
	clear(ka.dp)
	clear(ka.dphi)
	clear(ka.ds)
	clear(ka.dvel)
	clear(ka.din)
}

// mdot returns the pairing of a motion bar with a motion.
func mdot(a, b motion) float64 { return r3.Dot(a.w, b.w) + r3.Dot(a.v, b.v) }

// frob returns Σ a∘b.
func frob(a, b contact.Mat3) float64 {
	var s float64
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// skewT returns the gradient with respect to v of ⟨m, [v]×⟩.
func skewT(m contact.Mat3) r3.Vec {
	return r3.Vec{X: m[7] - m[5], Y: m[2] - m[6], Z: m[3] - m[1]}
}

// applyT returns the bar of x in I·x for the force bar f̄: I is symmetric,
// so it is I applied to f̄ read as a motion.
func (a inertia) applyT(f force) motion {
	r := a.apply(motion{w: f.n, v: f.f})
	return motion{w: r.n, v: r.f}
}

// barOfApply adds to ib the bar of the inertia in I·x for the force bar f̄.
func (ib *inertia) barOfApply(x motion, f force) {
	// n = Io ω + h × v,  f = m v − h × ω: Īo += n̄ ωᵀ.
	n, w, io := f.n, x.w, &ib.io
	io[0] += n.X * w.X
	io[1] += n.X * w.Y
	io[2] += n.X * w.Z
	io[3] += n.Y * w.X
	io[4] += n.Y * w.Y
	io[5] += n.Y * w.Z
	io[6] += n.Z * w.X
	io[7] += n.Z * w.Y
	io[8] += n.Z * w.Z
	ib.h = r3.Add(ib.h, r3.Sub(r3.Cross(x.v, f.n), r3.Cross(x.w, f.f)))
	ib.m += r3.Dot(f.f, x.v)
}

// crossMBarA returns the bar of a in a ×ₘ b for the motion bar c̄.
func crossMBarA(b, c motion) motion {
	return motion{w: r3.Add(r3.Cross(b.w, c.w), r3.Cross(b.v, c.v)), v: r3.Cross(b.w, c.v)}
}

// crossMBarB returns the bar of b in a ×ₘ b for the motion bar c̄.
func crossMBarB(a, c motion) motion {
	return motion{w: r3.Add(r3.Cross(c.w, a.w), r3.Cross(c.v, a.v)), v: r3.Cross(c.v, a.w)}
}

// crossFBarA returns the bar of a in a ×* f for the force bar ḡ.
func crossFBarA(f, g force) motion {
	return motion{w: r3.Add(r3.Cross(f.n, g.n), r3.Cross(f.f, g.f)), v: r3.Cross(f.f, g.n)}
}

// crossFBarF returns the bar of f in a ×* f for the force bar ḡ.
func crossFBarF(a motion, g force) force {
	return force{n: r3.Cross(g.n, a.w), f: r3.Add(r3.Cross(g.n, a.v), r3.Cross(g.f, a.w))}
}

// update is the adjoint of kinTangent.update: from the bars in ka (dp, dphi,
// ds, dvel, din, all consumed) it adds the bars of the state tangent to qBar
// and vBar and of the model tangent to gb.
func (ka *kinAdjoint) update(m *Model, lay *layout, k *kinematics, q, v, qBar, vBar []float64, gb *modelTangent) {
	for i := len(m.Bodies) - 1; i >= 0; i-- {
		b := &m.Bodies[i]
		bl := &lay.bodies[i]
		var prot = contact.IdentityQuat
		var po r3.Vec
		if bl.parent >= 0 {
			prot = k.pose[bl.parent].Rot
			po = k.pose[bl.parent].Pos
		}
		o := k.pose[i].Pos
		frameRot := prot.Mul(bl.jointFrame.Rot)
		rot := k.pose[i].Rot
		r := rot.Mat()
		c := k.com[i]
		mass := b.Mass

		// Inertia: din = (dm, dm c + m dc, dic + dm ccᵀ + m(dĉ ĉᵀ + ĉ dĉᵀ)).
		ib := ka.din[i]
		cs := contact.Skew3(c)
		gb.mass[i] += ib.m + r3.Dot(ib.h, c) + frob(ib.io, cs.Mul(cs.T()))
		dcb := r3.Scale(mass, ib.h)
		dcb = r3.Add(dcb, skewT(ib.io.Mul(cs).Add(ib.io.T().Mul(cs)).Scale(mass)))
		ic := r.Mul(b.Inertia).Mul(r.T())
		phib := skewT(ib.io.Mul(ic.T()).Add(ic.T().Mul(ib.io).Scale(-1)))
		gi := r.T().Mul(ib.io).Mul(r)
		for e := range gi {
			gb.inertia[i][e] += gi[e]
		}
		// dc = dp + dφ × (c − o) + R dcom.
		pb := dcb
		phib = r3.Add(phib, r3.Cross(r3.Sub(c, o), dcb))
		gb.com[i] = r3.Add(gb.com[i], rot.InvRotate(dcb))

		// Velocity: vel = pvel + Σ ds_d v_d + s_d dv_d.
		vb := ka.dvel[i]
		if bl.parent >= 0 {
			ka.dvel[bl.parent] = ka.dvel[bl.parent].add(vb)
		}
		for d := 0; d < bl.nv; d++ {
			j := bl.vOff + d
			ka.ds[j] = ka.ds[j].add(vb.scale(v[j]))
			vBar[j] += mdot(vb, k.s[j])
		}
		// Motion subspace columns: ds = (dφ × s.w, dφ × vcw − dw × o − s.w × dp).
		for d := 0; d < bl.nv; d++ {
			if b.Joint.Kind == Free && d >= 3 {
				continue
			}
			sd := k.s[bl.vOff+d]
			sb := ka.ds[bl.vOff+d]
			vcw := r3.Add(sd.v, r3.Cross(sd.w, o))
			dwb := r3.Add(sb.w, r3.Cross(sb.v, o))
			phib = r3.Add(phib, r3.Add(r3.Cross(sd.w, dwb), r3.Cross(vcw, sb.v)))
			pb = r3.Add(pb, r3.Cross(sd.w, sb.v))
		}
		pb = r3.Add(pb, ka.dp[i])
		phib = r3.Add(phib, ka.dphi[i])

		qb := qBar[bl.qOff : bl.qOff+bl.nq]
		qi := q[bl.qOff : bl.qOff+bl.nq]
		switch b.Joint.Kind {
		case Free:
			x := frameRot.InvRotate(pb)
			qb[0] += x.X
			qb[1] += x.Y
			qb[2] += x.Z
			rotTangentT(contact.Quat{W: qi[3], X: qi[4], Y: qi[5], Z: qi[6]}, frameRot.InvRotate(phib), qb[3:7])
		case Ball:
			rotTangentT(contact.Quat{W: qi[0], X: qi[1], Y: qi[2], Z: qi[3]}, frameRot.InvRotate(phib), qb[0:4])
		case Revolute:
			qb[0] += r3.Dot(bl.jointAxis, frameRot.InvRotate(phib))
		case Prismatic:
			qb[0] += r3.Dot(bl.jointAxis, frameRot.InvRotate(pb))
		}
		if p := bl.parent; p >= 0 {
			ka.dp[p] = r3.Add(ka.dp[p], pb)
			ka.dphi[p] = r3.Add(ka.dphi[p], r3.Add(phib, r3.Cross(r3.Sub(o, po), pb)))
		}
	}
}

// rotTangentT adds to dst the bar of dq in rotTangent(q, dq) = 2 vec(dq ⊗ q*)
// for the bar x: right multiplication by q* transposes to right
// multiplication by q.
func rotTangentT(q contact.Quat, x r3.Vec, dst []float64) {
	d := contact.Quat{X: 2 * x.X, Y: 2 * x.Y, Z: 2 * x.Z}.Mul(q)
	dst[0] += d.W
	dst[1] += d.X
	dst[2] += d.Y
	dst[3] += d.Z
}

// massMatrix is the adjoint of kinTangent.massMatrix: from the bar of the
// per-tree mass blocks it adds the bars of ds and din (ka) and of the
// armature (gb).
func (ka *kinAdjoint) massMatrix(m *Model, lay *layout, k *kinematics, bar []float64, gb *modelTangent) {
	clear(ka.dic)
	for i := range m.Bodies {
		bl := &lay.bodies[i]
		tr := &lay.trees[bl.tree]
		blk := bar[tr.massOffset : tr.massOffset+tr.nv*tr.nv]
		if jointDriven(m.Bodies[i].Joint.Kind) {
			for d := 0; d < bl.nv; d++ {
				di := bl.vOff + d - tr.vOff
				gb.armature[i] += blk[di*tr.nv+di]
			}
		}
		for d := 0; d < bl.nv; d++ {
			di := bl.vOff + d - tr.vOff
			sd := k.s[bl.vOff+d]
			f := k.ic[i].apply(sd)
			var dfb force
			for j := i; j >= 0; j = lay.bodies[j].parent {
				jl := &lay.bodies[j]
				for e := 0; e < jl.nv; e++ {
					ei := jl.vOff + e - tr.vOff
					var hb float64
					switch {
					case j == i && e > d:
						continue // the same entry as (e, d), written twice
					case j == i && e == d:
						hb = blk[di*tr.nv+di]
					default:
						hb = blk[ei*tr.nv+di] + blk[di*tr.nv+ei]
					}
					if hb == 0 {
						continue
					}
					// h = ds_e·f + s_e·df.
					se := k.s[jl.vOff+e]
					ka.ds[jl.vOff+e] = ka.ds[jl.vOff+e].add(motion{w: r3.Scale(hb, f.n), v: r3.Scale(hb, f.f)})
					dfb = dfb.add(force{n: r3.Scale(hb, se.w), f: r3.Scale(hb, se.v)})
				}
			}
			// df = dIc s_d + Ic ds_d.
			ka.dic[i].barOfApply(sd, dfb)
			ka.ds[bl.vOff+d] = ka.ds[bl.vOff+d].add(k.ic[i].applyT(dfb))
		}
	}
	// Composite inertias: dIc_p = din_p + Σ dIc_children.
	for i := range m.Bodies {
		if p := lay.bodies[i].parent; p >= 0 {
			ka.dic[i] = ka.dic[i].add(ka.dic[p])
		}
		ka.din[i] = ka.din[i].add(ka.dic[i])
	}
}

// bias is the adjoint of kinTangent.bias for the pass bp (evaluated at joint
// velocities v): from the bar cb of the bias it adds the bars of dv (vBar),
// of the kinematic tangents (ka) and of gravity (gb).
func (ka *kinAdjoint) bias(m *Model, lay *layout, k *kinematics, bp *biasPrimal, v, cb, vBar []float64, t float64, gb *modelTangent) {
	// Backward accumulation dfrc_p += dfrc_i, then dc_d = ds_d·frc + s_d·dfrc.
	for i := range m.Bodies {
		bl := &lay.bodies[i]
		var fb force
		if p := bl.parent; p >= 0 {
			fb = ka.dfrc[p]
		}
		for d := 0; d < bl.nv; d++ {
			j := bl.vOff + d
			x := cb[j]
			if x == 0 {
				continue
			}
			sd := k.s[j]
			fb = fb.add(force{n: r3.Scale(x, sd.w), f: r3.Scale(x, sd.v)})
			ka.ds[j] = ka.ds[j].add(motion{w: r3.Scale(x, bp.frc[i].n), v: r3.Scale(x, bp.frc[i].f)})
		}
		ka.dfrc[i] = fb
	}
	// Loads: dfrc_b.n −= dp × f.
	for li := range m.Loads {
		l := &m.Loads[li]
		f, _ := l.At(t)
		pose := k.pose[l.Body]
		p := pose.Apply(l.Point)
		dpb := r3.Cross(ka.dfrc[l.Body].n, f)
		ka.dp[l.Body] = r3.Add(ka.dp[l.Body], dpb)
		ka.dphi[l.Body] = r3.Add(ka.dphi[l.Body], r3.Cross(r3.Sub(p, pose.Pos), dpb))
	}
	clear(ka.dacc)
	clear(ka.dbvel)
	for i := len(m.Bodies) - 1; i >= 0; i-- {
		bl := &lay.bodies[i]
		in := k.in[i]
		vel := bp.bvel[i]
		fb := ka.dfrc[i]
		// dfrc = din·acc + in·dacc + dvel ×* iv + vel ×* div.
		ka.din[i].barOfApply(bp.acc[i], fb)
		accb := ka.dacc[i].add(in.applyT(fb))
		velb := ka.dbvel[i].add(crossFBarA(bp.iv[i], fb))
		divb := crossFBarF(vel, fb)
		// div = din·vel + in·dvel.
		ka.din[i].barOfApply(vel, divb)
		velb = velb.add(in.applyT(divb))
		// dacc = dpa + dvel ×ₘ moving + vel ×ₘ dmoving.
		velb = velb.add(crossMBarA(bp.moving[i], accb))
		movb := crossMBarB(vel, accb)
		if p := bl.parent; p >= 0 {
			ka.dacc[p] = ka.dacc[p].add(accb)
			ka.dbvel[p] = ka.dbvel[p].add(velb)
		} else {
			gb.gravity = r3.Sub(gb.gravity, accb.v)
		}
		// dvel = dpv + Σ dx_d; dmoving = Σ dx_d over the moving columns;
		// dx_d = ds_d v_d + s_d dv_d.
		for d := 0; d < bl.nv; d++ {
			j := bl.vOff + d
			xb := velb
			if !(m.Bodies[i].Joint.Kind == Free && d >= 3) {
				xb = xb.add(movb)
			}
			ka.ds[j] = ka.ds[j].add(xb.scale(v[j]))
			vBar[j] += mdot(xb, k.s[j])
		}
	}
}
