package calibrate

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"stickslip/sim"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/spatial/r3"
	"gopkg.in/yaml.v3"
)

// TuneFile is the YAML description of one tuning run (see
// docs/tune-format.md).
type TuneFile struct {
	// Path is where the file was read from; relative paths in it resolve
	// against its directory.
	Path string `yaml:"-"`
	// Scene is a scene file or a built-in scene's name; Set holds scene
	// overrides, PATH=VALUE.
	Scene string   `yaml:"scene"`
	Set   []string `yaml:"set"`
	// Horizon is the simulated time the cost covers, in seconds (default:
	// the scene's duration).
	Horizon float64 `yaml:"horizon"`
	// Gains are the free gains, each with bounds.
	Gains []TuneGainSpec `yaml:"gains"`
	// Task is what the controller should do.
	Task TuneTaskSpec `yaml:"task"`
	// Cost weights the terms of the task cost.
	Cost TuneCostSpec `yaml:"cost"`
	// Uncertainty draws parameter samples from a fit report.
	Uncertainty *TuneUncertaintySpec `yaml:"uncertainty"`
	// Iterations bounds the accepted descent steps per smoothing stage
	// (default 60).
	Iterations int `yaml:"iterations"`
	// Smoothing is the contact-smoothing schedule κ, large to small (see
	// TuneSettings.Smoothing); default: exact contact (κ = 0).
	Smoothing []float64 `yaml:"smoothing"`

	line map[string]int // top-level key → line
}

// TuneGainSpec is one free gain: kp:ACTUATOR or kd:ACTUATOR, its bounds
// [lower, upper] and an optional starting value (default: the scene's).
type TuneGainSpec struct {
	Name    string
	Bounds  []float64
	Initial *float64
	Line    int
}

// TuneTaskSpec is the task: joints to track (against the scene's PD
// targets or a reference table) and an optional final position of a free
// body.
type TuneTaskSpec struct {
	Track     []string       `yaml:"track"`
	Reference *TuneTableSpec `yaml:"reference"`
	FinalPose *TunePoseSpec  `yaml:"final_pose"`
}

// TuneTableSpec is a reference table: actuator columns and rows of
// [time, value per column].
type TuneTableSpec struct {
	Columns []string    `yaml:"columns"`
	Rows    [][]float64 `yaml:"rows"`
}

// TunePoseSpec is a final-position target of a free body.
type TunePoseSpec struct {
	Body     string    `yaml:"body"`
	Position []float64 `yaml:"position"`
}

// TuneCostSpec holds the cost weights and the effort limits of the
// penalty.
type TuneCostSpec struct {
	Tracking    float64            `yaml:"tracking"`
	Effort      float64            `yaml:"effort"`
	EffortLimit float64            `yaml:"effort_limit"`
	FinalPose   float64            `yaml:"final_pose"`
	Limits      map[string]float64 `yaml:"limits"`
}

// TuneUncertaintySpec names a fit report whose covariance the parameter
// samples are drawn from.
type TuneUncertaintySpec struct {
	Report     string   `yaml:"report"`
	Parameters []string `yaml:"parameters"`
	Samples    int      `yaml:"samples"`
	Seed       uint64   `yaml:"seed"`
}

// UnmarshalYAML decodes a gain strictly.
func (g *TuneGainSpec) UnmarshalYAML(n *yaml.Node) error {
	g.Line = n.Line
	if n.Kind != yaml.MappingNode {
		return fmt.Errorf("line %d: a gain is a mapping {name: kp:ACTUATOR, bounds: [lower, upper], initial: VALUE}", n.Line)
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		if k := n.Content[i]; !slices.Contains([]string{"name", "bounds", "initial"}, k.Value) {
			return fmt.Errorf("line %d: unknown field %q in a gain (fields: name, bounds, initial)", k.Line, k.Value)
		}
	}
	var v struct {
		Name    string    `yaml:"name"`
		Bounds  []float64 `yaml:"bounds"`
		Initial *float64  `yaml:"initial"`
	}
	if err := n.Decode(&v); err != nil {
		return err
	}
	g.Name, g.Bounds, g.Initial = v.Name, v.Bounds, v.Initial
	return nil
}

// ReadTuneFile reads and checks the tuning file at path. Checks that need
// the scene are made by Problem.
func ReadTuneFile(path string) (*TuneFile, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseTuneFile(src, path)
}

