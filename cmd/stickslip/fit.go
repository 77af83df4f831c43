package main

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"stickslip/calibrate"
	"stickslip/scenarios"
	"stickslip/sim"
)

func init() {
	register(&command{
		name:    "fit",
		summary: "fit physical parameters of a scene to logged runs, with uncertainty and a report",
		run:     runFit,
	})
}

// fitJob is a fit ready to run: the scene, the logs and the settings,
// whether they came from a fit file or from flags.
type fitJob struct {
	sceneArg string
	scene    *scenarios.Scene
	train    []*calibrate.Log
	heldOut  []*calibrate.Log
	trainN   []string
	heldN    []string
	params   []calibrate.FreeParam
	opts     calibrate.Options
	hash     []byte // inputs, for the checkpoint fingerprint
}

func runFit(e *env, args []string) error {
	fl := newFlags(e, "fit", "[flags] [FIT.yaml]\n\n"+
		"Fits the free parameters a fit file names (see docs/fit-format.md), or, without one,\n"+
		"those given by --scene, --log and --param. Writes the fitted scene, a report directory\n"+
		"(report.json, index.html, plots) and a checkpoint after every step.")
	sceneFlag := fl.String("scene", "", "scene file or built-in scene (quick fit without a fit file)")
	var logs, held, params, bounds, noise, sets multiFlag
	fl.Var(&logs, "log", "training log CSV (repeatable)")
	fl.Var(&held, "held-out", "held-out log CSV for validation (repeatable)")
	fl.Var(&params, "param", "free parameter NAME or NAME=INITIAL (repeatable), e.g. friction:card/steel=0.3; forms: "+sim.ParamHelp)
	fl.Var(&bounds, "bounds", "bounds of a free parameter, NAME=LOWER,UPPER (repeatable)")
	fl.Var(&noise, "noise", "noise σ: position=M, rotation=RAD, joint=Q, or CHANNEL=σ such as carton.x=0.002 (repeatable)")
	fl.Var(&sets, "set", "override a scene value, PATH=VALUE (repeatable)")
	window := fl.Float64("window", 0, "window length in seconds (default 0.5, or the fit file's)")
	smoothing := fl.String("smoothing", "", "smoothing schedule κ, comma-separated, large to small (default 0, or the fit file's)")
	iterations := fl.Int("iterations", 0, "Levenberg–Marquardt steps per smoothing stage (default 50, or the fit file's)")
	freeStart := fl.String("free-start", "", "what each window's starting state takes from the fit rather than the log: log, velocity or state (default log, or the fit file's)")
	workers := fl.Int("workers", 0, "windows simulated at once (default: number of cores); results do not depend on it")
	out := fl.String("out", "", "fitted scene file to write (default fitted-<scene>.yaml)")
	reportDir := fl.String("report", "", "report directory to write (default report-<scene>)")
	checkpoint := fl.String("checkpoint", "", "checkpoint file (default <report>.checkpoint.json)")
	resume := fl.Bool("resume", false, "continue from the checkpoint of an interrupted fit")
	quiet := fl.Bool("quiet", false, "print nothing but errors")
	jsonOut := fl.Bool("json", false, "progress as JSON lines on stderr and the report JSON on stdout")
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	var job *fitJob
	var err error
	switch {
	case fl.NArg() > 1:
		return badInputf("want at most one FIT.yaml argument, got %d", fl.NArg())
	case fl.NArg() == 1:
		if *sceneFlag != "" || len(logs) > 0 || len(held) > 0 || len(params) > 0 || len(bounds) > 0 {
			return badInputf("give either a fit file or --scene, --log and --param, not both")
		}
		job, err = fitJobFromFile(fl.Arg(0), sets)
	default:
		job, err = fitJobFromFlags(*sceneFlag, logs, held, params, bounds, sets)
	}
	if err != nil {
		return err
	}
	if err := applyFitFlags(&job.opts, noise, *window, *smoothing, *iterations); err != nil {
		return err
	}
	job.opts.Workers = *workers
	if *freeStart != "" {
		fs, err := calibrate.ParseFreeStart(*freeStart)
		if err != nil {
			return badInputf("--free-start: %v", err)
		}
		job.opts.FreeStart = fs
	}
	for _, w := range job.scene.Warnings {
		fmt.Fprintf(e.stderr, "warning: %s\n", w)
	}
	name := job.scene.Name
	if name == "" {
		name = strings.TrimSuffix(filepath.Base(job.sceneArg), filepath.Ext(job.sceneArg))
	}
	if *out == "" {
		*out = "fitted-" + name + ".yaml"
	}
	if *reportDir == "" {
		*reportDir = "report-" + name
	}
	if *checkpoint == "" {
		*checkpoint = filepath.Clean(*reportDir) + ".checkpoint.json"
	}
	fingerprint := job.fingerprint()
	cfg := &calibrate.Config{Model: job.scene.Model, Settings: job.scene.Settings, Train: job.train, HeldOut: job.heldOut,
		Params: job.params, Options: job.opts, Fingerprint: fingerprint}
	if *resume {
		data, err := os.ReadFile(*checkpoint)
		if err != nil {
			return badInputf("--resume: %v", err)
		}
		cp, err := calibrate.ReadCheckpoint(data)
		if err != nil {
			return badInputf("%s: %v", *checkpoint, err)
		}
		cfg.Resume = cp
		if !*quiet {
			fmt.Fprintf(e.stderr, "fit: resuming from %s (stage %d, %d steps done)\n", *checkpoint, cp.Stage+1, len(cp.History))
		}
	}
	cfg.Checkpoint = func(c *calibrate.Checkpoint) error {
		b, err := json.Marshal(c)
		if err != nil {
			return err
		}
		return writeFileAtomic(*checkpoint, append(b, '\n'))
	}
	cfg.Progress = func(p *calibrate.Progress) {
		switch {
		case *quiet:
		case *jsonOut:
			b, _ := json.Marshal(map[string]any{"stage": p.Stage + 1, "stages": p.Stages, "kappa": p.Kappa, "start": p.Start,
				"iteration": p.Iter, "loss": p.Loss, "lambda": p.Lambda, "step": p.Step, "elapsed_s": p.Elapsed.Seconds(), "values": p.X})
			fmt.Fprintf(e.stderr, "%s\n", b)
		default:
			start := ""
			if p.Start > 0 {
				start = fmt.Sprintf(" start %d", p.Start+1)
			}
			fmt.Fprintf(e.stderr, "fit: stage %d/%d κ=%-7g%s step %3d  loss %-11.5g λ %-9.2g Δ %-9.2g %6.1fs\n",
				p.Stage+1, p.Stages, p.Kappa, start, p.Iter, p.Loss, p.Lambda, p.Step, p.Elapsed.Seconds())
		}
	}
	if !*quiet && !*jsonOut {
		fmt.Fprintf(e.stderr, "fit: %d training and %d held-out logs, %d free parameters\n", len(job.train), len(job.heldOut), len(job.params))
	}
	begin := time.Now()
	cal, err := calibrate.Fit(cfg)
	if err != nil {
		var fe *sim.FileError
		if errors.As(err, &fe) {
			return badInput(err)
		}
		return err
	}
	for _, w := range cal.Warnings {
		fmt.Fprintf(e.stderr, "warning: %s\n", w)
	}
	fitted := sim.CopyModel(job.scene.Model)
	for j, p := range job.params {
		pp := p.Param()
		pp.Set(fitted, cal.Fitted[j])
	}
	fsc := *job.scene
	fsc.Model = fitted
	fsc.Warnings = nil
	if fsc.Description != "" {
		fsc.Description += " (fitted)"
	}
	src, err := scenarios.Marshal(&fsc)
	if err != nil {
		return fmt.Errorf("writing the fitted scene: %w", err)
	}
	if err := writeFileAtomic(*out, src); err != nil {
		return err
	}
	info := calibrate.ReportInfo{Scene: job.sceneArg, FittedScene: *out, Train: job.trainN, HeldOut: job.heldN, Options: job.opts,
		Snapshots: eventSnapshots(e, fitted, job.scene.Settings.WithDefaults(), *quiet || *jsonOut)}
	if err := cal.WriteReport(*reportDir, info); err != nil {
		return fmt.Errorf("writing the report: %w", err)
	}
	if err := os.Remove(*checkpoint); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	if *jsonOut {
		b, err := cal.JSON(info, nil)
		if err != nil {
			return err
		}
		_, err = e.stdout.Write(b)
		return err
	}
	if !*quiet {
		printFitSummary(e, cal)
		fmt.Fprintf(e.stdout, "\nwrote %s and %s/ (report.json, index.html, plots) in %.1f s\n", *out, *reportDir, time.Since(begin).Seconds())
	}
	return nil
}

