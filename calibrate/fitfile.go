package calibrate

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"stickslip/sim"

	"gopkg.in/yaml.v3"
)

// FitFile is the YAML description of one fit (see docs/fit-format.md).
type FitFile struct {
	// Path is where the file was read from; relative log and scene paths
	// resolve against its directory.
	Path string `yaml:"-"`
	// Scene is a scene file (relative to the fit file) or a built-in
	// scene's name; Set holds scene overrides, PATH=VALUE.
	Scene string   `yaml:"scene"`
	Set   []string `yaml:"set"`
	// Train are the logs the fit uses; HeldOut are the logs it is
	// validated on.
	Train   []LogSpec `yaml:"train"`
	HeldOut []LogSpec `yaml:"held_out"`
	// Columns map columns for every log.
	Columns []ColumnSpec `yaml:"columns"`
	// Parameters are the free parameters.
	Parameters []ParamSpec `yaml:"parameters"`
	// Window is the length of a multiple-shooting window in seconds.
	Window float64 `yaml:"window"`
	// FreeStart is log, velocity or state (see Options.FreeStart).
	FreeStart string `yaml:"free_start"`
	// Noise gives the standard deviation of each channel.
	Noise NoiseSpec `yaml:"noise"`
	// Smoothing is the contact-smoothing schedule κ, large to small.
	Smoothing []float64 `yaml:"smoothing"`
	// Iterations bounds the Levenberg–Marquardt steps per smoothing stage.
	Iterations int `yaml:"iterations"`
	// Starts is the number of starting points tried in the first stage
	// (the given initial values plus random draws within the bounds);
	// Seed seeds those draws.
	Starts int    `yaml:"starts"`
	Seed   uint64 `yaml:"seed"`

	line map[string]int // top-level key → line
}

// LogSpec names one log file and the column mapping it needs beyond the
// fit file's shared one. In YAML it is a path or a mapping with file and
// columns.
type LogSpec struct {
	File    string
	Columns []ColumnSpec
	Line    int
}

// ColumnSpec is a ColumnMap in YAML: {from, to, unit, scale}.
type ColumnSpec struct {
	From  string  `yaml:"from"`
	To    string  `yaml:"to"`
	Unit  string  `yaml:"unit"`
	Scale float64 `yaml:"scale"`
	Line  int     `yaml:"-"`
}

// ParamSpec is one free parameter in YAML.
type ParamSpec struct {
	Name    string
	Initial *float64
	Bounds  []float64
	Prior   *PriorSpec
	Line    int
}

// PriorSpec is a Gaussian prior: mean and standard deviation.
type PriorSpec struct {
	Mean float64 `yaml:"mean"`
	SD   float64 `yaml:"sd"`
}

// NoiseSpec gives the standard deviations of the channels: defaults per
// kind and overrides per channel ("carton.x", "carton.rotation",
// "elbow.q").
type NoiseSpec struct {
	Position float64            `yaml:"position"`
	Rotation float64            `yaml:"rotation"`
	Joint    float64            `yaml:"joint"`
	Channels map[string]float64 `yaml:"channels"`
}

// FieldError is an error in a fit file: the file, the line (zero when
// unknown), the field's path such as "parameters[1].bounds", and what is
// wrong.
type FieldError struct {
	File  string
	Line  int
	Field string
	Err   error
}

func (e *FieldError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
	}
	if e.Field != "" {
		b.WriteString(": ")
		b.WriteString(e.Field)
	}
	fmt.Fprintf(&b, ": %v", e.Err)
	return b.String()
}

func (e *FieldError) Unwrap() error { return e.Err }

func checkKeys(n *yaml.Node, allowed ...string) error {
	for i := 0; i+1 < len(n.Content); i += 2 {
		k := n.Content[i]
		if !slices.Contains(allowed, k.Value) {
			return fmt.Errorf("line %d: unknown field %q (fields: %s)", k.Line, k.Value, strings.Join(allowed, ", "))
		}
	}
	return nil
}

// UnmarshalYAML accepts a path or a {file, columns} mapping.
func (l *LogSpec) UnmarshalYAML(n *yaml.Node) error {
	l.Line = n.Line
	if n.Kind == yaml.ScalarNode {
		return n.Decode(&l.File)
	}
	if n.Kind != yaml.MappingNode {
		return fmt.Errorf("line %d: a log is a file path or a mapping with file and columns", n.Line)
	}
	if err := checkKeys(n, "file", "columns"); err != nil {
		return err
	}
	var v struct {
		File    string       `yaml:"file"`
		Columns []ColumnSpec `yaml:"columns"`
	}
	if err := n.Decode(&v); err != nil {
		return err
	}
	l.File, l.Columns = v.File, v.Columns
	return nil
}

// UnmarshalYAML decodes a column mapping strictly.
func (c *ColumnSpec) UnmarshalYAML(n *yaml.Node) error {
	if n.Kind != yaml.MappingNode {
		return fmt.Errorf("line %d: a column mapping is {from: NAME, to: NAME, unit: UNIT, scale: NUMBER}", n.Line)
	}
	if err := checkKeys(n, "from", "to", "unit", "scale"); err != nil {
		return err
	}
	type plain ColumnSpec
	if err := n.Decode((*plain)(c)); err != nil {
		return err
	}
	c.Line = n.Line
	return nil
}

