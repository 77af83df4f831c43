package calibrate

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"stickslip/scenarios"
	"stickslip/sim"
)

// slidingBoxLog writes a log of the crate in the built-in crate-slide scene
// (0.3 m tall, resting at z = 0.15 m) launched at v0 along x, from the
// closed form (REFERENCE-CHECKS.md, block launched on a level plane): it
// decelerates at μg, x = v₀t − μgt²/2 until it stops at t = v₀/(μg).
// The simulator plays no part in it.
func slidingBoxLog(mu, v0, dt, dur float64) *Log {
	g := sim.StandardGravity
	var b strings.Builder
	b.WriteString("t,crate.x,crate.y,crate.z,crate.qw,crate.qx,crate.qy,crate.qz\n")
	stop := v0 / (mu * g)
	for i := 0; float64(i)*dt <= dur+1e-12; i++ {
		t := float64(i) * dt
		tt := math.Min(t, stop)
		x := v0*tt - mu*g*tt*tt/2
		fmt.Fprintf(&b, "%g,%.17g,0,0.15,1,0,0,0\n", t, x)
	}
	lg, err := (&LogReader{}).Read(strings.NewReader(b.String()), "closed-form.csv")
	if err != nil {
		panic(err)
	}
	return lg
}

func TestFitSlidingBoxClosedForm(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("crate-slide", "materials.pairs.0.friction=0.25")
	if err != nil {
		t.Fatal(err)
	}
	params, err := ResolveParams(sc.Model, []FreeParam{{Name: "friction:pine/tile", Initial: math.NaN(), Lower: math.NaN(), Upper: math.NaN()}})
	if err != nil {
		t.Fatal(err)
	}
	lg := slidingBoxLog(0.4, 2, 0.01, 0.6)
	res, err := Fit(&Config{Model: sc.Model, Settings: sc.Settings, Train: []*Log{lg}, Params: params,
		Options: Options{Window: 0.2}, Progress: func(p *Progress) { t.Logf("iter %d loss %g λ %g x %v", p.Iter, p.Loss, p.Lambda, p.X) }})
	if err != nil {
		t.Fatal(err)
	}
	p := res.Params[0]
	t.Logf("μ = %.5f ± %.2g (%s), %s", p.Value, p.StdErr, res.Stages[0].Status, p.Note)
	// Closed form: μ = 0.4; the fit must be within 1 %.
	if math.Abs(p.Value-0.4) > 0.004 {
		t.Errorf("fitted μ = %.5f, want 0.4 within 1 %%", p.Value)
	}
}

func freeParams(t *testing.T, m *sim.Model, names ...string) []FreeParam {
	t.Helper()
	var fps []FreeParam
	for _, n := range names {
		fps = append(fps, FreeParam{Name: n, Initial: math.NaN(), Lower: math.NaN(), Upper: math.NaN()})
	}
	ps, err := ResolveParams(m, fps)
	if err != nil {
		t.Fatal(err)
	}
	return ps
}

func TestIdentifiabilityFreeSlidingMass(t *testing.T) {
	// Block launched on a level plane (REFERENCE-CHECKS.md): the
	// deceleration μg does not involve the mass, so a free-sliding log
	// cannot identify it.
	sc, err := scenarios.LoadBuiltin("crate-slide", "materials.pairs.0.friction=0.3", "bodies.crate.mass=2")
	if err != nil {
		t.Fatal(err)
	}
	params := freeParams(t, sc.Model, "friction:pine/tile", "mass:crate")
	lg := slidingBoxLog(0.4, 2, 0.01, 0.4)
	res, err := Fit(&Config{Model: sc.Model, Settings: sc.Settings, Train: []*Log{lg}, Params: params, Options: Options{Window: 0.2}})
	if err != nil {
		t.Fatal(err)
	}
	mu, mass := res.Params[0], res.Params[1]
	t.Logf("%s: %s\n%s: %s", mu.Name, mu.Note, mass.Name, mass.Note)
	if mu.Class != Identified || math.Abs(mu.Value-0.4) > 0.004 {
		t.Errorf("μ = %g (%v), want 0.4 identified", mu.Value, mu.Class)
	}
	if mass.Class != Unidentified {
		t.Errorf("mass is %v (relative error %g), want not identified", mass.Class, mass.RelErr)
	}
	if !strings.Contains(mass.Note, "cannot be identified") || !strings.Contains(mass.Note, "no logged force acts on crate") {
		t.Errorf("mass note %q does not say why it cannot be identified", mass.Note)
	}
}

func TestIdentifiabilityPushedMass(t *testing.T) {
	// Block pushed by a known horizontal force (REFERENCE-CHECKS.md):
	// a = F/m − μg, so the mass enters only through F. A force that
	// changes from 60 N to 90 N half-way separates F/m from μg and
	// identifies both.
	sc, err := scenarios.LoadBuiltin("crate-push")
	if err != nil {
		t.Fatal(err)
	}
	truth := sim.CopyModel(sc.Model)
	truth.Loads[0].Schedule = []sim.LoadKey{{T: 0, Force: r3x(60)}, {T: 0.3, Force: r3x(60)}, {T: 0.35, Force: r3x(90)}}
	set := sc.Settings
	set.Duration = 0.6
	run, err := sim.Rollout(truth, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	lg := runLog(t, run, 10, 5e-4, 0, 1)
	m := sim.CopyModel(truth)
	params := freeParams(t, m, "friction:pine/tile", "mass:crate")
	params[0].Initial, params[1].Initial = 0.3, 7
	res, err := Fit(&Config{Model: m, Settings: sc.Settings, Train: []*Log{lg}, Params: params, Options: Options{Window: 0.2}})
	if err != nil {
		t.Fatal(err)
	}
	for i, want := range []float64{0.4, 10} {
		p := res.Params[i]
		t.Logf("%s = %.5g ± %.2g: %s", p.Name, p.Value, p.StdErr, p.Note)
		if p.Class != Identified {
			t.Errorf("%s is %v, want identified", p.Name, p.Class)
		}
		// Recovery within 2 standard errors and 2 % of the truth.
		if d := math.Abs(p.Value - want); d > 2*p.StdErr+1e-9 && d > 0.02*want {
			t.Errorf("%s = %g ± %g, truth %g", p.Name, p.Value, p.StdErr, want)
		}
	}
}
