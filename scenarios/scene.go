package scenarios

import (
	"fmt"
	"io/fs"
	"os"
	"strings"

	"stickslip/sim"

	"gopkg.in/yaml.v3"
)

// Scene is a loaded, validated scene.
type Scene struct {
	Name        string
	Description string
	Model       *sim.Model
	// Settings has every default filled in (sim.Settings.WithDefaults), so
	// it states exactly what a rollout will use.
	Settings sim.Settings
	// Warnings are conditions that do not stop a rollout but probably are
	// not what the author meant, such as bodies overlapping at the start.
	Warnings []Warning
}

// Warning describes a suspicious but legal part of a scene.
type Warning struct {
	File         string
	Line, Column int
	Field        string
	Msg          string
	// For overlaps: the two bodies (or body and static shape) and the
	// penetration depth in metres.
	A, B  string
	Depth float64
}

func (w Warning) String() string {
	return location(w.File, w.Line, w.Column, "", w.Field) + w.Msg
}

// Error is a problem with a scene file. It names where the problem is and
// what would be valid.
type Error struct {
	File         string
	Line, Column int
	// Override is the --set argument that supplied the offending value, if
	// the value came from one; Line and Column are then zero.
	Override string
	// Field is the path of the offending field, such as
	// "bodies[carton].mass" or "materials.pairs[0].friction".
	Field string
	Msg   string
}

func (e *Error) Error() string {
	return location(e.File, e.Line, e.Column, e.Override, e.Field) + e.Msg
}

// location formats "file:line:col: [--set x: ]field: ".
func location(file string, line, col int, override, field string) string {
	var b strings.Builder
	if file == "" {
		file = "<scene>"
	}
	b.WriteString(file)
	if line > 0 {
		fmt.Fprintf(&b, ":%d", line)
		if col > 0 {
			fmt.Fprintf(&b, ":%d", col)
		}
	}
	b.WriteString(": ")
	if override != "" {
		fmt.Fprintf(&b, "--set %s: ", override)
	}
	if field != "" {
		b.WriteString(field)
		b.WriteString(": ")
	}
	return b.String()
}

// Loader reads scene files. Its zero value is ready to use.
type Loader struct {
	// Overrides are "PATH=VALUE" assignments applied to the document before
	// it is checked, as if the file said so. PATH is dotted keys; sequence
	// elements are addressed by index or by their name field, as in
	// "bodies.crate.mass=2.5" or "materials.pairs.0.friction=0.3". VALUE is
	// YAML, so it may be a number, a string or a flow sequence like [0,0,1].
	Overrides []string
	// OverlapTolerance is the penetration depth in metres below which
	// bodies touching at the start are not reported (default 1e-6, well
	// above the rounding of positions written in decimal).
	OverlapTolerance float64
	// Files is where table files named in the scene (controller targets
	// and efforts in CSV) are read from, by paths valid for fs.FS. If nil,
	// they are read from disk, relative paths taken from the directory of
	// the filename given to Load.
	Files fs.FS
}

// LoadFile reads and loads the scene file at path with the given overrides.
func LoadFile(path string, overrides ...string) (*Scene, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	l := Loader{Overrides: overrides}
	return l.Load(src, path)
}

// Load parses, checks and converts the scene in src. filename is used only
// in messages.
func (l *Loader) Load(src []byte, filename string) (s *Scene, err error) {
	d := &decoder{file: filename, origin: map[*yaml.Node]string{}, overlapTol: l.OverlapTolerance, files: l.Files}
	if d.overlapTol == 0 {
		d.overlapTol = 1e-6
	}
	defer func() {
		if r := recover(); r != nil {
			e, ok := r.(*Error)
			if !ok {
				panic(r)
			}
			s, err = nil, e
		}
	}()
	root := d.parse(src)
	for _, o := range l.Overrides {
		d.override(root, o)
	}
	return d.scene(root), nil
}
