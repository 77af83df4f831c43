package sim

import (
	"fmt"
	"gonum.org/v1/gonum/spatial/r3"
	"math"
	"os"
	"strings"
	"testing"
)

// Temporary solver debugging (contact helper); deleted before hand-off.

func dumpProblem(t *testing.T, s *Sim, name string) {
	n := len(s.prob.B)
	var sb strings.Builder
	fmt.Fprintf(&sb, "%d %d\n", n, s.prob.NumCones)
	for _, m := range s.prob.Mu {
		fmt.Fprintf(&sb, "%.17g ", m)
	}
	sb.WriteString("\n")
	for _, b := range s.prob.B {
		fmt.Fprintf(&sb, "%.17g ", b)
	}
	sb.WriteString("\n")
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			fmt.Fprintf(&sb, "%.17g ", s.w.At(i, j))
		}
		sb.WriteString("\n")
	}
	os.WriteFile("/tmp/solverdump_"+name+".txt", []byte(sb.String()), 0o644)
}

func runDump(t *testing.T, s *Sim, name string, steps int) {
	for i := 0; i < steps; i++ {
		if err := s.Step(); err != nil {
			t.Logf("%s: %v", name, err)
			dumpProblem(t, s, name)
			return
		}
	}
}

func TestZZDumpIncline(t *testing.T) {
	const w, hgt = 0.1, 0.3
	tilt := math.Atan(0.3)
	size := [3]float64{0.2, w, hgt}
	_ = size
	m := &Model{Gravity: down, Static: []StaticShape{floor(tilt)},
		Bodies: []Body{boxBody("tin", 1, vec(0.2, w, hgt), onIncline(tilt, hgt/2, 0))}, Materials: materials(0.2, 0)}
	s := mustSim(t, m, Settings{})
	runDump(t, s, "incline", 1000)
}

func TestZZDumpPusher(t *testing.T) {
	s := mustSim(t, pusherCell(), Settings{})
	runDump(t, s, "pusher", 2500)
}

func TestZZDumpSpheres(t *testing.T) {
	a := sphereBody("left", 1, 0.1, vec(-0.5, 0, 0))
	b := sphereBody("right", 1, 0.1, vec(0.5, 0, 0))
	a.Start.Linear = vec(2, 0, 0)
	m := &Model{Bodies: []Body{a, b}, Materials: materials(0, 1)}
	s := mustSim(t, m, Settings{})
	runDump(t, s, "spheres", 500)
}

func vec(x, y, z float64) r3.Vec { return r3.Vec{X: x, Y: y, Z: z} }
