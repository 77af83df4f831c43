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
