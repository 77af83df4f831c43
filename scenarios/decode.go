package scenarios

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
	"gopkg.in/yaml.v3"
)

// decoder walks a YAML node tree. Errors are raised by panicking with an
// *Error, which Loader.Load recovers; this keeps the many checks short.
type decoder struct {
	file string
	// origin maps nodes supplied by an override to its text, so that an
	// error in such a value names the override rather than a line.
	origin     map[*yaml.Node]string
	overlapTol float64
	// files, if not nil, is where table files named in the scene are read.
	files    fs.FS
	warnings []Warning
	visits   int
}

// fail raises an *Error located at n.
func (d *decoder) fail(n *yaml.Node, field, format string, args ...any) {
	e := &Error{File: d.file, Field: field, Msg: fmt.Sprintf(format, args...)}
	if n != nil {
		if o, ok := d.origin[n]; ok {
			e.Override = o
		} else {
			e.Line, e.Column = n.Line, n.Column
		}
	}
	panic(e)
}

// warn records a warning located at n.
func (d *decoder) warn(n *yaml.Node, field string, w Warning) {
	w.File, w.Field = d.file, field
	if n != nil {
		w.Line, w.Column = n.Line, n.Column
	}
	d.warnings = append(d.warnings, w)
}

var yamlLine = regexp.MustCompile(`line (\d+)`)

// parse reads a single YAML document and returns its root mapping.
func (d *decoder) parse(src []byte) (root *yaml.Node) {
	var doc yaml.Node
	func() {
		// The YAML parser is third-party code fed with untrusted input;
		// a panic inside it is turned into a bad-input error.
		defer func() {
			if r := recover(); r != nil {
				if _, ok := r.(*Error); ok {
					panic(r)
				}
				d.fail(nil, "", "not valid YAML (%v)", r)
			}
		}()
		dec := yaml.NewDecoder(bytes.NewReader(src))
		err := dec.Decode(&doc)
		if errors.Is(err, io.EOF) {
			d.fail(nil, "", "empty scene: expected a mapping with fields %s", strings.Join(sceneFields, ", "))
		}
		if err != nil {
			d.yamlError(err)
		}
		var extra yaml.Node
		if err := dec.Decode(&extra); !errors.Is(err, io.EOF) {
			if err != nil {
				d.yamlError(err)
			}
			d.fail(&extra, "", "a scene file holds one YAML document; found a second one")
		}
	}()
	root = doc.Content[0]
	root = d.resolve(root, "")
	if root.Kind != yaml.MappingNode {
		d.fail(root, "", "a scene must be a mapping with fields %s", strings.Join(sceneFields, ", "))
	}
	return root
}

// yamlError raises a syntax error from the YAML parser, with its line.
func (d *decoder) yamlError(err error) {
	msg := strings.TrimPrefix(err.Error(), "yaml: ")
	e := &Error{File: d.file}
	if m := yamlLine.FindStringSubmatchIndex(msg); m != nil && m[0] == 0 {
		e.Line, _ = strconv.Atoi(msg[m[2]:m[3]])
		msg = strings.TrimPrefix(msg[m[1]:], ": ")
	}
	e.Msg = "not valid YAML: " + msg
	panic(e)
}

// maxVisits bounds the nodes the decoder visits. Aliases let a small file
// stand for a huge tree; real scenes stay far below this.
const maxVisits = 1_000_000

// resolve follows aliases to the node they stand for.
func (d *decoder) resolve(n *yaml.Node, field string) *yaml.Node {
	d.visits++
	if d.visits > maxVisits {
		d.fail(n, field, "scene too large: more than %d values after expanding aliases", maxVisits)
	}
	for i := 0; n != nil && n.Kind == yaml.AliasNode; i++ {
		if i > 64 || n.Alias == nil {
			d.fail(n, field, "alias does not resolve")
		}
		n = n.Alias
	}
	if n != nil && n.Kind == yaml.DocumentNode && len(n.Content) == 1 {
		n = n.Content[0]
	}
	return n
}

// join appends a key to a field path.
func join(path, key string) string {
	if path == "" {
		return key
	}
	return path + "." + key
}

// fields is a decoded mapping: its values by key.
type fields struct {
	d    *decoder
	node *yaml.Node
	path string
	vals map[string]*yaml.Node
}

