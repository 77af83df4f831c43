package main

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"

	"stickslip/calibrate/demodata"
)

func init() {
	register(&command{
		name:    "demo",
		summary: "run the main job on the built-in pusher cell: fit, validate, report, tune",
		run:     runDemo,
	})
}

// demoScene is the built-in scene the demo calibrates.
const demoScene = "pusher-cell"

// demoTuneFile tunes the shoulder's PD gains on the fitted scene, over the
// fit's remaining uncertainty, for a quick push.
const demoTuneFile = `# Written by stickslip demo: tune the shoulder's gains on the fitted pusher
# cell for a quick sweep (0 → 0.5 rad between 0.1 s and 0.5 s).
scene: pusher-cell-fitted.yaml
set:
  - controller.pd.targets.rows=[[0, 0, %[1]s], [0.1, 0, %[1]s], [0.5, 0.5, %[1]s], [3, 0.5, %[1]s]]
horizon: 0.6
gains:
  - {name: kp:shoulder, bounds: [5, 600], initial: 40}
  - {name: kd:shoulder, bounds: [0.5, 60], initial: 4}
task:
  track: [shoulder]
cost:
  tracking: 10
  effort: 1.0e-5
  effort_limit: 1
uncertainty:
  report: fit-report/report.json
  samples: 4
  seed: 7
smoothing: [1.0e-4]
iterations: 10
`

func runDemo(e *env, args []string) error {
	fl := newFlags(e, "demo", "[flags]\n\n"+
		"Calibrates the built-in pusher cell (a two-link arm sliding a card carton over a\n"+
		"steel table) against invented logs, validates on a held-out log, writes the\n"+
		"report, then tunes the shoulder's gains on the fitted model.")
	out := fl.String("out", "demo-out", "directory for the demo's outputs")
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return err
	}
	fitPath, err := demodata.WriteTo(filepath.Join(*out, "data"))
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "stickslip demo: calibrating %q against the invented logs in %s\n", demoScene, filepath.Dir(fitPath))
	fmt.Fprintf(e.stdout, "(the logs were simulated with hidden values: card/steel friction 0.42, carton mass 1.3 kg)\n\n")
	fitted := filepath.Join(*out, "pusher-cell-fitted.yaml")
	if err := runFit(e, []string{"--out", fitted, "--report", filepath.Join(*out, "fit-report"), fitPath}); err != nil {
		return err
	}
	tunePath := filepath.Join(*out, "tune.yaml")
	elbow := strconv.FormatFloat(math.Pi/2, 'g', -1, 64)
	if err := writeFileAtomic(tunePath, fmt.Appendf(nil, demoTuneFile, elbow)); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "\nstickslip demo: tuning the shoulder's gains on the fitted scene (%s)\n\n", tunePath)
	return runTune(e, []string{"--out", filepath.Join(*out, "tune-report"), "--scene-out", filepath.Join(*out, "pusher-cell-tuned.yaml"), tunePath})
}
