package scenarios

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"stickslip/sim"

	"gopkg.in/yaml.v3"
)

// The fields of the actuator and controller parts of a scene file.
var (
	actuatorFields    = []string{"name", "joint", "effort_limit"}
	controllerFields  = []string{"pd", "feedforward"}
	pdFields          = []string{"kp", "kd", "targets"}
	feedforwardFields = []string{"efforts"}
	tableFields       = []string{"columns", "rows", "file"}
)

// maxTableBytes bounds a table file read from disk. Real tables of
// targets or efforts are far smaller; the bound keeps a mistaken path (a
// device, a huge log) from exhausting memory.
const maxTableBytes = 64 << 20

// actuators decodes the actuator list against the bodies in tree order.
func (d *decoder) actuators(n *yaml.Node, bodies []sim.Body) []sim.Actuator {
	if n == nil {
		return nil
	}
	var out []sim.Actuator
	names := map[string]*yaml.Node{} // actuator name → its name node
	driven := map[string]string{}    // joint name → actuator name
	for i, e := range d.seq(n, "actuators", "actuators") {
		path := elemPath("actuators", i, e)
		f := d.mapping(e, path, actuatorFields...)
		nn := f.require("name", "every actuator needs a name (it heads its column in controller tables)")
		name := d.name(nn, f.sub("name"))
		if prev, dup := names[name]; dup {
			d.fail(nn, f.sub("name"), "actuator name %q is already used at line %d; actuator names must be unique", name, prev.Line)
		}
		names[name] = nn
		jn := f.require("joint", "name the revolute or prismatic joint the actuator drives")
		joint := d.name(jn, f.sub("joint"))
		idx := slices.IndexFunc(bodies, func(b sim.Body) bool { return b.Joint.Name == joint })
		if idx < 0 {
			d.fail(jn, f.sub("joint"), "unknown joint %q; joints an actuator can drive: %s", joint, drivable(bodies))
		}
		if k := bodies[idx].Joint.Kind; k != sim.Revolute && k != sim.Prismatic {
			d.fail(jn, f.sub("joint"), "joint %q is a %s joint; an actuator drives a revolute or prismatic joint (here: %s)", joint, k, drivable(bodies))
		}
		if prev, dup := driven[joint]; dup {
			d.fail(jn, f.sub("joint"), "joint %q is already driven by actuator %q; give each joint one actuator", joint, prev)
		}
		driven[joint] = name
		a := sim.Actuator{Name: name, Body: idx}
		if v := f.get("effort_limit"); v != nil {
			// Zero means "no limit" to the model; leave the field out for that.
			a.EffortLimit = d.positive(v, f.sub("effort_limit"), effortUnit(bodies[idx].Joint.Kind)+" (leave it out for no limit)")
		}
		out = append(out, a)
	}
	return out
}

// drivable lists the revolute and prismatic joints, for messages.
func drivable(bodies []sim.Body) string {
	var s []string
	for _, b := range bodies {
		if k := b.Joint.Kind; k == sim.Revolute || k == sim.Prismatic {
			s = append(s, b.Joint.Name)
		}
	}
	if len(s) == 0 {
		return "none (the scene has no revolute or prismatic joints)"
	}
	return strings.Join(s, ", ")
}

func effortUnit(k sim.JointKind) string {
	if k == sim.Prismatic {
		return "N"
	}
	return "N·m"
}

// controller decodes the controller block: PD tracking, feedforward, or
// their sum.
func (d *decoder) controller(n *yaml.Node, acts []sim.Actuator, bodies []sim.Body) sim.Controller {
	if n == nil {
		return nil
	}
	f := d.mapping(n, "controller", controllerFields...)
	if len(acts) == 0 {
		d.fail(n, "controller", "the scene has no actuators to command; declare them under actuators")
	}
	if !f.has("pd") && !f.has("feedforward") {
		d.fail(n, "controller", "give pd (tracking of a target table), feedforward (an effort table) or both")
	}
	var parts sim.Sum
	if v := f.get("pd"); v != nil {
		parts = append(parts, d.pd(v, f.sub("pd"), acts, bodies))
	}
	if v := f.get("feedforward"); v != nil {
		g := d.mapping(v, f.sub("feedforward"), feedforwardFields...)
		tn := g.require("efforts", "give the effort table: rows or file")
		tb, _ := d.table(tn, g.sub("efforts"), acts)
		parts = append(parts, &sim.Feedforward{Efforts: tb})
	}
	if len(parts) == 1 {
		return parts[0]
	}
	return parts
}

