package main

import (
	"fmt"
	"math"
	"strings"
	"text/tabwriter"
	"time"

	"stickslip/sim"

	"gonum.org/v1/gonum/diff/fd"
)

func init() {
	register(&command{
		name:    "gradcheck",
		summary: "check the simulator's gradients against central finite differences",
		run:     runGradcheck,
	})
}

func runGradcheck(e *env, args []string) error {
	fl := newFlags(e, "gradcheck", "[flags] SCENE\n\n"+
		"Differentiates the loss ½‖q(T)‖² + ½‖v(T)‖² of the final generalized state by\n"+
		"reverse sweep, forward sweep and central finite differences, per parameter.\n"+
		"Parameter names: "+sim.ParamHelp)
	var params, sets multiFlag
	fl.Var(&params, "param", "parameter to check (repeatable; default: every material pair's friction and every body's mass)")
	fl.Var(&sets, "set", "override a scene value, PATH=VALUE (repeatable)")
	smoothing := fl.Float64("smoothing", 0, "relaxed-complementarity smoothing κ of the contact solve")
	duration := fl.Float64("duration", 0.1, "simulated seconds to differentiate through")
	tol := fl.Float64("tol", 1e-5, "largest relative error accepted")
	atol := fl.Float64("atol", 1e-7, "absolute error always accepted (for derivatives that are zero, where central differences leave only rounding)")
	compact := fl.Bool("compact-tape", false, "keep only O(contact rows) numbers per step on the reverse-sweep tape and recompute the rest in the backward pass (less memory, more time)")
	checkpoint := fl.Bool("checkpoint", false, "keep only every ⌈√T⌉-th state on the reverse-sweep tape and recompute the rest (memory grows like √T)")
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	if fl.NArg() != 1 {
		fl.Usage()
		return badInputf("want one SCENE argument, got %d", fl.NArg())
	}
	if *smoothing < 0 || *duration <= 0 || *tol <= 0 || *atol < 0 {
		return badInputf("--smoothing and --atol must be ≥ 0, --duration and --tol > 0")
	}
	sc, err := loadScene(fl.Arg(0), sets)
	if err != nil {
		return err
	}
	m := sc.Model
	set := sc.Settings.WithDefaults()
	set.Solver.Smoothing = *smoothing
	names := []string(params)
	if len(names) == 0 {
		for _, p := range m.Materials.Pairs {
			names = append(names, "friction:"+p.A+"/"+p.B)
		}
		for _, b := range m.Bodies {
			names = append(names, "mass:"+b.Name)
		}
	}
	ps, err := sim.ParseParams(m, names)
	if err != nil {
		return badInput(err)
	}
	steps := int(*duration/set.TimeStep + 0.5)
	loss := func(q, v, gq, gv []float64) { copy(gq, q); copy(gv, v) }
	value := func(mm *sim.Model) (float64, error) {
		s, err := sim.New(mm, set)
		if err != nil {
			return 0, err
		}
		for k := 0; k < steps; k++ {
			if err := s.Step(); err != nil {
				return 0, err
			}
		}
		var l float64
		for _, x := range s.Q() {
			l += x * x / 2
		}
		for _, x := range s.V() {
			l += x * x / 2
		}
		return l, nil
	}
	s, err := sim.New(m, set)
	if err != nil {
		return badInput(err)
	}
	start := time.Now()
	rev, err := s.ReverseGradient(ps, steps, loss, sim.ReverseOptions{Compact: *compact, Checkpoint: *checkpoint})
	if err != nil {
		return err
	}
	tRev := time.Since(start)
	s, _ = sim.New(m, set)
	start = time.Now()
	fwd, err := s.ForwardGradient(ps, steps, loss)
	if err != nil {
		return err
	}
	tFwd := time.Since(start)
	var tFD time.Duration
	tw := tabwriter.NewWriter(e.stdout, 0, 2, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(e.stdout, "loss ½‖q‖² + ½‖v‖² after %d steps of %g s (κ = %g)\n\n", steps, set.TimeStep, *smoothing)
	fmt.Fprintln(tw, "parameter\tvalue\treverse\tforward\tfinite diff.\trel. err rev\trel. err fwd\t")
	failed := 0
	var atBound []string
	for i := range ps {
		p := &ps[i]
		v0 := p.Get(m)
		var ferr error
		f := func(x float64) float64 {
			mm := sim.CopyModel(m)
			p.Set(mm, x)
			l, err := value(mm)
			if err != nil && ferr == nil {
				ferr = err
			}
			return l
		}
		start := time.Now()
		h := 1e-6 * math.Max(1, math.Abs(v0))
		formula, note := fd.Central, ""
		if (p.NonNegative() || p.Positive()) && v0-h <= 0 {
			// The central stencil would leave the parameter's domain.
			formula, note = fd.Forward, " (one-sided)"
		}
		num := fd.Derivative(f, v0, &fd.Settings{Formula: formula, Step: h})
		tFD += time.Since(start)
		if ferr != nil {
			return ferr
		}
		scale := math.Max(math.Abs(num), *atol)
		dr, df := math.Abs(rev.Gradient[i]-num), math.Abs(fwd[i]-num)
		er, ef := dr/scale, df/scale
		limit := *tol*math.Abs(num) + *atol
		mark := ""
		if !(dr <= limit) || !(df <= limit) {
			failed++
			mark = "  ✗"
			if note != "" {
				atBound = append(atBound, p.Name)
			}
		}
		fmt.Fprintf(tw, "%s\t%.6g\t%.10g\t%.10g\t%.10g%s\t%.2e\t%.2e%s\t\n", p.Name, v0, rev.Gradient[i], fwd[i], num, note, er, ef, mark)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "\nreverse-sweep tape: %d bytes (%d per step)\n", rev.TapeBytes, rev.TapeBytes/max(steps, 1))
	fmt.Fprintf(e.stdout, "wall time for all %d parameters: reverse sweep %v, forward sweep %v, finite differences %v\n",
		len(ps), tRev.Round(time.Microsecond), tFwd.Round(time.Microsecond), tFD.Round(time.Microsecond))
	if len(atBound) > 0 {
		fmt.Fprintf(e.stdout, "%s: at 0, the edge of the range, only a one-sided difference exists and the derivative may not (zero friction is frictionless for the sweeps: λt = 0, derivative 0)\n", strings.Join(atBound, ", "))
	}
	if failed > 0 {
		return fmt.Errorf("%d of %d parameters exceed relative error %g (plus %g absolute) (a contact mode may change under the finite-difference step; try --smoothing or a shorter --duration)", failed, len(ps), *tol, *atol)
	}
	fmt.Fprintf(e.stdout, "all %d parameters within relative error %g (plus %g absolute)\n", len(ps), *tol, *atol)
	return nil
}
