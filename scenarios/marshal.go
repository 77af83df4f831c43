package scenarios

import (
	"bytes"
	"fmt"
	"slices"
	"strconv"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
	"gopkg.in/yaml.v3"
)

// Marshal writes s as a scene file. Loading the result gives the same Model
// and Settings: every number is written with the shortest decimal form that
// reads back to the same float64. Mass properties are written as mass,
// centre of mass and inertia (a density the scene was read with is not
// kept), bodies resting "on" a plane get their resolved position, and
// controller tables read from CSV files are written inline. The controller
// must be a *sim.PD, a *sim.Feedforward, or a sim.Sum of at most one of each.
func Marshal(s *Scene) ([]byte, error) {
	if s == nil || s.Model == nil {
		return nil, fmt.Errorf("scenarios: Marshal of a scene without a model")
	}
	m := s.Model
	root := mapNode()
	if s.Name != "" {
		add(root, "name", str(s.Name))
	}
	if s.Description != "" {
		add(root, "description", str(s.Description))
	}
	add(root, "gravity", vec(m.Gravity))
	add(root, "settings", settingsNode(s.Settings))
	add(root, "materials", materialsNode(m))
	if len(m.Static) > 0 {
		seq := seqNode(false)
		for i := range m.Static {
			st := &m.Static[i]
			e := mapNode()
			add(e, "name", str(st.Name))
			shapeInto(e, &st.Shape)
			if st.Material != "" {
				add(e, "material", str(st.Material))
			}
			seq.Content = append(seq.Content, e)
		}
		add(root, "static", seq)
	}
	if len(m.Bodies) > 0 {
		seq := seqNode(false)
		for i := range m.Bodies {
			e, err := bodyNode(m, i)
			if err != nil {
				return nil, err
			}
			seq.Content = append(seq.Content, e)
		}
		add(root, "bodies", seq)
	}
	if len(m.Loads) > 0 {
		seq := seqNode(false)
		for i, l := range m.Loads {
			if l.Body < 0 || l.Body >= len(m.Bodies) {
				return nil, fmt.Errorf("scenarios: load %d acts on body %d, but the model has %d bodies", i, l.Body, len(m.Bodies))
			}
			e := mapNode()
			add(e, "body", str(m.Bodies[l.Body].Name))
			if l.Point != (r3.Vec{}) {
				add(e, "point", vec(l.Point))
			}
			if len(l.Schedule) == 0 {
				add(e, "force", vec(l.Force))
				add(e, "torque", vec(l.Torque))
			} else {
				rows := seqNode(false)
				for _, k := range l.Schedule {
					r := mapNode()
					r.Style = yaml.FlowStyle
					add(r, "time", num(k.T))
					add(r, "force", vec(k.Force))
					add(r, "torque", vec(k.Torque))
					rows.Content = append(rows.Content, r)
				}
				add(e, "schedule", rows)
			}
			seq.Content = append(seq.Content, e)
		}
		add(root, "loads", seq)
	}
	if len(m.Actuators) > 0 {
		seq, err := actuatorsNode(m)
		if err != nil {
			return nil, err
		}
		add(root, "actuators", seq)
	}
	if m.Controller != nil {
		c, err := controllerNode(m)
		if err != nil {
			return nil, err
		}
		add(root, "controller", c)
	}
	var buf bytes.Buffer
	enc := yaml.NewEncoder(&buf)
	enc.SetIndent(2)
	if err := enc.Encode(&yaml.Node{Kind: yaml.DocumentNode, Content: []*yaml.Node{root}}); err != nil {
		return nil, err
	}
	if err := enc.Close(); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

func settingsNode(s sim.Settings) *yaml.Node {
	n := mapNode()
	// Zero means "default" to sim.Settings and is rejected by the loader,
	// so only positive values are written.
	pos := func(key string, v float64) {
		if v > 0 {
			add(n, key, num(v))
		}
	}
	pos("time_step", s.TimeStep)
	pos("duration", s.Duration)
	if s.FrameEvery > 0 {
		add(n, "frame_every", integer(s.FrameEvery))
	}
	pos("contact_margin", s.Margin)
	pos("correction_rate", s.CorrectionRate)
	pos("correction_max_speed", s.MaxCorrection)
	pos("bounce_threshold", s.BounceThreshold)
	sv := mapNode()
	if s.Solver.Tolerance > 0 {
		add(sv, "tolerance", num(s.Solver.Tolerance))
	}
	if s.Solver.MaxIterations > 0 {
		add(sv, "max_iterations", integer(s.Solver.MaxIterations))
	}
	add(sv, "smoothing", num(s.Solver.Smoothing))
	add(n, "solver", sv)
	return n
}

func materialsNode(m *sim.Model) *yaml.Node {
	n := mapNode()
	def := mapNode()
	def.Style = yaml.FlowStyle
	add(def, "friction", num(m.Materials.Default.Friction))
	add(def, "restitution", num(m.Materials.Default.Restitution))
	add(n, "default", def)
	// The model keeps no list of surfaces; collect the names in use.
	var surfaces []string
	use := func(s string) {
		if s != "" && !slices.Contains(surfaces, s) {
			surfaces = append(surfaces, s)
		}
	}
	for _, st := range m.Static {
		use(st.Material)
	}
	for _, b := range m.Bodies {
		use(b.Material)
	}
	for _, p := range m.Materials.Pairs {
		use(p.A)
		use(p.B)
	}
	if len(surfaces) > 0 {
		seq := seqNode(true)
		for _, s := range surfaces {
			seq.Content = append(seq.Content, str(s))
		}
		add(n, "surfaces", seq)
	}
	if len(m.Materials.Pairs) > 0 {
		seq := seqNode(false)
		for _, p := range m.Materials.Pairs {
			e := mapNode()
			e.Style = yaml.FlowStyle
			between := seqNode(true)
			between.Content = append(between.Content, str(p.A), str(p.B))
			add(e, "between", between)
			add(e, "friction", num(p.Friction))
			add(e, "restitution", num(p.Restitution))
			seq.Content = append(seq.Content, e)
		}
		add(n, "pairs", seq)
	}
	return n
}

// shapeInto writes a shape's kind, sizes and pose into the mapping e.
func shapeInto(e *yaml.Node, s *contact.Shape) {
	add(e, "kind", str(s.Kind.String()))
	switch s.Kind {
	case contact.Sphere:
		add(e, "radius", num(s.Radius))
	case contact.Box:
		add(e, "size", vec(r3.Scale(2, s.HalfExtents)))
	case contact.Capsule, contact.Cylinder:
		add(e, "radius", num(s.Radius))
		add(e, "length", num(2*s.HalfLength))
	}
	if s.Local != contact.IdentityPose {
		add(e, "pose", poseNode(s.Local))
	}
}

func poseNode(p contact.Pose) *yaml.Node {
	n := mapNode()
	n.Style = yaml.FlowStyle
	if p.Pos != (r3.Vec{}) {
		add(n, "position", vec(p.Pos))
	}
	if q := p.Rot; q != contact.IdentityQuat {
		add(n, "quat", floats(q.W, q.X, q.Y, q.Z))
	}
	return n
}

func bodyNode(m *sim.Model, i int) (*yaml.Node, error) {
	b := &m.Bodies[i]
	j := &b.Joint
	e := mapNode()
	add(e, "name", str(b.Name))
	if b.Material != "" {
		add(e, "material", str(b.Material))
	}
	if len(b.Shapes) > 0 {
		seq := seqNode(false)
		for k := range b.Shapes {
			s := mapNode()
			s.Style = yaml.FlowStyle
			shapeInto(s, &b.Shapes[k])
			seq.Content = append(seq.Content, s)
		}
		add(e, "shapes", seq)
	}
	add(e, "mass", num(b.Mass))
	add(e, "com", vec(b.COM))
	in := mapNode()
	in.Style = yaml.FlowStyle
	I := b.Inertia
	if I[1] == 0 && I[2] == 0 && I[3] == 0 && I[5] == 0 && I[6] == 0 && I[7] == 0 {
		add(in, "principal", floats(I[0], I[4], I[8]))
	} else {
		rows := seqNode(true)
		for r := 0; r < 3; r++ {
			rows.Content = append(rows.Content, floats(I[3*r], I[3*r+1], I[3*r+2]))
		}
		add(in, "matrix", rows)
	}
	add(e, "inertia", in)
	if j.Kind == sim.Free {
		if j.Parent != -1 || j.Frame != contact.IdentityPose {
			return nil, fmt.Errorf("scenarios: body %q: a free joint must have the world as parent and an identity frame to be written", b.Name)
		}
		add(e, "pose", poseNode(b.Start.Pose))
		if b.Start.Linear != (r3.Vec{}) || b.Start.Angular != (r3.Vec{}) {
			v := mapNode()
			v.Style = yaml.FlowStyle
			add(v, "linear", vec(b.Start.Linear))
			add(v, "angular", vec(b.Start.Angular))
			add(e, "velocity", v)
		}
		if j.Name != b.Name {
			jn := mapNode()
			add(jn, "name", str(j.Name))
			add(jn, "kind", str("free"))
			add(e, "joint", jn)
		}
		return e, nil
	}
	jn := mapNode()
	if j.Name != b.Name {
		add(jn, "name", str(j.Name))
	}
	add(jn, "kind", str(j.Kind.String()))
	if j.Parent >= 0 {
		if j.Parent >= i {
			return nil, fmt.Errorf("scenarios: body %q: its parent %d does not come before it", b.Name, j.Parent)
		}
		add(jn, "parent", str(m.Bodies[j.Parent].Name))
	} else {
		add(jn, "parent", str("world"))
	}
	if j.Frame != contact.IdentityPose {
		add(jn, "frame", poseNode(j.Frame))
	}
	switch j.Kind {
	case sim.Revolute, sim.Prismatic:
		add(jn, "axis", vec(j.Axis))
		if j.Limited {
			l := mapNode()
			l.Style = yaml.FlowStyle
			add(l, "lower", num(j.Lower))
			add(l, "upper", num(j.Upper))
			add(jn, "limits", l)
		}
		add(jn, "position", num(j.Position))
		add(jn, "velocity", num(j.Velocity))
		fallthrough
	case sim.Ball:
		if j.Rotation != (contact.Quat{}) && j.Rotation != contact.IdentityQuat {
			add(jn, "rotation", poseNode(contact.Pose{Rot: j.Rotation}))
		}
		if j.Spin != (r3.Vec{}) {
			add(jn, "spin", vec(j.Spin))
		}
		add(jn, "damping", num(j.Damping))
		add(jn, "friction", num(j.Friction))
		add(jn, "armature", num(j.Armature))
	}
	add(e, "joint", jn)
	return e, nil
}

func mapNode() *yaml.Node { return &yaml.Node{Kind: yaml.MappingNode} }

func seqNode(flow bool) *yaml.Node {
	n := &yaml.Node{Kind: yaml.SequenceNode}
	if flow {
		n.Style = yaml.FlowStyle
	}
	return n
}

func add(m *yaml.Node, key string, v *yaml.Node) {
	m.Content = append(m.Content, str(key), v)
}

func str(s string) *yaml.Node { return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: s} }