// pd decodes the PD tracking part.
func (d *decoder) pd(n *yaml.Node, path string, acts []sim.Actuator, bodies []sim.Body) *sim.PD {
	f := d.mapping(n, path, pdFields...)
	c := &sim.PD{Kp: make([]float64, len(acts)), Kd: make([]float64, len(acts))}
	kpNodes := d.gains(f.get("kp"), f.sub("kp"), acts, bodies, c.Kp, "/rad", "/m")
	kdNodes := d.gains(f.get("kd"), f.sub("kd"), acts, bodies, c.Kd, "·s/rad", "·s/m")
	tn := f.require("targets", "give the target table: rows or file")
	var has []bool
	c.Targets, has = d.table(tn, f.sub("targets"), acts)
	for i, a := range acts {
		for _, g := range []struct {
			key   string
			nodes []*yaml.Node
		}{{"kp", kpNodes}, {"kd", kdNodes}} {
			if g.nodes[i] != nil && !has[i] {
				d.fail(g.nodes[i], f.sub(g.key)+"."+a.Name, "actuator %q has gains but no column in %s; add one, or leave its gains out", a.Name, f.sub("targets"))
			}
		}
		// A target beyond a joint limit makes the arm press on its stop.
		if j := bodies[a.Body].Joint; has[i] && j.Limited {
			for r, row := range c.Targets.Values {
				if q := row[i]; q < j.Lower || q > j.Upper {
					d.warn(tn, f.sub("targets"), Warning{Msg: fmt.Sprintf("target %g for actuator %q at %g s is outside the limits [%g, %g] of joint %q", q, a.Name, c.Targets.Times[r], j.Lower, j.Upper, j.Name)})
					break
				}
			}
		}
	}
	return c
}

// gains decodes a mapping from actuator names to gains ≥ 0 into dst and
// returns the value node of each actuator given (nil if not given).
func (d *decoder) gains(n *yaml.Node, path string, acts []sim.Actuator, bodies []sim.Body, dst []float64, rotUnit, linUnit string) []*yaml.Node {
	given := make([]*yaml.Node, len(acts))
	if n == nil {
		return given
	}
	n = d.resolve(n, path)
	if n.Kind != yaml.MappingNode {
		d.fail(n, path, "must be a mapping from actuator names to gains, such as {%s: 100}", acts[0].Name)
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k := d.resolve(n.Content[i], path)
		if k.Kind != yaml.ScalarNode {
			d.fail(k, path, "keys must be actuator names: %s", actuatorNames(acts))
		}
		idx := slices.IndexFunc(acts, func(a sim.Actuator) bool { return a.Name == k.Value })
		p := join(path, k.Value)
		if idx < 0 {
			d.fail(k, p, "unknown actuator %q; actuators: %s", k.Value, actuatorNames(acts))
		}
		if given[idx] != nil {
			d.fail(k, p, "gain given twice (first at line %d)", given[idx].Line)
		}
		v := d.resolve(n.Content[i+1], p)
		if v.Kind == yaml.ScalarNode && v.ShortTag() == "!!null" {
			continue // null counts as absent
		}
		unit := "N·m" + rotUnit
		if bodies[acts[idx].Body].Joint.Kind == sim.Prismatic {
			unit = "N" + linUnit
		}
		dst[idx] = d.nonNegative(v, p, unit)
		given[idx] = v
	}
	return given
}

func actuatorNames(acts []sim.Actuator) string {
	s := make([]string, len(acts))
	for i, a := range acts {
		s[i] = a.Name
	}
	return strings.Join(s, ", ")
}

