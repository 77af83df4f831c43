package main

import (
	"fmt"
	"path/filepath"

	"stickslip/sim"
)

func init() {
	register(&command{
		name:    "demo",
		summary: "run the main job on the built-in demo scene and print what happened",
		run:     runDemo,
	})
}

// demoScene is the built-in scene the demo simulates.
const demoScene = "crate-push"

func runDemo(e *env, args []string) error {
	fl := newFlags(e, "demo", "[flags]")
	out := fl.String("out", "demo-out", "directory for the demo's outputs")
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	dir := filepath.Join(*out, "run-"+demoScene)
	fmt.Fprintf(e.stdout, "stickslip demo: simulating the built-in scene %q\n\n", demoScene)
	if err := runSimulate(e, []string{"--out", dir, "--quiet", demoScene}); err != nil {
		return err
	}
	run, err := sim.ReadRun(dir)
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "wrote %s (%d frames, %d contact records); its contact events:\n\n", dir, len(run.Frames), len(run.Contacts))
	return printEvents(e, run, run.Events())
}