// num writes the shortest decimal that reads back to exactly f.
func num(f float64) *yaml.Node {
	if f == 0 {
		f = 0 // −0 would read back as the integer 0 anyway
	}
	return &yaml.Node{Kind: yaml.ScalarNode, Value: strconv.FormatFloat(f, 'g', -1, 64)}
}

func integer(i int) *yaml.Node {
	return &yaml.Node{Kind: yaml.ScalarNode, Value: strconv.Itoa(i)}
}

func vec(v r3.Vec) *yaml.Node { return floats(v.X, v.Y, v.Z) }

func floats(v ...float64) *yaml.Node {
	n := seqNode(true)
	for _, x := range v {
		n.Content = append(n.Content, num(x))
	}
	return n
}

func actuatorsNode(m *sim.Model) (*yaml.Node, error) {
	seq := seqNode(false)
	for _, a := range m.Actuators {
		if a.Body < 0 || a.Body >= len(m.Bodies) {
			return nil, fmt.Errorf("scenarios: actuator %q drives body %d, but the model has %d bodies", a.Name, a.Body, len(m.Bodies))
		}
		j := &m.Bodies[a.Body].Joint
		if j.Kind != sim.Revolute && j.Kind != sim.Prismatic {
			return nil, fmt.Errorf("scenarios: actuator %q drives the %s joint %q; only revolute and prismatic joints take actuators", a.Name, j.Kind, j.Name)
		}
		e := mapNode()
		e.Style = yaml.FlowStyle
		add(e, "name", str(a.Name))
		add(e, "joint", str(j.Name))
		if a.EffortLimit > 0 {
			add(e, "effort_limit", num(a.EffortLimit))
		}
		seq.Content = append(seq.Content, e)
	}
	return seq, nil
}