// mapping checks that n is a mapping whose keys are all among valid and
// appear once, and returns its values. A null value counts as absent.
func (d *decoder) mapping(n *yaml.Node, path string, valid ...string) *fields {
	n = d.resolve(n, path)
	if n.Kind != yaml.MappingNode {
		d.fail(n, path, "must be a mapping with fields %s", strings.Join(valid, ", "))
	}
	f := &fields{d: d, node: n, path: path, vals: map[string]*yaml.Node{}}
	keys := map[string]*yaml.Node{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k := d.resolve(n.Content[i], path)
		if k.Kind != yaml.ScalarNode {
			d.fail(k, path, "keys must be plain field names; valid fields here: %s", strings.Join(valid, ", "))
		}
		if !slices.Contains(valid, k.Value) {
			d.fail(k, join(path, k.Value), "unknown field %q; valid fields here: %s", k.Value, strings.Join(valid, ", "))
		}
		if first, dup := keys[k.Value]; dup {
			d.fail(k, join(path, k.Value), "field given twice (first at line %d)", first.Line)
		}
		keys[k.Value] = k
		v := d.resolve(n.Content[i+1], join(path, k.Value))
		if v.Kind == yaml.ScalarNode && v.ShortTag() == "!!null" {
			continue
		}
		f.vals[k.Value] = v
	}
	return f
}

// get returns the value of key, or nil.
func (f *fields) get(key string) *yaml.Node { return f.vals[key] }

// has reports whether key is present with a non-null value.
func (f *fields) has(key string) bool { return f.vals[key] != nil }

// sub returns the path of key.
func (f *fields) sub(key string) string { return join(f.path, key) }

// require fails unless key is present.
func (f *fields) require(key, what string) *yaml.Node {
	v := f.vals[key]
	if v == nil {
		f.d.fail(f.node, f.sub(key), "missing; %s", what)
	}
	return v
}

// exclusive fails if more than one of keys is present.
func (f *fields) exclusive(keys ...string) {
	var got []string
	for _, k := range keys {
		if f.has(k) {
			got = append(got, k)
		}
	}
	if len(got) > 1 {
		f.d.fail(f.vals[got[1]], f.sub(got[1]), "give only one of %s, not both %s and %s", strings.Join(keys, ", "), got[0], got[1])
	}
}

// seq checks that n is a sequence and returns its elements.
func (d *decoder) seq(n *yaml.Node, path, what string) []*yaml.Node {
	n = d.resolve(n, path)
	if n.Kind != yaml.SequenceNode {
		d.fail(n, path, "must be a sequence of %s", what)
	}
	out := make([]*yaml.Node, len(n.Content))
	for i, c := range n.Content {
		out[i] = d.resolve(c, fmt.Sprintf("%s[%d]", path, i))
	}
	return out
}

// elemPath returns the path of element i of a list, by name when the
// element has a scalar name field.
func elemPath(path string, i int, n *yaml.Node) string {
	if n.Kind == yaml.MappingNode {
		for j := 0; j+1 < len(n.Content); j += 2 {
			k, v := n.Content[j], n.Content[j+1]
			if k.Value == "name" && v.Kind == yaml.ScalarNode && v.Value != "" {
				return fmt.Sprintf("%s[%s]", path, v.Value)
			}
		}
	}
	return fmt.Sprintf("%s[%d]", path, i)
}

// float returns a finite number.
func (d *decoder) float(n *yaml.Node, path string) float64 {
	n = d.resolve(n, path)
	if n.Kind != yaml.ScalarNode {
		d.fail(n, path, "must be a number")
	}
	if t := n.ShortTag(); t != "!!int" && t != "!!float" {
		d.fail(n, path, "must be a number, got %q", n.Value)
	}
	var f float64
	if err := n.Decode(&f); err != nil {
		d.fail(n, path, "must be a finite number; %q is out of range", n.Value)
	}
	if math.IsNaN(f) || math.IsInf(f, 0) {
		d.fail(n, path, "must be a finite number, got %s", n.Value)
	}
	return f
}

// positive returns a number > 0.
func (d *decoder) positive(n *yaml.Node, path, unit string) float64 {
	f := d.float(n, path)
	if f <= 0 {
		d.fail(n, path, "must be > 0 %s, got %g", unit, f)
	}
	return f
}

// nonNegative returns a number ≥ 0.
func (d *decoder) nonNegative(n *yaml.Node, path, unit string) float64 {
	f := d.float(n, path)
	if f < 0 {
		d.fail(n, path, "must be ≥ 0 %s, got %g", unit, f)
	}
	return f
}

// integer returns an integer in [lo, hi].
func (d *decoder) integer(n *yaml.Node, path string, lo, hi int) int {
	n = d.resolve(n, path)
	var i int
	if n.Kind != yaml.ScalarNode || n.ShortTag() != "!!int" || n.Decode(&i) != nil {
		d.fail(n, path, "must be a whole number from %d to %d, got %q", lo, hi, n.Value)
	}
	if i < lo || i > hi {
		d.fail(n, path, "must be a whole number from %d to %d, got %d", lo, hi, i)
	}
	return i
}