// UnmarshalYAML decodes a parameter strictly.
func (p *ParamSpec) UnmarshalYAML(n *yaml.Node) error {
	p.Line = n.Line
	if n.Kind == yaml.ScalarNode {
		return n.Decode(&p.Name)
	}
	if n.Kind != yaml.MappingNode {
		return fmt.Errorf("line %d: a parameter is a name or a mapping with name, initial, bounds and prior", n.Line)
	}
	if err := checkKeys(n, "name", "initial", "bounds", "prior"); err != nil {
		return err
	}
	var v struct {
		Name    string    `yaml:"name"`
		Initial *float64  `yaml:"initial"`
		Bounds  []float64 `yaml:"bounds"`
		Prior   yaml.Node `yaml:"prior"`
	}
	if err := n.Decode(&v); err != nil {
		return err
	}
	p.Name, p.Initial, p.Bounds = v.Name, v.Initial, v.Bounds
	if v.Prior.Kind != 0 {
		if v.Prior.Kind != yaml.MappingNode {
			return fmt.Errorf("line %d: a prior is {mean: NUMBER, sd: NUMBER}", v.Prior.Line)
		}
		if err := checkKeys(&v.Prior, "mean", "sd"); err != nil {
			return err
		}
		p.Prior = new(PriorSpec)
		if err := v.Prior.Decode(p.Prior); err != nil {
			return err
		}
	}
	return nil
}

// ReadFitFile reads and checks the fit file at path. Checks that need the
// scene are made by Resolve.
func ReadFitFile(path string) (*FitFile, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseFitFile(src, path)
}

// ParseFitFile parses a fit file; path names it in messages and anchors
// relative paths.
func ParseFitFile(src []byte, path string) (*FitFile, error) {
	fail := func(line int, field, format string, args ...any) error {
		return &FieldError{File: path, Line: line, Field: field, Err: fmt.Errorf(format, args...)}
	}
	f := &FitFile{Path: path}
	var err error
	if f.line, err = decodeStrict(src, path, "fit file", "scene, train and parameters", f); err != nil {
		return nil, err
	}
	if f.Scene == "" {
		return nil, fail(0, "scene", "missing: name a scene file or built-in scene")
	}
	if len(f.Train) == 0 {
		return nil, fail(f.line["train"], "train", "missing: list at least one log to fit")
	}
	for i, l := range append(slices.Clone(f.Train), f.HeldOut...) {
		if l.File == "" {
			return nil, fail(l.Line, fmt.Sprintf("log %d", i+1), "no file given")
		}
	}
	if len(f.Parameters) == 0 {
		return nil, fail(f.line["parameters"], "parameters", "nothing is free: list at least one parameter to fit (forms: %s)", sim.ParamHelp)
	}
	for i, p := range f.Parameters {
		field := fmt.Sprintf("parameters[%d]", i)
		if p.Name == "" {
			return nil, fail(p.Line, field, "no name")
		}
		if p.Bounds != nil && len(p.Bounds) != 2 {
			return nil, fail(p.Line, field+".bounds", "want [lower, upper], got %d numbers", len(p.Bounds))
		}
		if p.Prior != nil && !(p.Prior.SD > 0) {
			return nil, fail(p.Line, field+".prior.sd", "%v: must be positive", p.Prior.SD)
		}
	}
	checks := []struct {
		key string
		bad bool
		msg string
	}{
		{"window", f.Window < 0 || math.IsNaN(f.Window), "must be a positive number of seconds"},
		{"noise", !(f.Noise.Position >= 0 && f.Noise.Rotation >= 0 && f.Noise.Joint >= 0), "standard deviations must be positive"},
		{"iterations", f.Iterations < 0, "must be positive"},
		{"starts", f.Starts < 0, "must be positive"},
	}
	for _, c := range checks {
		if c.bad {
			return nil, fail(f.line[c.key], c.key, "%s", c.msg)
		}
	}
	if f.FreeStart != "" {
		if _, err := ParseFreeStart(f.FreeStart); err != nil {
			return nil, fail(f.line["free_start"], "free_start", "%q is not one of log, velocity, state", f.FreeStart)
		}
	}
	for ch, v := range f.Noise.Channels {
		if !(v > 0) || math.IsInf(v, 0) {
			return nil, fail(f.line["noise"], "noise.channels."+ch, "%v: must be a positive standard deviation", v)
		}
	}
	for i, k := range f.Smoothing {
		if !(k >= 0) || math.IsInf(k, 0) {
			return nil, fail(f.line["smoothing"], fmt.Sprintf("smoothing[%d]", i), "%v: κ must be zero or positive", k)
		}
		if i > 0 && k > f.Smoothing[i-1] {
			return nil, fail(f.line["smoothing"], fmt.Sprintf("smoothing[%d]", i), "%v follows %v: the schedule runs from large to small", k, f.Smoothing[i-1])
		}
	}
	return f, nil
}