// printFitSummary prints the parameter table, the identifiability notes and
// the errors before and after.
func printFitSummary(e *env, cal *calibrate.Calibration) {
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "parameter\tinitial\tfitted\tstd. error\t95 % interval\tidentifiability")
	for _, p := range cal.Params {
		fmt.Fprintf(tw, "%s\t%.4g\t%.5g\t%.2g\t[%.5g, %.5g]\t%s\n", p.Name, p.Initial, p.Value, p.StdErr, p.Lower95, p.Upper95, p.Verdict)
	}
	tw.Flush()
	fmt.Fprintln(e.stdout)
	for _, p := range cal.Params {
		fmt.Fprintf(e.stdout, "  %s\n", p.Note)
	}
	fmt.Fprintln(e.stdout)
	line := func(label string, a, b calibrate.ErrorSummary) {
		var parts []string
		if !math.IsNaN(a.Position) {
			parts = append(parts, fmt.Sprintf("position RMS %.3g mm → %.3g mm", 1e3*a.Position, 1e3*b.Position))
		}
		if !math.IsNaN(a.Rotation) {
			parts = append(parts, fmt.Sprintf("rotation RMS %.3g° → %.3g°", a.Rotation*180/math.Pi, b.Rotation*180/math.Pi))
		}
		if !math.IsNaN(a.Joint) {
			parts = append(parts, fmt.Sprintf("joint RMS %.3g → %.3g", a.Joint, b.Joint))
		}
		fmt.Fprintf(e.stdout, "%s: %s\n", label, strings.Join(parts, ", "))
	}
	line("training error", cal.TrainBefore, cal.TrainAfter)
	if cal.HeldOutBefore != nil {
		line("held-out error", *cal.HeldOutBefore, *cal.HeldOutAfter)
	}
	status := "converged"
	if !cal.Converged {
		status = "did NOT converge"
	}
	last := cal.Stages[len(cal.Stages)-1]
	fmt.Fprintf(e.stdout, "fit %s (%s after %d steps in the last stage); residual variance %.3g, condition %.3g\n",
		status, last.Status, last.Iterations, cal.Sigma2, cal.Condition)
}