// ParseTuneFile parses a tuning file; path names it in messages and
// anchors relative paths.
func ParseTuneFile(src []byte, path string) (*TuneFile, error) {
	fail := func(line int, field, format string, args ...any) error {
		return &FieldError{File: path, Line: line, Field: field, Err: fmt.Errorf(format, args...)}
	}
	f := &TuneFile{Path: path}
	var err error
	if f.line, err = decodeStrict(src, path, "tuning file", "scene, gains and cost", f); err != nil {
		return nil, err
	}
	if f.Scene == "" {
		return nil, fail(0, "scene", "missing: name a scene file (typically the fitted scene) or a built-in scene")
	}
	if len(f.Gains) == 0 {
		return nil, fail(f.line["gains"], "gains", "nothing to tune: list at least one gain, {name: kp:ACTUATOR, bounds: [lower, upper]}")
	}
	for i, g := range f.Gains {
		field := fmt.Sprintf("gains[%d]", i)
		if g.Name == "" {
			return nil, fail(g.Line, field, "no name (kp:ACTUATOR or kd:ACTUATOR)")
		}
		if g.Bounds == nil {
			return nil, fail(g.Line, field+".bounds", "%s has no bounds: give bounds: [lower, upper] within what the drive can deliver (unbounded gains are not tuned)", g.Name)
		}
		if len(g.Bounds) != 2 {
			return nil, fail(g.Line, field+".bounds", "want [lower, upper], got %d numbers", len(g.Bounds))
		}
	}
	if !(f.Horizon >= 0) || math.IsInf(f.Horizon, 0) {
		return nil, fail(f.line["horizon"], "horizon", "%v: must be a positive number of seconds", f.Horizon)
	}
	if f.Iterations < 0 {
		return nil, fail(f.line["iterations"], "iterations", "must be positive")
	}
	for i, k := range f.Smoothing {
		if !(k >= 0) || math.IsInf(k, 0) {
			return nil, fail(f.line["smoothing"], fmt.Sprintf("smoothing[%d]", i), "%v: κ must be zero or positive", k)
		}
		if i > 0 && k > f.Smoothing[i-1] {
			return nil, fail(f.line["smoothing"], fmt.Sprintf("smoothing[%d]", i), "%v follows %v: the schedule runs from large to small", k, f.Smoothing[i-1])
		}
	}
	if f.Task.Reference != nil && f.Task.Track != nil {
		return nil, fail(f.line["task"], "task", "give either track (follow the scene's PD targets) or reference (a table of its own), not both")
	}
	if r := f.Task.Reference; r != nil {
		if len(r.Columns) == 0 {
			return nil, fail(f.line["task"], "task.reference.columns", "missing: name the actuators whose joints the columns hold")
		}
		for i, row := range r.Rows {
			if len(row) != len(r.Columns)+1 {
				return nil, fail(f.line["task"], fmt.Sprintf("task.reference.rows[%d]", i), "has %d numbers, want time and %d values", len(row), len(r.Columns))
			}
		}
	}
	if p := f.Task.FinalPose; p != nil {
		if p.Body == "" {
			return nil, fail(f.line["task"], "task.final_pose.body", "missing: name the free body")
		}
		if len(p.Position) != 3 {
			return nil, fail(f.line["task"], "task.final_pose.position", "want [x, y, z] in metres, got %d numbers", len(p.Position))
		}
	}
	c := f.Cost
	for _, w := range []struct {
		name string
		v    float64
	}{{"tracking", c.Tracking}, {"effort", c.Effort}, {"effort_limit", c.EffortLimit}, {"final_pose", c.FinalPose}} {
		if !(w.v >= 0) || math.IsInf(w.v, 0) {
			return nil, fail(f.line["cost"], "cost."+w.name, "%v: a weight is a finite number, zero or positive", w.v)
		}
	}
	if c.Tracking+c.Effort+c.EffortLimit+c.FinalPose == 0 {
		return nil, fail(f.line["cost"], "cost", "every weight is zero (or cost is missing): weight at least one of tracking, effort, effort_limit, final_pose")
	}
	if c.FinalPose > 0 && f.Task.FinalPose == nil {
		return nil, fail(f.line["cost"], "cost.final_pose", "weighted, but task.final_pose names no target")
	}
	if f.Task.FinalPose != nil && c.FinalPose == 0 {
		return nil, fail(f.line["task"], "task.final_pose", "a target is given but cost.final_pose does not weight it")
	}
	if u := f.Uncertainty; u != nil {
		if u.Report == "" {
			return nil, fail(f.line["uncertainty"], "uncertainty.report", "missing: name the fit report (report.json) whose covariance to sample")
		}
		if u.Samples < 1 {
			return nil, fail(f.line["uncertainty"], "uncertainty.samples", "%d: draw at least one sample (16 or more for a useful average)", u.Samples)
		}
	}
	return f, nil
}

