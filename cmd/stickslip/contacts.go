package main

import (
	"fmt"
	"math"
	"text/tabwriter"

	"stickslip/sim"
)

func init() {
	register(&command{
		name:    "contacts",
		summary: "print a run's contact events frame by frame",
		run:     runContacts,
	})
}

func runContacts(e *env, args []string) error {
	fl := newFlags(e, "contacts", "[flags] RUN\n\nPrints touch-down, lift-off, stick→slip and slip→stick events of the run directory RUN.")
	body := fl.String("body", "", "only events involving this body or static shape")
	from := fl.Float64("from", 0, "only events at or after this time (s)")
	to := fl.Float64("to", math.Inf(1), "only events at or before this time (s)")
	if err := parseFlags(fl, args); err != nil {
		return err
	}
	if fl.NArg() != 1 {
		fl.Usage()
		return badInputf("want one RUN directory, got %d arguments", fl.NArg())
	}
	if *from > *to {
		return badInputf("--from %g is after --to %g", *from, *to)
	}
	run, err := sim.ReadRun(fl.Arg(0))
	if err != nil {
		return badInput(err)
	}
	if *body != "" && !runNames(run)[*body] {
		return badInputf("--body %q: no body or static shape of that name appears in %s", *body, fl.Arg(0))
	}
	events := filterEvents(run.Events(), *body, *from, *to)
	return printEvents(e, run, events)
}

// runNames returns the names of all bodies and of the static shapes that
// appear in the run's contacts.
func runNames(run *sim.Run) map[string]bool {
	names := map[string]bool{}
	for _, n := range run.BodyNames {
		names[n] = true
	}
	for _, c := range run.Contacts {
		names[c.A], names[c.B] = true, true
	}
	return names
}

func filterEvents(events []sim.Event, body string, from, to float64) []sim.Event {
	var out []sim.Event
	for _, ev := range events {
		if ev.T < from || ev.T > to {
			continue
		}
		if body != "" && ev.Record.A != body && ev.Record.B != body {
			continue
		}
		out = append(out, ev)
	}
	return out
}

func printEvents(e *env, run *sim.Run, events []sim.Event) error {
	tw := tabwriter.NewWriter(e.stdout, 0, 2, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "frame\ttime (s)\tevent\tbodies\tpoint (m)\tnormal force (N)\tfriction (N)\tslip (m/s)\t")
	for _, ev := range events {
		c := ev.Record
		fn := c.NormalImpulse / run.TimeStep
		ff := math.Sqrt(c.FrictionImpulse.X*c.FrictionImpulse.X+c.FrictionImpulse.Y*c.FrictionImpulse.Y+c.FrictionImpulse.Z*c.FrictionImpulse.Z) / run.TimeStep
		fmt.Fprintf(tw, "%d\t%.4f\t%s\t%s–%s\t(%.4f, %.4f, %.4f)\t%.4g\t%.4g\t%.4g\t\n",
			ev.Frame, ev.T, ev.Kind, c.A, c.B, c.Point.X, c.Point.Y, c.Point.Z, fn, ff, c.Slip)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "%d events\n", len(events))
	return nil
}
