// Command generate writes the invented demo logs of the pusher cell:
//
//	go run ./calibrate/demodata/generate
//
// It simulates the built-in pusher-cell scene with hidden parameter values
// (the card/steel friction and the carton's mass differ from the scene's),
// from three carton placements, and writes what a tracking system and the
// joint encoders would have recorded: the carton's pose and the joint
// angles every 10 ms, with Gaussian sensor noise. The data are invented for
// the demo; no real robot was involved.
package main

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"

	"stickslip/scenarios"
	"stickslip/sim"
)

// Hidden values the demo fit should recover (the scene says 0.35 and 1 kg).
const (
	hiddenFriction = 0.42
	hiddenMass     = 1.3
)

// Sensor noise standard deviations: tracked position (m), quaternion
// components, joint encoders (rad).
const (
	noisePos   = 3e-4
	noiseQuat  = 1e-3
	noiseJoint = 2e-4
)

var runs = []struct {
	file string
	at   string // carton placement on the table, [x, y] in m
	seed uint64
}{
	{"push-train-1.csv", "[0.276, 0.22]", 1},
	{"push-train-2.csv", "[0.276, 0.17]", 2},
	{"push-check-1.csv", "[0.276, 0.25]", 3},
}

func main() {
	dir := "calibrate/demodata"
	if len(os.Args) > 1 {
		dir = os.Args[1]
	}
	for _, r := range runs {
		if err := generate(filepath.Join(dir, r.file), r.at, r.seed); err != nil {
			fmt.Fprintln(os.Stderr, "generate:", err)
			os.Exit(1)
		}
	}
}

func generate(path, at string, seed uint64) error {
	sc, err := scenarios.LoadBuiltin("pusher-cell",
		"materials.pairs.0.friction="+strconv.FormatFloat(hiddenFriction, 'g', -1, 64),
		"bodies.carton.mass="+strconv.FormatFloat(hiddenMass, 'g', -1, 64),
		"bodies.carton.pose.at="+at)
	if err != nil {
		return err
	}
	set := sc.Settings
	set.Duration = 2
	set.FrameEvery = 10
	run, err := sim.Rollout(sc.Model, set, nil)
	if err != nil {
		return err
	}
	rng := rand.New(rand.NewPCG(seed, 2026))
	f := func(v float64) string { return strconv.FormatFloat(v, 'f', 6, 64) }
	var b bytes.Buffer
	b.WriteString("# INVENTED DATA for the stickslip demo: simulated pusher cell with hidden parameters and sensor noise (calibrate/demodata/generate)\n")
	b.WriteString("t,carton.x,carton.y,carton.z,carton.qw,carton.qx,carton.qy,carton.qz,shoulder.q,elbow.q\n")
	carton := -1
	for i, n := range run.BodyNames {
		if n == "carton" {
			carton = i
		}
	}
	for _, fr := range run.Frames {
		p, q := fr.Bodies[carton].Pose.Pos, fr.Bodies[carton].Pose.Rot
		b.WriteString(strconv.FormatFloat(fr.T, 'f', 3, 64))
		for _, v := range []float64{p.X, p.Y, p.Z} {
			b.WriteString("," + f(v+noisePos*rng.NormFloat64()))
		}
		for _, v := range []float64{q.W, q.X, q.Y, q.Z} {
			b.WriteString("," + f(v+noiseQuat*rng.NormFloat64()))
		}
		for _, j := range fr.Joints {
			b.WriteString("," + f(j.Q+noiseJoint*rng.NormFloat64()))
		}
		b.WriteString("\n")
	}
	return os.WriteFile(path, b.Bytes(), 0o644)
}