func fitJobFromFile(path string, sets []string) (*fitJob, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, badInput(err)
	}
	ff, err := calibrate.ParseFitFile(src, path)
	if err != nil {
		return nil, badInput(err)
	}
	sceneArg := ff.Scene
	if !isBuiltinName(sceneArg) && !filepath.IsAbs(sceneArg) {
		sceneArg = filepath.Join(ff.Dir(), sceneArg)
	}
	sc, err := loadScene(sceneArg, append(append([]string(nil), ff.Set...), sets...))
	if err != nil {
		return nil, err
	}
	job := &fitJob{sceneArg: ff.Scene, scene: sc, opts: ff.Options()}
	h := sha256.New()
	h.Write(src)
	if job.params, err = ff.Resolve(sc.Model); err != nil {
		return nil, badInput(err)
	}
	read := func(specs []calibrate.LogSpec) ([]*calibrate.Log, []string, error) {
		var out []*calibrate.Log
		var names []string
		for _, l := range specs {
			p := ff.LogPath(l)
			data, err := os.ReadFile(p)
			if err != nil {
				return nil, nil, badInputf("%s:%d: log: %v", path, l.Line, err)
			}
			h.Write(data)
			lg, err := ff.Reader(l).Read(strings.NewReader(string(data)), p)
			if err != nil {
				return nil, nil, badInput(err)
			}
			out, names = append(out, lg), append(names, p)
		}
		return out, names, nil
	}
	if job.train, job.trainN, err = read(ff.Train); err != nil {
		return nil, err
	}
	if job.heldOut, job.heldN, err = read(ff.HeldOut); err != nil {
		return nil, err
	}
	job.hash = h.Sum(nil)
	return job, nil
}

func isBuiltinName(s string) bool {
	if _, err := os.Stat(s); err == nil {
		return false
	}
	for _, n := range scenarios.BuiltinNames() {
		if n == s {
			return true
		}
	}
	return false
}