// table decodes a table of times and one value per actuator, written
// inline as rows or read from a CSV file. It returns the table (one column
// per actuator, in actuator order; columns the table leaves out are zero)
// and which actuators it has a column for.
func (d *decoder) table(n *yaml.Node, path string, acts []sim.Actuator) (sim.Table, []bool) {
	f := d.mapping(n, path, tableFields...)
	f.exclusive("rows", "file")
	f.exclusive("columns", "file")
	if v := f.get("file"); v != nil {
		return d.csvTable(v, f.sub("file"), acts)
	}
	rn := f.require("rows", "give rows: [[time, one value per column], ...], or file: a CSV file with a header t,"+strings.Join(strings.Split(actuatorNames(acts), ", "), ","))
	// cols[k] is the actuator index of value column k.
	cols := make([]int, len(acts))
	for i := range cols {
		cols[i] = i
	}
	if v := f.get("columns"); v != nil {
		cols = cols[:0]
		for i, e := range d.seq(v, f.sub("columns"), "actuator names") {
			p := fmt.Sprintf("%s[%d]", f.sub("columns"), i)
			name := d.name(e, p)
			idx := slices.IndexFunc(acts, func(a sim.Actuator) bool { return a.Name == name })
			if idx < 0 {
				d.fail(e, p, "unknown actuator %q; actuators: %s", name, actuatorNames(acts))
			}
			if slices.Contains(cols, idx) {
				d.fail(e, p, "actuator %q has two columns", name)
			}
			cols = append(cols, idx)
		}
		if len(cols) == 0 {
			d.fail(v, f.sub("columns"), "must name at least one actuator")
		}
	}
	colNames := make([]string, len(cols))
	for k, i := range cols {
		colNames[k] = acts[i].Name
	}
	rows := d.seq(rn, f.sub("rows"), "rows [time, value, ...]")
	if len(rows) == 0 {
		d.fail(rn, f.sub("rows"), "needs at least one row [time, %s]", strings.Join(colNames, ", "))
	}
	tb := sim.Table{Times: make([]float64, len(rows)), Values: make([][]float64, len(rows))}
	for r, row := range rows {
		p := fmt.Sprintf("%s[%d]", f.sub("rows"), r)
		if row.Kind != yaml.SequenceNode {
			d.fail(row, p, "must be a row [t, %s]: the time and one value per column", strings.Join(colNames, ", "))
		}
		if len(row.Content) != 1+len(cols) {
			d.fail(row, p, "has %d numbers; want %d: the time and one value per column [t, %s]", len(row.Content), 1+len(cols), strings.Join(colNames, ", "))
		}
		vals := d.floats(row, p, 1+len(cols), "")
		tb.Times[r] = vals[0]
		tb.Values[r] = make([]float64, len(acts))
		for k, i := range cols {
			tb.Values[r][i] = vals[1+k]
		}
		if r > 0 && !(vals[0] > tb.Times[r-1]) {
			d.fail(row.Content[0], p+"[0]", "times must increase down the table: %g s follows %g s", vals[0], tb.Times[r-1])
		}
	}
	has := make([]bool, len(acts))
	for _, i := range cols {
		has[i] = true
	}
	return tb, has
}

