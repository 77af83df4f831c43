package main

import (
	"errors"
	"fmt"
	"path/filepath"
	"strconv"
	"strings"

	"stickslip/scenarios"
	"stickslip/sim"
	"stickslip/viewer"
)

func init() {
	register(&command{
		name:    "view",
		summary: "replay a run in a window, or render one frame to PNG",
		run:     runView,
	})
}

const viewSynopsis = `[flags] RUN

Replays the run directory RUN (written by 'stickslip simulate') in an OpenGL
window: bodies, contact points with normal and friction force arrows
coloured by state (green sticking, orange sliding, violet separating), and
with --log the logged trajectory as a translucent ghost with its position
error. With --snapshot, renders one frame to a PNG file without showing a
window (this still needs an X display; without one run it under
'xvfb-run -a').

--frame takes a frame index, or one of: last, first-slip, largest-impulse.`

func runView(e *env, args []string) error {
	fl := newFlags(e, "view", viewSynopsis)
	frameArg := fl.String("frame", "0", "frame to show first, or to render with --snapshot")
	snapshot := fl.String("snapshot", "", "render the frame to this PNG file and exit")
	size := fl.String("size", "1280x800", "window or image size in pixels, WIDTHxHEIGHT")
	camArg := fl.String("camera", "", "camera settings over the fitted view: az=DEG,el=DEG,dist=M,at=X:Y:Z,fov=DEG (any of them)")
	logPath := fl.String("log", "", "logged trajectory CSV (states.csv columns) to draw as a ghost")
	contactIdx := fl.Int("contact", -1, "select the frame's contact with this index (0-based) and show its values")
	noText := fl.Bool("no-text", false, "leave out the text panels and the time bar")
	arrowScale := fl.Float64("arrow-scale", 0, "force arrow length in metres per newton (default: the largest force is a quarter of the scene's size)")
	usage := fl.Usage
	fl.Usage = func() {
		usage()
		fmt.Fprintln(e.stderr, "\nkeys and mouse in the window:")
		for _, l := range viewer.HelpText() {
			fmt.Fprintln(e.stderr, "  "+l)
		}
	}
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	if fl.NArg() != 1 {
		fl.Usage()
		return badInputf("want one RUN directory, got %d arguments", fl.NArg())
	}
	width, height, err := parseSize(*size)
	if err != nil {
		return badInput(err)
	}
	spec, err := viewer.ParseCameraSpec(*camArg)
	if err != nil {
		return badInputf("--camera: %v", err)
	}
	if *arrowScale < 0 {
		return badInputf("--arrow-scale %g: want a positive length per newton (or 0 for the default)", *arrowScale)
	}
	dir := fl.Arg(0)
	run, err := sim.ReadRun(dir)
	if err != nil {
		return badInput(err)
	}
	var loader scenarios.Loader
	sc, err := loader.Load(run.Scene, filepath.Join(dir, sim.RunSceneFile))
	if err != nil {
		return badInput(err)
	}
	var log *viewer.Trajectory
	if *logPath != "" {
		if log, err = viewer.ReadTrajectoryFile(*logPath); err != nil {
			return badInput(err)
		}
	}
	scene, err := viewer.NewScene(sc.Model, run, log)
	if err != nil {
		return badInputf("%s: %v", dir, err)
	}
	frame, err := parseFrame(*frameArg, run)
	if err != nil {
		return badInputf("--frame: %v", err)
	}
	style := viewer.Style{ArrowScale: *arrowScale, HideText: *noText}
	if *contactIdx >= 0 {
		recs := run.ContactsInFrame(frame)
		if *contactIdx >= len(recs) {
			return badInputf("--contact %d: frame %d has %d contacts", *contactIdx, frame, len(recs))
		}
		id := viewer.ID(&recs[*contactIdx])
		style.Selected = &id
	}

	if *snapshot == "" {
		err := viewer.View(scene, viewer.ViewOptions{Width: width, Height: height, Camera: spec, Style: style, Frame: frame,
			Title: "stickslip view " + filepath.Base(filepath.Clean(dir))})
		if errors.Is(err, viewer.ErrNoDisplay) {
			return fmt.Errorf("%w: the interactive viewer needs a window; render a frame to an image with --snapshot FILE instead (it runs under 'xvfb-run -a' where there is no display)", err)
		}
		return err
	}
	rd, err := viewer.NewRenderer(scene, width, height, viewer.RendererOptions{})
	if errors.Is(err, viewer.ErrNoDisplay) {
		return fmt.Errorf("%w: --snapshot renders in a hidden window, which also needs an X display; run it as 'xvfb-run -a stickslip view ...'", err)
	}
	if err != nil {
		return err
	}
	defer rd.Close()
	img, err := rd.Render(frame, spec.Camera(scene.Bounds(), float64(width)/float64(height)), &style, nil)
	if err != nil {
		return err
	}
	if err := viewer.WritePNG(*snapshot, img); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "wrote %s: frame %d of %s at t = %.4g s, %dx%d\n", *snapshot, frame, dir, run.Frames[frame].T, width, height)
	return nil
}

// parseSize parses WIDTHxHEIGHT.
func parseSize(s string) (w, h int, err error) {
	a, b, ok := strings.Cut(strings.ToLower(s), "x")
	if ok {
		w, err = strconv.Atoi(a)
		if err == nil {
			h, err = strconv.Atoi(b)
		}
	}
	if !ok || err != nil || w < 16 || h < 16 || w > 8192 || h > 8192 {
		return 0, 0, fmt.Errorf("--size %q: want WIDTHxHEIGHT in pixels, 16 to 8192 each, e.g. 1280x800", s)
	}
	return w, h, nil
}

// parseFrame resolves a frame index or the name of a key frame.
func parseFrame(s string, run *sim.Run) (int, error) {
	n := len(run.Frames)
	switch s {
	case "last":
		return n - 1, nil
	case "first-slip":
		f, ok := viewer.FirstSlipFrame(run)
		if !ok {
			return 0, errors.New("first-slip: no contact slides in this run")
		}
		return f, nil
	case "largest-impulse":
		f, ok := viewer.LargestImpulseFrame(run)
		if !ok {
			return 0, errors.New("largest-impulse: the run has no contact impulse")
		}
		return f, nil
	}
	f, err := strconv.Atoi(s)
	if err != nil {
		return 0, fmt.Errorf("%q is not a frame index or one of last, first-slip, largest-impulse", s)
	}
	if f < 0 || f >= n {
		return 0, fmt.Errorf("frame %d is outside the run's frames 0 to %d", f, n-1)
	}
	return f, nil
}