// Dir returns the directory relative paths in the file resolve against.
func (f *TuneFile) Dir() string { return filepath.Dir(f.Path) }

// resolvePath resolves a path of the tuning file.
func (f *TuneFile) resolvePath(p string) string {
	if filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(f.Dir(), p)
}

// ScenePath returns the scene argument with relative file paths resolved
// against the tuning file; a built-in scene's name is returned as is when
// no such file exists.
func (f *TuneFile) ScenePath() string {
	p := f.resolvePath(f.Scene)
	if _, err := os.Stat(p); err != nil && !strings.ContainsAny(f.Scene, `/\.`) {
		return f.Scene
	}
	return p
}

// SceneRef identifies the scene a tuning file was resolved against, for
// matching it with a fit report.
type SceneRef struct {
	// Name is the scene's name field; Path the file it was read from, or
	// empty for a built-in scene.
	Name string
	Path string
}

// FitSummary is what tuning needs from a fit report (report.json): the
// scene it fitted and each parameter's estimate, standard error and
// correlations.
type FitSummary struct {
	Path        string
	Scene       string
	FittedScene string
	Names       []string
	Values      []float64
	// StdErr is +Inf for parameters the fit did not identify.
	StdErr []float64
	Corr   [][]float64
}

// ReadFitSummary reads a fit report.
func ReadFitSummary(path string) (*FitSummary, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var doc struct {
		Format      string       `json:"format"`
		Scene       string       `json:"scene"`
		FittedScene string       `json:"fitted_scene"`
		Corr        [][]*float64 `json:"correlations"`
		Params      []struct {
			Name   string   `json:"name"`
			Value  *float64 `json:"value"`
			StdErr *float64 `json:"standard_error"`
		} `json:"parameters"`
	}
	if err := json.Unmarshal(src, &doc); err != nil {
		return nil, fmt.Errorf("%s: not a fit report: %v", path, err)
	}
	if doc.Format != ReportFormat {
		return nil, fmt.Errorf("%s: format %q is not a fit report (%q)", path, doc.Format, ReportFormat)
	}
	s := &FitSummary{Path: path, Scene: doc.Scene, FittedScene: doc.FittedScene}
	n := len(doc.Params)
	for _, p := range doc.Params {
		if p.Value == nil {
			return nil, fmt.Errorf("%s: parameter %s has no value", path, p.Name)
		}
		s.Names = append(s.Names, p.Name)
		s.Values = append(s.Values, *p.Value)
		se := math.Inf(1)
		if p.StdErr != nil && *p.StdErr >= 0 {
			se = *p.StdErr
		}
		s.StdErr = append(s.StdErr, se)
	}
	if len(doc.Corr) != n {
		return nil, fmt.Errorf("%s: %d correlation rows for %d parameters", path, len(doc.Corr), n)
	}
	for i, row := range doc.Corr {
		if len(row) != n {
			return nil, fmt.Errorf("%s: correlation row %d has %d entries, want %d", path, i+1, len(row), n)
		}
		r := make([]float64, n)
		for j, v := range row {
			r[j] = math.NaN()
			if v != nil {
				r[j] = *v
			}
		}
		s.Corr = append(s.Corr, r)
	}
	return s, nil
}

// CheckScene reports whether the fit report belongs to the scene: its
// scene or fitted scene must name the same file or built-in scene, and
// every fitted parameter must exist in the model. A report from another
// scene describes the uncertainty of another model.
func (s *FitSummary) CheckScene(ref SceneRef, m *sim.Model) error {
	same := func(cand string) bool {
		if cand == "" {
			return false
		}
		if b, ok := strings.CutPrefix(cand, "builtin:"); ok {
			return ref.Path == "" && b == ref.Name
		}
		if ref.Path == "" {
			return cand == ref.Name
		}
		want, err := filepath.Abs(ref.Path)
		if err != nil {
			return false
		}
		dir := filepath.Dir(s.Path)
		for _, c := range []string{cand, filepath.Join(dir, cand), filepath.Join(filepath.Dir(dir), cand)} {
			if filepath.IsAbs(cand) {
				c = cand
			}
			if abs, err := filepath.Abs(c); err == nil && abs == want {
				return true
			}
		}
		return false
	}
	if !same(s.Scene) && !same(s.FittedScene) {
		where := ref.Path
		if where == "" {
			where = "built-in " + ref.Name
		}
		fitted := ""
		if s.FittedScene != "" {
			fitted = fmt.Sprintf(", fitted scene %q", s.FittedScene)
		}
		return fmt.Errorf("fit report %s belongs to scene %q%s, not to %s: its covariance describes another model; tune with that scene or fit this one", s.Path, s.Scene, fitted, where)
	}
	for _, n := range s.Names {
		if _, err := sim.ParseParam(m, n); err != nil {
			return fmt.Errorf("fit report %s: %v; the report belongs to another scene", s.Path, err)
		}
	}
	return nil
}