// name returns a non-empty name usable in a --set path.
func (d *decoder) name(n *yaml.Node, path string) string {
	n = d.resolve(n, path)
	if n.Kind != yaml.ScalarNode || n.Value == "" {
		d.fail(n, path, "must be a non-empty name")
	}
	if strings.ContainsAny(n.Value, ".=[] \t\n") {
		d.fail(n, path, "name %q may not contain '.', '=', brackets or spaces (names are used in --set paths); use letters, digits, '-' and '_'", n.Value)
	}
	return n.Value
}

// text returns a scalar as a string.
func (d *decoder) text(n *yaml.Node, path string) string {
	n = d.resolve(n, path)
	if n.Kind != yaml.ScalarNode {
		d.fail(n, path, "must be text")
	}
	return n.Value
}

// floats returns a sequence of exactly k finite numbers.
func (d *decoder) floats(n *yaml.Node, path string, k int, what string) []float64 {
	n = d.resolve(n, path)
	if n.Kind != yaml.SequenceNode || len(n.Content) != k {
		d.fail(n, path, "must be %s: a sequence of %d numbers", what, k)
	}
	out := make([]float64, k)
	for i, c := range n.Content {
		out[i] = d.float(c, fmt.Sprintf("%s[%d]", path, i))
	}
	return out
}

// vec3 returns a 3-vector written [x, y, z].
func (d *decoder) vec3(n *yaml.Node, path string) r3.Vec {
	v := d.floats(n, path, 3, "a vector [x, y, z]")
	return r3.Vec{X: v[0], Y: v[1], Z: v[2]}
}

// direction returns a non-zero 3-vector scaled to unit length.
func (d *decoder) direction(n *yaml.Node, path string) r3.Vec {
	v := d.vec3(n, path)
	l := r3.Norm(v)
	if l == 0 || math.IsInf(l, 0) {
		d.fail(n, path, "must be a non-zero direction [x, y, z]")
	}
	if math.Abs(l-1) > unitSlack {
		v = r3.Scale(1/l, v)
	}
	return v
}

// quatTolerance is how far from unit length a written quaternion may be
// and still be normalised rather than rejected.
const quatTolerance = 1e-3

// unitSlack is the rounding error of a normalised vector or quaternion's
// length. Lengths that close to 1 are left alone, so that writing a model
// and reading it back does not change its last bits.
const unitSlack = 1e-15

// quat returns a unit quaternion written [w, x, y, z].
func (d *decoder) quat(n *yaml.Node, path string) contact.Quat {
	v := d.floats(n, path, 4, "a quaternion [w, x, y, z]")
	q := contact.Quat{W: v[0], X: v[1], Y: v[2], Z: v[3]}
	l := q.Norm()
	if math.Abs(l-1) > quatTolerance {
		d.fail(n, path, "quaternion [w, x, y, z] must have unit length; its length is %.6g (lengths within %g of 1 are normalised)", l, quatTolerance)
	}
	if math.Abs(l-1) > unitSlack {
		q = q.Normalize()
	}
	return q
}

// turn returns the rotation written {axis: [x, y, z], degrees: a}.
func (d *decoder) turn(n *yaml.Node, path string) contact.Quat {
	f := d.mapping(n, path, "axis", "degrees")
	axis := d.direction(f.require("axis", "give the axis of the turn as [x, y, z]"), f.sub("axis"))
	deg := d.float(f.require("degrees", "give the angle of the turn in degrees"), f.sub("degrees"))
	return contact.QuatFromAxisAngle(axis, deg*math.Pi/180)
}

// rotation reads the optional quat or turn of f (identity if neither).
func (d *decoder) rotation(f *fields) contact.Quat {
	f.exclusive("quat", "turn")
	switch {
	case f.has("quat"):
		return d.quat(f.get("quat"), f.sub("quat"))
	case f.has("turn"):
		return d.turn(f.get("turn"), f.sub("turn"))
	}
	return contact.IdentityQuat
}

// poseFields are the fields of a pose.
var poseFields = []string{"position", "quat", "turn"}

// pose reads {position, quat | turn}; absent parts are the identity.
func (d *decoder) pose(n *yaml.Node, path string) contact.Pose {
	f := d.mapping(n, path, poseFields...)
	p := contact.Pose{Rot: d.rotation(f)}
	if f.has("position") {
		p.Pos = d.vec3(f.get("position"), f.sub("position"))
	}
	return p
}