// csvTable reads a table from the CSV file named by the scalar n. Its
// header is t and then actuator names; errors in the file name the file,
// line and column.
func (d *decoder) csvTable(n *yaml.Node, path string, acts []sim.Actuator) (sim.Table, []bool) {
	name := d.text(n, path)
	if name == "" {
		d.fail(n, path, "must name a CSV file (relative to the scene file)")
	}
	src, shown, err := d.readFile(name)
	if err != nil {
		d.fail(n, path, "cannot read table file: %v", err)
	}
	bad := func(line, col int, column, format string, args ...any) {
		e := &Error{File: shown, Line: line, Column: col, Msg: fmt.Sprintf(format, args...)}
		if column != "" {
			e.Field = fmt.Sprintf("column %q", column)
		}
		panic(e)
	}
	r := csv.NewReader(bytes.NewReader(src))
	r.Comment = '#'
	r.FieldsPerRecord = -1 // counted below, with a clearer message
	r.TrimLeadingSpace = true
	read := func() []string {
		rec, err := r.Read()
		if err == io.EOF {
			return nil
		}
		var pe *csv.ParseError
		if errors.As(err, &pe) {
			bad(pe.Line, pe.Column, "", "not valid CSV: %v", pe.Err)
		}
		if err != nil {
			bad(0, 0, "", "cannot read: %v", err)
		}
		return rec
	}
	header := read()
	if header == nil {
		bad(0, 0, "", "empty file; want a header t,%s and rows of numbers", strings.ReplaceAll(actuatorNames(acts), ", ", ","))
	}
	hdrLine, _ := r.FieldPos(0)
	cols := make([]int, len(header)-1)
	for k, h := range header {
		h = strings.TrimSpace(h)
		_, col := r.FieldPos(k)
		if k == 0 {
			if h != "t" {
				bad(hdrLine, col, h, "the first column must be t, the time in s")
			}
			continue
		}
		idx := slices.IndexFunc(acts, func(a sim.Actuator) bool { return a.Name == h })
		if idx < 0 {
			bad(hdrLine, col, h, "unknown actuator %q; actuators: %s", h, actuatorNames(acts))
		}
		if slices.Contains(cols[:k-1], idx) {
			bad(hdrLine, col, h, "actuator %q has two columns", h)
		}
		cols[k-1] = idx
	}
	if len(cols) == 0 {
		bad(hdrLine, 1, "", "the header names no actuators; want t,%s", strings.ReplaceAll(actuatorNames(acts), ", ", ","))
	}
	var tb sim.Table
	for {
		rec := read()
		if rec == nil {
			break
		}
		line, _ := r.FieldPos(0)
		if len(rec) != len(header) {
			bad(line, 1, "", "row has %d values; the header has %d (%s)", len(rec), len(header), strings.Join(header, ","))
		}
		vals := make([]float64, len(rec))
		for k, s := range rec {
			_, col := r.FieldPos(k)
			s = strings.TrimSpace(s)
			x, err := strconv.ParseFloat(s, 64)
			if err != nil && !errors.Is(err, strconv.ErrRange) {
				bad(line, col, strings.TrimSpace(header[k]), "must be a number, got %q", s)
			}
			if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
				bad(line, col, strings.TrimSpace(header[k]), "must be a finite number, got %q", s)
			}
			vals[k] = x
		}
		if len(tb.Times) > 0 && !(vals[0] > tb.Times[len(tb.Times)-1]) {
			_, col := r.FieldPos(0)
			bad(line, col, "t", "times must increase down the table: %g s follows %g s", vals[0], tb.Times[len(tb.Times)-1])
		}
		row := make([]float64, len(acts))
		for k, i := range cols {
			row[i] = vals[1+k]
		}
		tb.Times = append(tb.Times, vals[0])
		tb.Values = append(tb.Values, row)
	}
	if len(tb.Times) == 0 {
		bad(hdrLine, 1, "", "has a header but no rows")
	}
	has := make([]bool, len(acts))
	for _, i := range cols {
		has[i] = true
	}
	return tb, has
}

// readFile reads a file named in the scene: from the loader's file system
// if it has one, else from disk relative to the scene file's directory. It
// returns the path to show in messages.
func (d *decoder) readFile(name string) ([]byte, string, error) {
	var (
		f     fs.File
		err   error
		shown string
	)
	if d.files != nil {
		if !fs.ValidPath(name) {
			return nil, name, fmt.Errorf("%q: here a table file must be a relative path within the scene's directory (no leading /, no ..)", name)
		}
		shown = name
		f, err = d.files.Open(name)
	} else {
		shown = name
		if !filepath.IsAbs(name) {
			shown = filepath.Join(filepath.Dir(d.file), name)
		}
		// Stat first: opening a named pipe would block.
		var st os.FileInfo
		if st, err = os.Stat(shown); err == nil && !st.Mode().IsRegular() {
			return nil, shown, fmt.Errorf("%s is not a regular file", shown)
		}
		if err == nil {
			f, err = os.Open(shown)
		}
	}
	if err != nil {
		var pe *fs.PathError
		if errors.As(err, &pe) {
			err = fmt.Errorf("%s: %v", shown, pe.Err)
		}
		return nil, shown, err
	}
	defer f.Close()
	if st, err := f.Stat(); err == nil && !st.Mode().IsRegular() {
		return nil, shown, fmt.Errorf("%s is not a regular file", shown)
	}
	src, err := io.ReadAll(io.LimitReader(f, maxTableBytes+1))
	if err != nil {
		return nil, shown, fmt.Errorf("%s: %v", shown, err)
	}
	if len(src) > maxTableBytes {
		return nil, shown, fmt.Errorf("%s is larger than %d MiB", shown, maxTableBytes>>20)
	}
	return src, shown, nil
}
