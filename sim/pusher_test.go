package sim

import (
	"math"
	"reflect"
	"sync"
	"testing"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// pusherCell is a two-link arm turning about vertical axes above a steel
// table; its second link sweeps a carton across the table.
func pusherCell() *Model {
	const h = 0.06 // height of the links' axis above the table
	l1 := link("upper", -1, 0, 0.4, 1.2, r3.Vec{Z: 1})
	l1.Joint.Frame.Pos = r3.Vec{Z: h}
	l2 := link("fore", 0, 0.4, 0.35, 0.8, r3.Vec{Z: 1})
	l2.Joint.Position = math.Pi / 2
	l1.Material, l2.Material = "steel", "steel"
	carton := boxBody("carton", 1, r3.Vec{X: 0.2, Y: 0.15, Z: 0.1}, contact.Pose{Pos: r3.Vec{X: 0.4 - 0.02 - 0.1 - 0.004, Y: 0.22, Z: 0.05}, Rot: contact.IdentityQuat})
	carton.Material = "card"
	table := floor(0)
	table.Material = "steel"
	return &Model{
		Gravity: down,
		Static:  []StaticShape{table},
		Bodies:  []Body{l1, l2, carton},
		Materials: Materials{Default: PairProps{Friction: 0.3}, Pairs: []MaterialPair{
			{A: "card", B: "steel", PairProps: PairProps{Friction: 0.35}},
		}},
		Actuators: []Actuator{{Name: "shoulder", Body: 0, EffortLimit: 40}, {Name: "elbow", Body: 1, EffortLimit: 40}},
		Controller: &PD{Kp: []float64{300, 300}, Kd: []float64{30, 30}, Targets: Table{
			Times:  []float64{0, 0.3, 1.3, 3},
			Values: [][]float64{{0, math.Pi / 2}, {0, math.Pi / 2}, {0.7, math.Pi / 2}, {0.7, math.Pi / 2}},
		}},
	}
}

func TestPusherMovesCarton(t *testing.T) {
	m := pusherCell()
	run, err := Rollout(m, Settings{Duration: 2.5, FrameEvery: 10}, nil)
	if err != nil {
		t.Fatal(err)
	}
	first, last := run.Frames[0].Bodies[2].Pose.Pos, run.Frames[len(run.Frames)-1].Bodies[2].Pose.Pos
	moved := r3.Norm(r3.Sub(last, first))
	if moved < 0.05 {
		t.Errorf("carton moved %.4f m, want the pusher to move it", moved)
	}
	var stickSlip, slipStick int
	for _, e := range run.Events() {
		if pair := e.Record.A + "|" + e.Record.B; pair != "floor|carton" && pair != "carton|floor" {
			continue
		}
		switch e.Kind {
		case StickSlip:
			stickSlip++
		case SlipStick:
			slipStick++
		}
	}
	if stickSlip == 0 || slipStick == 0 {
		t.Errorf("carton–table events: %d stick→slip, %d slip→stick; want both sticking and sliding phases", stickSlip, slipStick)
	}
	t.Logf("carton moved %.3f m; %d stick→slip and %d slip→stick events", moved, stickSlip, slipStick)
}

func TestConcurrentSimsShareAModel(t *testing.T) {
	// Simulators built from one model run concurrently (calibration
	// windows do); each must give the result it gives alone.
	m := pusherCell()
	alone, err := Rollout(m, Settings{Duration: 0.6}, nil)
	if err != nil {
		t.Fatal(err)
	}
	runs := make([]*Run, 4)
	errs := make([]error, 4)
	var wg sync.WaitGroup
	for i := range runs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			runs[i], errs[i] = Rollout(m, Settings{Duration: 0.6}, nil)
		}()
	}
	wg.Wait()
	for i, r := range runs {
		if errs[i] != nil {
			t.Fatal(errs[i])
		}
		if !reflect.DeepEqual(r.Frames, alone.Frames) {
			t.Errorf("concurrent rollout %d differs from the rollout alone", i)
		}
	}
}
