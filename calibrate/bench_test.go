package calibrate

import (
	"fmt"
	"io/fs"
	"testing"

	"stickslip/calibrate/demodata"
	"stickslip/scenarios"

	"gonum.org/v1/gonum/mat"
)

// BenchmarkDemoJacobian measures one Levenberg–Marquardt iteration's
// dominant cost on the demo (two logs of the pusher cell, eight windows):
// residuals and Jacobian by forward tangent sweeps, with 1 and 2 workers.
func BenchmarkDemoJacobian(b *testing.B) {
	src, _ := fs.ReadFile(demodata.FS(), demodata.FitFile)
	ff, err := ParseFitFile(src, demodata.FitFile)
	if err != nil {
		b.Fatal(err)
	}
	sc, err := scenarios.LoadBuiltin(ff.Scene)
	if err != nil {
		b.Fatal(err)
	}
	params, err := ff.Resolve(sc.Model)
	if err != nil {
		b.Fatal(err)
	}
	var logs []*Log
	for _, l := range ff.Train {
		f, _ := demodata.FS().Open(l.File)
		lg, err := ff.Reader(l).Read(f, l.File)
		f.Close()
		if err != nil {
			b.Fatal(err)
		}
		logs = append(logs, lg)
	}
	for _, workers := range []int{1, 2} {
		b.Run(fmt.Sprintf("workers=%d", workers), func(b *testing.B) {
			opts := ff.Options()
			opts.Workers = workers
			o, err := NewObjective(sc.Model, sc.Settings, logs, params, opts)
			if err != nil {
				b.Fatal(err)
			}
			o.Kappa = 1e-7
			J := mat.NewDense(o.M(), o.NumParams(), nil)
			x := []float64{params[0].Initial, params[1].Initial}
			b.ReportAllocs()
			for b.Loop() {
				if err := o.Jacobian(J, x); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
