package main

import (
	"fmt"
	"os"
	"path/filepath"

	"stickslip/calibrate"
	"stickslip/scenarios"
)

func init() {
	register(&command{
		name:    "tune",
		summary: "tune controller gains through the simulator, robust to the fit's uncertainty",
		run:     runTune,
	})
}

func runTune(e *env, args []string) error {
	fl := newFlags(e, "tune", "[flags] TUNEFILE\n\nTUNEFILE describes the scene, the free gains with bounds, the task, the cost and the\nparameter uncertainty (see docs/tune-format.md).")
	out := fl.String("out", "", "report directory to write (default: tune-<scene name>)")
	sceneOut := fl.String("scene-out", "", "scene file to write with the tuned gains (default: <scene name>-tuned.yaml beside the report directory)")
	iters := fl.Int("iterations", 0, "bound the descent steps (default: the file's iterations, else 60)")
	samples := fl.Int("samples", 0, "number of parameter samples (overrides uncertainty.samples)")
	seed := fl.Int64("seed", -1, "seed of the parameter samples (overrides uncertainty.seed)")
	horizon := fl.Float64("horizon", 0, "simulated seconds the cost covers (overrides horizon)")
	workers := fl.Int("workers", 0, "samples simulated at once (default: the number of cores; results do not depend on it)")
	quiet := fl.Bool("quiet", false, "print no progress")
	asJSON := fl.Bool("json", false, "print report.json on stdout instead of a summary")
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	if fl.NArg() != 1 {
		fl.Usage()
		return badInputf("want one TUNEFILE argument, got %d", fl.NArg())
	}
	for _, c := range []struct {
		bad  bool
		flag string
	}{{*iters < 0, "--iterations"}, {*samples < 0, "--samples"}, {*horizon < 0, "--horizon"}, {*workers < 0, "--workers"}, {*seed < -1, "--seed"}} {
		if c.bad {
			return badInputf("%s: must not be negative", c.flag)
		}
	}
	tf, err := calibrate.ReadTuneFile(fl.Arg(0))
	if err != nil {
		return badInput(err)
	}
	if *horizon > 0 {
		tf.Horizon = *horizon
	}
	if *iters > 0 {
		tf.Iterations = *iters
	}
	if tf.Uncertainty != nil {
		if *samples > 0 {
			tf.Uncertainty.Samples = *samples
		}
		if *seed >= 0 {
			tf.Uncertainty.Seed = uint64(*seed)
		}
	} else if *samples > 0 || *seed >= 0 {
		return badInputf("%s: --samples and --seed need an uncertainty section naming a fit report", fl.Arg(0))
	}
	scenePath := tf.ScenePath()
	sc, err := loadScene(scenePath, tf.Set)
	if err != nil {
		return err
	}
	for _, w := range sc.Warnings {
		fmt.Fprintf(e.stderr, "warning: %s\n", w)
	}
	ref := calibrate.SceneRef{Name: sc.Name}
	if _, err := os.Stat(scenePath); err == nil {
		ref.Path = scenePath
	}
	prob, fit, warnings, err := tf.Problem(sc.Model, sc.Settings, ref)
	if err != nil {
		return badInput(err)
	}
	for _, w := range warnings {
		fmt.Fprintf(e.stderr, "warning: %s\n", w)
	}
	tuner, err := calibrate.NewTuner(prob)
	if err != nil {
		return badInput(err)
	}
	tuner.Workers = *workers
	dir := *out
	if dir == "" {
		dir = "tune-" + sc.Name
	}
	sceneFile := *sceneOut
	if sceneFile == "" {
		sceneFile = filepath.Join(filepath.Dir(filepath.Clean(dir)), sc.Name+"-tuned.yaml")
	}
	if st, err := os.Stat(sceneFile); err == nil && st.IsDir() {
		return badInputf("--scene-out %s is a directory", sceneFile)
	}
	if !*quiet {
		fmt.Fprintf(e.stderr, "tune: %d gains, %d samples, horizon %d steps of %g s\n",
			len(prob.Gains), tuner.Samples(), prob.Steps, prob.Settings.TimeStep)
	}
	res, err := tuner.Tune(calibrate.TuneSettings{Iterations: tf.Iterations, Smoothing: tf.Smoothing, Progress: func(it calibrate.TuneIteration) {
		if !*quiet {
			fmt.Fprintf(e.stderr, "tune: κ %-7g iteration %3d  cost %.6g  step %.3g  evaluations %d  elapsed %.1f s\n",
				it.Kappa, it.Iter, it.Cost, it.Step, it.Evaluations, it.Elapsed)
		}
	}})
	if err != nil {
		return err
	}
	tuned, err := res.TunedModel(sc.Model)
	if err != nil {
		return err
	}
	tunedScene := *sc
	tunedScene.Model = tuned
	src, err := scenarios.Marshal(&tunedScene)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Dir(sceneFile), 0o755); err != nil {
		return err
	}
	if err := writeFileAtomic(sceneFile, src); err != nil {
		return err
	}
	info := calibrate.TuneReportInfo{Scene: tf.Scene, TunedScene: sceneFile, Warnings: warnings,
		Weights: prob.Weights, Horizon: float64(prob.Steps) * prob.Settings.TimeStep}
	if fit != nil {
		info.FitReport, info.Seed = fit.Path, tf.Uncertainty.Seed
	}
	if err := res.WriteReport(tuner, dir, info); err != nil {
		return err
	}
	if *asJSON {
		b, err := os.ReadFile(filepath.Join(dir, "report.json"))
		if err != nil {
			return err
		}
		_, err = e.stdout.Write(b)
		fmt.Fprintf(e.stderr, "caution: %s\n", calibrate.SafetyCaution)
		return err
	}
	w := e.stdout
	fmt.Fprintf(w, "tuned %d gains on %s (%s after %d iterations, %d cost evaluations, %.1f s)\n",
		len(res.Names), sc.Name, res.Status, len(res.History)-1, res.Evaluations, res.Elapsed)
	for j, n := range res.Names {
		bound := ""
		if res.Tuned[j] <= res.Lower[j] || res.Tuned[j] >= res.Upper[j] {
			bound = "  (at a bound)"
		}
		fmt.Fprintf(w, "  %-16s %10.4g → %-10.4g bounds [%g, %g]%s\n", n, res.Initial[j], res.Tuned[j], res.Lower[j], res.Upper[j], bound)
	}
	b, a := res.Before.Spread(), res.After.Spread()
	fmt.Fprintf(w, "cost over %d samples: before mean %.4g (sd %.2g, worst tenth %.4g), after mean %.4g (sd %.2g, worst tenth %.4g)\n",
		len(res.After.Samples), b.Mean, b.SD, b.Worst10, a.Mean, a.SD, a.Worst10)
	if prob.Pose != nil {
		fmt.Fprintf(w, "final position error of %s (first sample): %.4g m → %.4g m\n",
			prob.Pose.Body, res.Before.Samples[0].PoseError, res.After.Samples[0].PoseError)
	}
	fmt.Fprintf(w, "wrote %s and the report %s\n\nCAUTION: %s\n", sceneFile, dir, calibrate.SafetyCaution)
	return nil
}
