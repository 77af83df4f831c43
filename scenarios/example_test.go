package scenarios_test

import (
	"fmt"
	"log"

	"stickslip/scenarios"
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