// yamlError turns a yaml.v3 error into a *sim.FileError, keeping its line.
// decodeStrict decodes the YAML mapping src into v, rejecting unknown
// fields, and returns the line of each top-level field. kind and want name
// the file and its essential fields in messages.
func decodeStrict(src []byte, path, kind, want string, v any) (map[string]int, error) {
	var root yaml.Node
	if err := yaml.Unmarshal(src, &root); err != nil {
		return nil, yamlError(path, err)
	}
	if len(root.Content) == 0 {
		return nil, &FieldError{File: path, Err: fmt.Errorf("empty %s: want at least %s", kind, want)}
	}
	doc := root.Content[0]
	if doc.Kind != yaml.MappingNode {
		return nil, &FieldError{File: path, Line: doc.Line, Err: fmt.Errorf("a %s is a mapping of fields", kind)}
	}
	lines := map[string]int{}
	for i := 0; i+1 < len(doc.Content); i += 2 {
		lines[doc.Content[i].Value] = doc.Content[i].Line
	}
	dec := yaml.NewDecoder(bytes.NewReader(src))
	dec.KnownFields(true)
	if err := dec.Decode(v); err != nil && !errors.Is(err, io.EOF) {
		return nil, yamlError(path, err)
	}
	return lines, nil
}

// yamlError turns a yaml.v3 error into a FieldError with its line.
func yamlError(path string, err error) error {
	msg := err.Error()
	msg = strings.TrimPrefix(msg, "yaml: ")
	msg = strings.TrimPrefix(msg, "unmarshal errors:\n  ")
	line := 0
	if rest, ok := strings.CutPrefix(msg, "line "); ok {
		if n, tail, ok := strings.Cut(rest, ":"); ok {
			if _, err := fmt.Sscanf(n, "%d", &line); err == nil {
				msg = strings.TrimSpace(tail)
			}
		}
	}
	return &FieldError{File: path, Line: line, Err: errors.New(msg)}
}

// Resolve checks the parameters against the model and returns them as
// FreeParams: names must exist, bounds must hold valid values and contain
// the initial value (which defaults to the model's value).
func (f *FitFile) Resolve(m *sim.Model) ([]FreeParam, error) {
	out := make([]FreeParam, 0, len(f.Parameters))
	seen := map[string]int{}
	for i, ps := range f.Parameters {
		fail := func(field, format string, args ...any) error {
			if field != "" {
				field = "." + field
			}
			return &FieldError{File: f.Path, Line: ps.Line, Field: fmt.Sprintf("parameters[%d]%s", i, field),
				Err: fmt.Errorf(format, args...)}
		}
		if j, ok := seen[ps.Name]; ok {
			return nil, fail("name", "%s is already free as parameters[%d]", ps.Name, j)
		}
		seen[ps.Name] = i
		fp := FreeParam{Name: ps.Name, Lower: math.NaN(), Upper: math.NaN(), Initial: math.NaN()}
		if ps.Initial != nil {
			fp.Initial = *ps.Initial
		}
		if ps.Bounds != nil {
			fp.Lower, fp.Upper = ps.Bounds[0], ps.Bounds[1]
		}
		if ps.Prior != nil {
			fp.PriorMean, fp.PriorSD = ps.Prior.Mean, ps.Prior.SD
		}
		r, err := fp.resolve(m)
		if err != nil {
			return nil, fail("", "%v", err)
		}
		out = append(out, r)
	}
	return out, nil
}

// Dir returns the directory relative paths in the fit file resolve against.
func (f *FitFile) Dir() string { return filepath.Dir(f.Path) }

// LogPath resolves a log path of the fit file.
func (f *FitFile) LogPath(l LogSpec) string {
	if filepath.IsAbs(l.File) {
		return l.File
	}
	return filepath.Join(f.Dir(), l.File)
}

// Reader returns the log reader for l: the shared column mapping followed
// by the log's own, with lines starting with # as comments.
func (f *FitFile) Reader(l LogSpec) *LogReader {
	r := &LogReader{Comment: '#'}
	for _, c := range append(slices.Clone(f.Columns), l.Columns...) {
		r.Columns = append(r.Columns, ColumnMap{From: c.From, To: c.To, Unit: c.Unit, Scale: c.Scale})
	}
	return r
}

// Options returns the fit options the file gives.
func (f *FitFile) Options() Options {
	fs, _ := ParseFreeStart(f.FreeStart)
	if f.FreeStart == "" {
		fs = StartFromLog
	}
	return Options{
		FreeStart:  fs,
		Window:     f.Window,
		Noise:      Noise{Position: f.Noise.Position, Rotation: f.Noise.Rotation, Joint: f.Noise.Joint, Channels: f.Noise.Channels},
		Smoothing:  f.Smoothing,
		Iterations: f.Iterations,
		Starts:     f.Starts,
		Seed:       f.Seed,
	}
}
