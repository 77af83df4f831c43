package scenarios_test

import (
	"fmt"
	"log"

	"stickslip/scenarios"
	"stickslip/sim"
)

func ExampleLoader_Load() {
	src := []byte(`
name: crate-on-ramp
materials:
  surfaces: [oak, pine]
  pairs: [{between: [pine, oak], friction: 0.5}]
static:
  - {name: ramp, kind: plane, tilt: {axis: [0, 1, 0], degrees: 20}, material: oak}
bodies:
  - name: crate
    material: pine
    shapes: [{kind: box, size: [0.4, 0.3, 0.25]}]
    mass: 3
    pose: {on: ramp}
`)
	l := scenarios.Loader{Overrides: []string{"materials.pairs.0.friction=0.3", "bodies.crate.mass=2.5"}}
	s, err := l.Load(src, "ramp.yaml")
	if err != nil {
		log.Fatal(err)
	}
	crate := s.Model.Bodies[0]
	fmt.Printf("%s: μ = %g, mass %g kg, Ixx = %.4f kg·m², time step %g s\n",
		s.Name, s.Model.Materials.Lookup("pine", "oak").Friction, crate.Mass, crate.Inertia[0], s.Settings.TimeStep)

	var plain scenarios.Loader
	_, err = plain.Load([]byte("bodies:\n  - name: crate\n    mass: -1\n"), "bad.yaml")
	fmt.Println(err)
	// Output:
	// crate-on-ramp: μ = 0.3, mass 2.5 kg, Ixx = 0.0318 kg·m², time step 0.001 s
	// bad.yaml:3:11: bodies[crate].mass: must be > 0 kg, got -1
}

func ExampleLoader_Load_controller() {
	src := []byte(`
bodies:
  - name: gate
    mass: 2
    inertia: {principal: [0.1, 0.1, 0.1]}
    joint: {name: hinge, kind: revolute, axis: [0, 0, 1]}
actuators:
  - {name: gate-motor, joint: hinge, effort_limit: 15}
controller:
  pd:
    kp: {gate-motor: 80}
    kd: {gate-motor: 6}
    targets:
      rows:
        - [0, 0]
        - [2, 1.2]
`)
	l := scenarios.Loader{Overrides: []string{"controller.pd.kp.gate-motor=120"}}
	s, err := l.Load(src, "gate.yaml")
	if err != nil {
		log.Fatal(err)
	}
	pd := s.Model.Controller.(*sim.PD)
	q := make([]float64, 1)
	pd.Targets.At(0.5, q)
	fmt.Printf("%s drives body %d, limit %g N·m; kp %g, target at 0.5 s: %g rad\n",
		s.Model.Actuators[0].Name, s.Model.Actuators[0].Body, s.Model.Actuators[0].EffortLimit, pd.Kp[0], q[0])

	_, err = l.Load([]byte(string(src)+"        - [1, 0.5]\n"), "gate.yaml")
	fmt.Println(err)
	// Output:
	// gate-motor drives body 0, limit 15 N·m; kp 120, target at 0.5 s: 0.3 rad
	// gate.yaml:17:12: controller.pd.targets.rows[2][0]: times must increase down the table: 1 s follows 2 s
}