// Covariance returns the means and covariance of the named parameters
// (all the report's parameters when names is nil). Parameters the fit did
// not identify (infinite standard error) cannot be sampled; they are left
// out and named in skipped.
func (s *FitSummary) Covariance(names []string) (kept []string, mean []float64, cov *mat.SymDense, skipped []string, err error) {
	if names == nil {
		names = s.Names
	}
	var idx []int
	for _, n := range names {
		i := slices.Index(s.Names, n)
		if i < 0 {
			return nil, nil, nil, nil, fmt.Errorf("fit report %s has no parameter %s (it has: %s)", s.Path, n, strings.Join(s.Names, ", "))
		}
		if math.IsInf(s.StdErr[i], 0) || math.IsNaN(s.StdErr[i]) {
			skipped = append(skipped, n)
			continue
		}
		idx = append(idx, i)
		kept = append(kept, n)
		mean = append(mean, s.Values[i])
	}
	cov = mat.NewSymDense(max(len(idx), 1), nil)
	if len(idx) == 0 {
		return kept, mean, nil, skipped, nil
	}
	for a, i := range idx {
		for b, j := range idx[:a+1] {
			c := 1.0
			if a != b {
				c = s.Corr[i][j]
				if math.IsNaN(c) {
					c = 0
				}
			}
			cov.SetSym(a, b, c*s.StdErr[i]*s.StdErr[j])
		}
	}
	return kept, mean, cov, skipped, nil
}

// DrawSamples draws k samples of the parameters from the multivariate
// normal N(mean, cov), with x = mean + L z, L = V √Λ from the eigen
// decomposition of cov (negative eigenvalues from rounding are taken as
// zero, so a singular covariance is allowed), and z standard normal from
// a PCG generator seeded with seed. Values outside a parameter's physical
// range (sim.Param.CheckValue) are clipped to it; clipped counts them.
func DrawSamples(m *sim.Model, names []string, mean []float64, cov mat.Symmetric, k int, seed uint64) (draws []ParamDraw, clipped int, err error) {
	params, err := sim.ParseParams(m, names)
	if err != nil {
		return nil, 0, err
	}
	n := len(params)
	if len(mean) != n || (n > 0 && cov.SymmetricDim() != n) {
		return nil, 0, fmt.Errorf("draw samples: %d parameters, %d means, covariance of size %d", n, len(mean), cov.SymmetricDim())
	}
	if n == 0 {
		return nil, 0, nil
	}
	var eig mat.EigenSym
	if !eig.Factorize(cov, true) {
		return nil, 0, errors.New("draw samples: the covariance could not be factorized")
	}
	vals := eig.Values(nil)
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	l := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			l.Set(i, j, vecs.At(i, j)*math.Sqrt(math.Max(vals[j], 0)))
		}
	}
	rng := rand.New(rand.NewPCG(seed, 0x7475_6e69_6e67))
	z := make([]float64, n)
	for s := 0; s < k; s++ {
		for i := range z {
			z[i] = rng.NormFloat64()
		}
		d := make(ParamDraw, n)
		for i := range d {
			d[i] = mean[i]
			for j := range z {
				d[i] += l.At(i, j) * z[j]
			}
			v, clip := clipToRange(&params[i], d[i], mean[i])
			if clip {
				clipped++
			}
			d[i] = v
		}
		draws = append(draws, d)
	}
	return draws, clipped, nil
}

// clipToRange moves v into the physical range of p: coefficients and
// damping to zero, masses and inertias to a thousandth of the mean,
// restitution to one.
func clipToRange(p *sim.Param, v, mean float64) (float64, bool) {
	if p.CheckValue(v) == nil {
		return v, false
	}
	switch {
	case p.Positive():
		v = math.Max(v, 1e-3*math.Abs(mean))
	case p.NonNegative():
		v = math.Max(v, 0)
	}
	if p.CheckValue(v) != nil && p.CheckValue(1) == nil && p.CheckValue(1.5) != nil {
		v = 1 // restitution above one
	}
	return v, true
}