func controllerNode(m *sim.Model) (*yaml.Node, error) {
	var pd *sim.PD
	var ff *sim.Feedforward
	var take func(c sim.Controller) error
	take = func(c sim.Controller) error {
		switch c := c.(type) {
		case *sim.PD:
			if pd != nil {
				return fmt.Errorf("scenarios: a scene file holds one PD controller; the model has two")
			}
			pd = c
		case *sim.Feedforward:
			if ff != nil {
				return fmt.Errorf("scenarios: a scene file holds one feedforward table; the model has two")
			}
			ff = c
		case sim.Sum:
			for _, x := range c {
				if err := take(x); err != nil {
					return err
				}
			}
		default:
			return fmt.Errorf("scenarios: a controller of type %T cannot be written to a scene file (only PD, feedforward and their sum)", c)
		}
		return nil
	}
	if err := take(m.Controller); err != nil {
		return nil, err
	}
	n := len(m.Actuators)
	if n == 0 {
		return nil, fmt.Errorf("scenarios: the model has a controller but no actuators")
	}
	c := mapNode()
	if pd != nil {
		if len(pd.Kp) != n || len(pd.Kd) != n {
			return nil, fmt.Errorf("scenarios: PD controller has %d kp and %d kd gains for %d actuators", len(pd.Kp), len(pd.Kd), n)
		}
		p := mapNode()
		for _, g := range []struct {
			key string
			v   []float64
		}{{"kp", pd.Kp}, {"kd", pd.Kd}} {
			gn := mapNode()
			gn.Style = yaml.FlowStyle
			for i, a := range m.Actuators {
				add(gn, a.Name, num(g.v[i]))
			}
			add(p, g.key, gn)
		}
		t, err := tableNode(m, &pd.Targets, "PD targets")
		if err != nil {
			return nil, err
		}
		add(p, "targets", t)
		add(c, "pd", p)
	}
	if ff != nil {
		t, err := tableNode(m, &ff.Efforts, "feedforward efforts")
		if err != nil {
			return nil, err
		}
		f := mapNode()
		add(f, "efforts", t)
		add(c, "feedforward", f)
	}
	return c, nil
}

// tableNode writes a table inline, one column per actuator.
func tableNode(m *sim.Model, tb *sim.Table, what string) (*yaml.Node, error) {
	if err := tb.Validate(len(m.Actuators)); err != nil {
		return nil, fmt.Errorf("scenarios: %s: %v", what, err)
	}
	t := mapNode()
	cols := seqNode(true)
	for _, a := range m.Actuators {
		cols.Content = append(cols.Content, str(a.Name))
	}
	add(t, "columns", cols)
	rows := seqNode(false)
	for i, time := range tb.Times {
		rows.Content = append(rows.Content, floats(append([]float64{time}, tb.Values[i]...)...))
	}
	add(t, "rows", rows)
	return t, nil
}