func fitJobFromFlags(scene string, logs, held, params, bounds, sets []string) (*fitJob, error) {
	if scene == "" {
		return nil, badInputf("name a fit file, or give --scene, --log and --param for a quick fit")
	}
	if len(logs) == 0 {
		return nil, badInputf("--log: give at least one training log")
	}
	if len(params) == 0 {
		return nil, badInputf("--param: nothing is free; name at least one parameter (forms: %s)", sim.ParamHelp)
	}
	sc, err := loadScene(scene, sets)
	if err != nil {
		return nil, err
	}
	job := &fitJob{sceneArg: scene, scene: sc}
	h := sha256.New()
	for _, a := range append(append(append([]string{scene}, params...), bounds...), sets...) {
		h.Write([]byte(a + "\x00"))
	}
	var fps []calibrate.FreeParam
	index := map[string]int{}
	for _, p := range params {
		name, init, hasInit := strings.Cut(p, "=")
		fp := calibrate.FreeParam{Name: name, Initial: math.NaN(), Lower: math.NaN(), Upper: math.NaN()}
		if hasInit {
			v, err := strconv.ParseFloat(init, 64)
			if err != nil {
				return nil, badInputf("--param %s: initial value %q is not a number", p, init)
			}
			fp.Initial = v
		}
		index[name] = len(fps)
		fps = append(fps, fp)
	}
	for _, b := range bounds {
		name, rng, ok := strings.Cut(b, "=")
		lo, hi, ok2 := strings.Cut(rng, ",")
		if !ok || !ok2 {
			return nil, badInputf("--bounds %s: want NAME=LOWER,UPPER", b)
		}
		i, found := index[name]
		if !found {
			return nil, badInputf("--bounds %s: %s is not a free parameter (give it with --param)", b, name)
		}
		l, err1 := strconv.ParseFloat(strings.TrimSpace(lo), 64)
		u, err2 := strconv.ParseFloat(strings.TrimSpace(hi), 64)
		if err1 != nil || err2 != nil {
			return nil, badInputf("--bounds %s: bounds must be numbers (inf allowed)", b)
		}
		fps[i].Lower, fps[i].Upper = l, u
	}
	if job.params, err = calibrate.ResolveParams(sc.Model, fps); err != nil {
		return nil, badInput(err)
	}
	read := func(paths []string) ([]*calibrate.Log, error) {
		var out []*calibrate.Log
		for _, p := range paths {
			data, err := os.ReadFile(p)
			if err != nil {
				return nil, badInput(err)
			}
			h.Write(data)
			lg, err := (&calibrate.LogReader{Comment: '#'}).Read(strings.NewReader(string(data)), p)
			if err != nil {
				return nil, badInput(err)
			}
			out = append(out, lg)
		}
		return out, nil
	}
	if job.train, err = read(logs); err != nil {
		return nil, err
	}
	if job.heldOut, err = read(held); err != nil {
		return nil, err
	}
	job.trainN, job.heldN = logs, held
	job.hash = h.Sum(nil)
	return job, nil
}

// applyFitFlags lets flags override the fit's options.
func applyFitFlags(o *calibrate.Options, noise []string, window float64, smoothing string, iterations int) error {
	if window < 0 || iterations < 0 {
		return badInputf("--window and --iterations must be positive")
	}
	if window > 0 {
		o.Window = window
	}
	if iterations > 0 {
		o.Iterations = iterations
	}
	if smoothing != "" {
		o.Smoothing = nil
		for _, s := range strings.Split(smoothing, ",") {
			k, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
			if err != nil || !(k >= 0) || math.IsInf(k, 0) {
				return badInputf("--smoothing %s: %q is not a non-negative number", smoothing, s)
			}
			if n := len(o.Smoothing); n > 0 && k > o.Smoothing[n-1] {
				return badInputf("--smoothing %s: the schedule runs from large to small", smoothing)
			}
			o.Smoothing = append(o.Smoothing, k)
		}
	}
	for _, n := range noise {
		key, val, ok := strings.Cut(n, "=")
		v, err := strconv.ParseFloat(val, 64)
		if !ok || err != nil || !(v > 0) || math.IsInf(v, 0) {
			return badInputf("--noise %s: want KIND=σ with σ > 0 (KIND: position, rotation, joint or a channel such as carton.x)", n)
		}
		switch key {
		case "position":
			o.Noise.Position = v
		case "rotation":
			o.Noise.Rotation = v
		case "joint":
			o.Noise.Joint = v
		default:
			if o.Noise.Channels == nil {
				o.Noise.Channels = map[string]float64{}
			}
			o.Noise.Channels[key] = v
		}
	}
	return nil
}

// fingerprint identifies the fit's inputs and settings for checkpoints.
func (j *fitJob) fingerprint() string {
	h := sha256.New()
	h.Write(j.hash)
	src, _ := scenarios.Marshal(j.scene)
	h.Write(src)
	o := j.opts
	o.Workers = 0 // results do not depend on it
	b, _ := json.Marshal(o)
	h.Write(b)
	for _, p := range j.params {
		fmt.Fprintf(h, "%s %v %v %v %v %v\n", p.Name, p.Initial, p.Lower, p.Upper, p.PriorMean, p.PriorSD)
	}
	return hex.EncodeToString(h.Sum(nil))[:32]
}
