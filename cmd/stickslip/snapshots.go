package main

import (
	"bytes"
	"errors"
	"fmt"
	"image/png"

	"stickslip/calibrate"
	"stickslip/sim"
	"stickslip/viewer"
)

// eventSnapshots simulates a (fitted) scene and renders its key contact
// events, the first slip and the largest impulse, for a report. It returns
// nothing, with a note on stderr, when there is no display to render with
// or the scene has no such events; a report is still written.
func eventSnapshots(e *env, m *sim.Model, set sim.Settings, quiet bool) []calibrate.ReportImage {
	note := func(format string, args ...any) {
		if !quiet {
			fmt.Fprintf(e.stderr, "report snapshots: "+format+"\n", args...)
		}
	}
	run, err := sim.Rollout(m, set, nil)
	if err != nil {
		note("skipped: simulating the fitted scene failed: %v", err)
		return nil
	}
	scene, err := viewer.NewScene(m, run, nil)
	if err != nil {
		note("skipped: %v", err)
		return nil
	}
	var out []calibrate.ReportImage
	for _, ev := range []struct {
		file, what string
		find       func(*sim.Run) (int, bool)
	}{
		{"event-first-slip.png", "first slip", viewer.FirstSlipFrame},
		{"event-largest-impulse.png", "largest normal impulse", viewer.LargestImpulseFrame},
	} {
		frame, ok := ev.find(run)
		if !ok {
			continue
		}
		img, err := viewer.Snapshot(scene, frame, 640, 480, nil, nil)
		if errors.Is(err, viewer.ErrNoDisplay) {
			note("skipped: no display (run under xvfb-run -a to include them)")
			return nil
		}
		if err != nil {
			note("skipped: %v", err)
			return nil
		}
		var b bytes.Buffer
		if err := png.Encode(&b, img); err != nil {
			note("skipped: %v", err)
			return nil
		}
		out = append(out, calibrate.ReportImage{File: ev.file, PNG: b.Bytes(),
			Caption: fmt.Sprintf("%s, frame %d at t = %.3f s of the fitted scene simulated from its initial state", ev.what, frame, run.Frames[frame].T)})
	}
	return out
}
