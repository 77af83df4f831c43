package main

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"time"

	"stickslip/scenarios"
	"stickslip/sim"
)

func init() {
	register(&command{
		name:    "simulate",
		summary: "simulate a scene and write a run directory",
		run:     runSimulate,
	})
	register(&command{
		name:    "scenes",
		summary: "list the built-in scenes, or print one as a scene file",
		run:     runScenes,
	})
}

// multiFlag collects a repeated string flag.
type multiFlag []string

func (m *multiFlag) String() string     { return strings.Join(*m, " ") }
func (m *multiFlag) Set(s string) error { *m = append(*m, s); return nil }

// loadScene reads a scene file, or a built-in scene when no such file exists
// and the argument names one.
func loadScene(arg string, overrides []string) (*scenarios.Scene, error) {
	if _, err := os.Stat(arg); errors.Is(err, fs.ErrNotExist) && !strings.ContainsAny(arg, `/\.`) {
		for _, n := range scenarios.BuiltinNames() {
			if n == arg {
				sc, err := scenarios.LoadBuiltin(arg, overrides...)
				return sc, badInput(err)
			}
		}
		return nil, badInputf("%s: no such scene file or built-in scene (built-ins: %s)", arg, strings.Join(scenarios.BuiltinNames(), ", "))
	}
	sc, err := scenarios.LoadFile(arg, overrides...)
	if err != nil {
		return nil, badInput(err)
	}
	return sc, nil
}

// progress prints a progress line at most every interval.
type progress struct {
	e        *env
	quiet    bool
	last     time.Time
	interval time.Duration
}

func (p *progress) printf(force bool, format string, args ...any) {
	if p.quiet {
		return
	}
	if now := time.Now(); force || now.Sub(p.last) >= p.interval {
		p.last = now
		fmt.Fprintf(p.e.stderr, format, args...)
	}
}

func runSimulate(e *env, args []string) error {
	fl := newFlags(e, "simulate", "[flags] SCENE\n\nSCENE is a scene file or the name of a built-in scene (see 'stickslip scenes').")
	out := fl.String("out", "", "run directory to write (default: run-<scene name>)")
	var sets multiFlag
	fl.Var(&sets, "set", "override a scene value, PATH=VALUE (repeatable), e.g. --set bodies.crate.mass=2")
	duration := fl.Float64("duration", 0, "simulated seconds (default: the scene's settings.duration)")
	quiet := fl.Bool("quiet", false, "print nothing but errors")
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	if fl.NArg() != 1 {
		fl.Usage()
		return badInputf("want one SCENE argument, got %d", fl.NArg())
	}
	sc, err := loadScene(fl.Arg(0), sets)
	if err != nil {
		return err
	}
	for _, w := range sc.Warnings {
		fmt.Fprintf(e.stderr, "warning: %s\n", w)
	}
	set := sc.Settings.WithDefaults()
	if *duration < 0 {
		return badInputf("--duration %g: must be positive", *duration)
	}
	if *duration > 0 {
		set.Duration = *duration
	}
	if set.Duration <= 0 {
		return badInputf("%s: settings.duration is not set; give --duration", fl.Arg(0))
	}
	dir := *out
	if dir == "" {
		dir = "run-" + sc.Name
	}
	src, err := scenarios.Marshal(sc)
	if err != nil {
		return err
	}
	s, err := sim.New(sc.Model, set)
	if err != nil {
		return badInput(err)
	}
	p := &progress{e: e, quiet: *quiet, interval: time.Second}
	start := time.Now()
	steps := int(set.Duration/set.TimeStep + 0.5)
	run, err := s.Record(src, func(step int) {
		p.printf(false, "simulate: t = %.3f s of %.3f s (%d%%)\n", float64(step)*set.TimeStep, set.Duration, 100*step/steps)
	})
	if err != nil {
		// Keep what was simulated: a partial run helps find the failing step.
		partial := dir + ".partial"
		if werr := run.Write(partial); werr == nil {
			fmt.Fprintf(e.stderr, "the %d frames before the failure are in %s\n", len(run.Frames), partial)
		}
		return err
	}
	if err := run.Write(dir); err != nil {
		return err
	}
	if !*quiet {
		fmt.Fprintf(e.stdout, "wrote %s: %d steps of %g s, %d frames, %d contact records\n",
			dir, run.Stats.Steps, set.TimeStep, len(run.Frames), len(run.Contacts))
		fmt.Fprintf(e.stdout, "contact solver: median %d, max %d interior-point iterations per step; worst residual %.2g\n",
			run.Stats.SolverIterMedian, run.Stats.SolverIterMax, run.Stats.MaxResidual)
		fmt.Fprintf(e.stdout, "wall time %.2f s\n", time.Since(start).Seconds())
	}
	return nil
}

func runScenes(e *env, args []string) error {
	fl := newFlags(e, "scenes", "[flags] [NAME]\n\nWithout NAME, list the built-in scenes; with NAME, print that scene's file.")
	export := fl.String("export", "", "write every built-in scene file into this directory")
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	switch {
	case *export != "":
		if err := os.MkdirAll(*export, 0o755); err != nil {
			return err
		}
		for _, n := range scenarios.BuiltinNames() {
			src, _, err := scenarios.Builtin(n)
			if err != nil {
				return err
			}
			if err := writeFileAtomic(filepath.Join(*export, n+".yaml"), src); err != nil {
				return err
			}
		}
		fmt.Fprintf(e.stdout, "wrote %d scene files to %s\n", len(scenarios.BuiltinNames()), *export)
	case fl.NArg() == 1:
		src, _, err := scenarios.Builtin(fl.Arg(0))
		if err != nil {
			return badInput(err)
		}
		_, err = e.stdout.Write(src)
		return err
	case fl.NArg() == 0:
		for _, n := range scenarios.BuiltinNames() {
			_, desc, _ := scenarios.Builtin(n)
			fmt.Fprintf(e.stdout, "%-14s %s\n", n, desc)
		}
	default:
		return badInputf("want at most one scene name")
	}
	return nil
}

// writeFileAtomic writes data to a temporary file beside path and renames it.
func writeFileAtomic(path string, data []byte) error {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp-")
	if err != nil {
		return err
	}
	defer os.Remove(f.Name())
	if _, err := f.Write(data); err != nil {
		f.Close()
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	if err := os.Chmod(f.Name(), 0o644); err != nil {
		return err
	}
	return os.Rename(f.Name(), path)
}
