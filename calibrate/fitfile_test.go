package calibrate

import (
	"errors"
	"math"
	"strings"
	"testing"

	"stickslip/scenarios"
	"stickslip/sim"
)

const goodFit = `scene: crate-slide
train:
  - logs/slide-1.csv
  - file: logs/slide-2.csv
    columns:
      - {from: x_mm, to: crate.x, unit: mm}
held_out: [logs/slide-3.csv]
parameters:
  - name: friction:pine/tile
    initial: 0.3
    bounds: [0.05, 1.5]
    prior: {mean: 0.4, sd: 0.2}
  - mass:crate
window: 0.25
noise: {position: 0.0005, channels: {crate.x: 0.001}}
smoothing: [1e-3, 1e-5, 0]
iterations: 20
starts: 3
seed: 7
`

func TestParseFitFile(t *testing.T) {
	f, err := ParseFitFile([]byte(goodFit), "dir/fit.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if f.Scene != "crate-slide" || len(f.Train) != 2 || f.Train[1].Columns[0].Unit != "mm" || len(f.HeldOut) != 1 {
		t.Errorf("parsed %+v", f)
	}
	if got := f.LogPath(f.Train[0]); got != "dir/logs/slide-1.csv" {
		t.Errorf("log path %s", got)
	}
	sc, err := scenarios.LoadBuiltin("crate-slide")
	if err != nil {
		t.Fatal(err)
	}
	ps, err := f.Resolve(sc.Model)
	if err != nil {
		t.Fatal(err)
	}
	if ps[0].Initial != 0.3 || ps[0].Lower != 0.05 || ps[0].PriorSD != 0.2 {
		t.Errorf("friction %+v", ps[0])
	}
	// Defaults: the scene's mass, positive bounds.
	if ps[1].Initial != 4 || !(ps[1].Lower > 0) || !math.IsInf(ps[1].Upper, 1) {
		t.Errorf("mass %+v", ps[1])
	}
	o := f.Options()
	if o.Window != 0.25 || o.Noise.Channels["crate.x"] != 0.001 || len(o.Smoothing) != 3 || o.Starts != 3 || o.Seed != 7 {
		t.Errorf("options %+v", o)
	}
}

func TestFitFileErrors(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("crate-slide")
	if err != nil {
		t.Fatal(err)
	}
	base := "scene: crate-slide\ntrain: [a.csv]\n"
	tests := []struct {
		name, src string
		line      int
		field     string
		msg       string
	}{
		{"unknown field", base + "parameters: [mass:crate]\nwindw: 0.3\n", 4, "", "field windw not found"},
		{"unknown parameter field", base + "parameters:\n  - {name: mass:crate, intial: 3}\n", 4, "", `unknown field "intial"`},
		{"nothing free", base, 0, "parameters", "nothing is free"},
		{"empty parameter list", base + "parameters: []\n", 3, "parameters", "nothing is free"},
		{"no scene", "train: [a.csv]\nparameters: [mass:crate]\n", 0, "scene", "missing"},
		{"no logs", "scene: x\nparameters: [mass:crate]\n", 0, "train", "at least one log"},
		{"bad bounds", base + "parameters:\n  - {name: mass:crate, bounds: [1]}\n", 4, "parameters[0].bounds", "want [lower, upper]"},
		{"bad prior", base + "parameters:\n  - {name: mass:crate, prior: {mean: 1, sd: 0}}\n", 4, "parameters[0].prior.sd", "must be positive"},
		{"rising smoothing", base + "parameters: [mass:crate]\nsmoothing: [0, 1e-3]\n", 4, "smoothing[1]", "large to small"},
		{"negative window", base + "parameters: [mass:crate]\nwindow: -1\n", 4, "window", "positive"},
		{"bad noise", base + "parameters: [mass:crate]\nnoise: {channels: {crate.x: 0}}\n", 4, "noise.channels.crate.x", "positive"},
		{"syntax", base + "parameters: [mass:crate\n", 2, "", "did not find expected"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseFitFile([]byte(tc.src), "fit.yaml")
			checkFieldError(t, err, tc.line, tc.field, tc.msg)
		})
	}
	resolveTests := []struct {
		name, params string
		line         int
		field, msg   string
	}{
		{"unknown parameter", "  - friction:pine/steel\n", 4, "parameters[0]", "no material pair pine/steel"},
		{"unknown body", "  - mass:crat\n", 4, "parameters[0]", `no body named "crat"`},
		{"unknown quantity", "  - weight:crate\n", 4, "parameters[0]", `unknown quantity "weight"`},
		{"bounds exclude initial", "  - {name: mass:crate, initial: 5, bounds: [1, 3]}\n", 4, "parameters[0]", "initial value 5 lies outside the bounds [1, 3]"},
		{"model value outside bounds", "  - {name: mass:crate, bounds: [1, 3]}\n", 4, "parameters[0]", "initial value 4 lies outside"},
		{"invalid bound", "  - {name: friction:pine/tile, bounds: [-1, 1]}\n", 4, "parameters[0]", "lower bound"},
		{"empty bounds", "  - {name: friction:pine/tile, bounds: [1, 1]}\n", 4, "parameters[0]", "leave no room"},
		{"twice", "  - mass:crate\n  - mass:crate\n", 5, "parameters[1].name", "already free"},
	}
	for _, tc := range resolveTests {
		t.Run(tc.name, func(t *testing.T) {
			f, err := ParseFitFile([]byte(base+"parameters:\n"+tc.params), "fit.yaml")
			if err != nil {
				t.Fatal(err)
			}
			_, err = f.Resolve(sc.Model)
			checkFieldError(t, err, tc.line, tc.field, tc.msg)
		})
	}
}

func checkFieldError(t *testing.T, err error, line int, field, msg string) {
	t.Helper()
	var fe *FieldError
	if !errors.As(err, &fe) {
		t.Fatalf("error %v, want a *FieldError", err)
	}
	if fe.File != "fit.yaml" || fe.Line != line || fe.Field != field || !strings.Contains(err.Error(), msg) {
		t.Errorf("got %q (line %d, field %q), want line %d, field %q, containing %q", err, fe.Line, fe.Field, line, field, msg)
	}
}

func TestObjectiveInputErrors(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("crate-slide")
	if err != nil {
		t.Fatal(err)
	}
	params := freeParams(t, sc.Model, "friction:pine/tile")
	read := func(src string) *Log {
		lg, err := (&LogReader{}).Read(strings.NewReader(src), "log.csv")
		if err != nil {
			t.Fatal(err)
		}
		return lg
	}
	tests := []struct {
		name, src, msg string
	}{
		{"missing columns", "t,crate.x,crate.y\n0,0,0\n0.1,0.1,0\n", "missing columns crate.z, crate.qw, crate.qx, crate.qy, crate.qz: crate is a free body"},
		{"no complete row", "t,crate.x,crate.y,crate.z,crate.qw,crate.qx,crate.qy,crate.qz\n0,,0,0.15,1,0,0,0\n", "no row holds a complete state"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := NewObjective(sc.Model, sc.Settings, []*Log{read(tc.src)}, params, Options{})
			var fe *sim.FileError
			if !errors.As(err, &fe) || fe.File != "log.csv" || !strings.Contains(err.Error(), tc.msg) {
				t.Errorf("error %v, want a log.csv error containing %q", err, tc.msg)
			}
		})
	}
	if _, err := ResolveParams(sc.Model, nil); err == nil || !strings.Contains(err.Error(), "nothing is free") {
		t.Errorf("no free parameters: error %v", err)
	}
}
