package calibrate

import (
	"bytes"
	"math/rand/v2"
	"strconv"
	"testing"

	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

func r3x(x float64) r3.Vec { return r3.Vec{X: x} }

// runLog turns every every-th frame of a simulated run into a log with
// Gaussian noise of standard deviation sigma on positions and joint
// angles and sigmaRot on quaternion components, without velocities.
func runLog(t *testing.T, run *sim.Run, every int, sigma, sigmaRot float64, seed uint64) *Log {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 99))
	var b bytes.Buffer
	b.WriteString("t")
	for _, n := range run.BodyNames {
		for _, c := range sim.BodyColumns[:7] {
			b.WriteString("," + n + "." + c)
		}
	}
	for _, n := range run.JointNames {
		b.WriteString("," + n + ".q")
	}
	b.WriteString("\n")
	f := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for i := 0; i < len(run.Frames); i += every {
		fr := &run.Frames[i]
		b.WriteString(f(fr.T))
		for _, bf := range fr.Bodies {
			p, q := bf.Pose.Pos, bf.Pose.Rot
			for _, v := range []float64{p.X, p.Y, p.Z} {
				b.WriteString("," + f(v+sigma*rng.NormFloat64()))
			}
			for _, v := range []float64{q.W, q.X, q.Y, q.Z} {
				b.WriteString("," + f(v+sigmaRot*rng.NormFloat64()))
			}
		}
		for _, j := range fr.Joints {
			b.WriteString("," + f(j.Q+sigma*rng.NormFloat64()))
		}
		b.WriteString("\n")
	}
	lg, err := (&LogReader{}).Read(&b, "simulated.csv")
	if err != nil {
		t.Fatal(err)
	}
	return lg
}