// Problem turns the file into a tuning problem on the scene's model m with
// settings set, drawing the parameter samples from the fit report if one
// is named. ref identifies the scene for matching the report. warnings
// describe parameters left out of the samples and clipped draws.
func (f *TuneFile) Problem(m *sim.Model, set sim.Settings, ref SceneRef) (p *TuneProblem, fit *FitSummary, warnings []string, err error) {
	fail := func(line int, field string, err error) error {
		return &FieldError{File: f.Path, Line: line, Field: field, Err: err}
	}
	m = sim.CopyModel(m)
	set = set.WithDefaults()
	horizon := f.Horizon
	if horizon == 0 {
		horizon = set.Duration
	}
	steps := int(horizon/set.TimeStep + 0.5)
	if steps < 1 {
		return nil, nil, nil, fail(f.line["horizon"], "horizon", fmt.Errorf("%g s is shorter than one time step (%g s); give horizon in seconds", horizon, set.TimeStep))
	}
	p = &TuneProblem{Model: m, Settings: set, Steps: steps, Limits: f.Cost.Limits,
		Weights: CostWeights{Tracking: f.Cost.Tracking, Effort: f.Cost.Effort, EffortLimit: f.Cost.EffortLimit, FinalPose: f.Cost.FinalPose}}
	for i, g := range f.Gains {
		field := fmt.Sprintf("gains[%d]", i)
		gain := Gain{Name: g.Name, Initial: math.NaN(), Lower: g.Bounds[0], Upper: g.Bounds[1]}
		if g.Initial != nil {
			gain.Initial = *g.Initial
		}
		// Check each gain alone so the error names its line.
		one := &TuneProblem{Model: m, Settings: set, Steps: 1, Gains: []Gain{gain}, Weights: CostWeights{Effort: 1}}
		if _, err := one.setup(); err != nil {
			return nil, nil, nil, fail(g.Line, field, err)
		}
		p.Gains = append(p.Gains, gain)
	}
	if r := f.Task.Reference; r != nil {
		tb := &sim.Table{}
		for _, row := range r.Rows {
			tb.Times = append(tb.Times, row[0])
			tb.Values = append(tb.Values, slices.Clone(row[1:]))
		}
		p.Track, p.Reference = r.Columns, tb
	} else {
		p.Track = f.Task.Track
	}
	if fp := f.Task.FinalPose; fp != nil {
		p.Pose = &PoseTarget{Body: fp.Body, Position: r3.Vec{X: fp.Position[0], Y: fp.Position[1], Z: fp.Position[2]}}
	}
	if u := f.Uncertainty; u != nil {
		line := f.line["uncertainty"]
		fit, err = ReadFitSummary(f.resolvePath(u.Report))
		if err != nil {
			return nil, nil, nil, fail(line, "uncertainty.report", err)
		}
		if err := fit.CheckScene(ref, m); err != nil {
			return nil, nil, nil, fail(line, "uncertainty.report", err)
		}
		names, mean, cov, skipped, err := fit.Covariance(u.Parameters)
		if err != nil {
			return nil, nil, nil, fail(line, "uncertainty.parameters", err)
		}
		for _, s := range skipped {
			warnings = append(warnings, fmt.Sprintf("%s: the fit did not identify it (no finite standard error), so it is not sampled; it keeps its fitted value", s))
		}
		// The nominal model takes the fitted values the samples centre on.
		for i, n := range fit.Names {
			prm, _ := sim.ParseParam(m, n)
			if err := prm.CheckValue(fit.Values[i]); err != nil {
				return nil, nil, nil, fail(line, "uncertainty.report", err)
			}
			prm.Set(m, fit.Values[i])
		}
		if len(names) > 0 {
			draws, clipped, err := DrawSamples(m, names, mean, cov, u.Samples, u.Seed)
			if err != nil {
				return nil, nil, nil, fail(line, "uncertainty", err)
			}
			if clipped > 0 {
				warnings = append(warnings, fmt.Sprintf("%d sampled values fell outside their physical range and were clipped to it", clipped))
			}
			p.Uncertain, p.Draws = names, draws
		}
	}
	if _, err := p.setup(); err != nil {
		return nil, nil, nil, &FieldError{File: f.Path, Err: err}
	}
	return p, fit, warnings, nil
}
