package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stickslip/scenarios"
)

// slideLogs simulates the crate-slide scene (μ = 0.4) for 0.5 s twice, from
// two launch speeds, and returns the two run directories' states files.
func slideLogs(t *testing.T, dir string) (string, string) {
	t.Helper()
	var out [2]string
	for i, v := range []string{"2", "1.6"} {
		run := filepath.Join(dir, "run"+v)
		code, _, errs := runCmd(t, "simulate", "--quiet", "--out", run, "--duration", "0.5",
			"--set", "bodies.crate.velocity.linear=["+v+",0,0]", "crate-slide")
		if code != 0 {
			t.Fatalf("simulate: exit %d: %s", code, errs)
		}
		out[i] = filepath.Join(run, "states.csv")
	}
	return out[0], out[1]
}

func TestFitCommand(t *testing.T) {
	dir := t.TempDir()
	train, held := slideLogs(t, dir)
	fitted := filepath.Join(dir, "fitted.yaml")
	report := filepath.Join(dir, "report")
	code, out, errs := runCmd(t, "fit", "--scene", "crate-slide", "--set", "materials.pairs.0.friction=0.25",
		"--log", train, "--held-out", held, "--param", "friction:pine/tile", "--bounds", "friction:pine/tile=0.05,1.5",
		"--window", "0.25", "--out", fitted, "--report", report)
	if code != 0 {
		t.Fatalf("fit: exit %d\n%s\n%s", code, out, errs)
	}
	if !strings.Contains(errs, "step   1") || !strings.Contains(out, "friction:pine/tile") || !strings.Contains(out, "held-out error") {
		t.Errorf("progress or summary missing:\nstdout:\n%s\nstderr:\n%s", out, errs)
	}
	// The logs come from μ = 0.4 with velocities logged, so the fit
	// recovers it to the solver's precision.
	sc, err := scenarios.LoadFile(fitted)
	if err != nil {
		t.Fatal(err)
	}
	if mu := sc.Model.Materials.Pairs[0].Friction; math.Abs(mu-0.4) > 1e-3 {
		t.Errorf("fitted scene has μ = %g, want 0.4", mu)
	}
	for _, f := range []string{"report.json", "index.html", "loss.png", "parameters.png", "train-1.png", "held-out-1.png", "residuals.png"} {
		if _, err := os.Stat(filepath.Join(report, f)); err != nil {
			t.Errorf("report lacks %s", f)
		}
	}
	var rep struct {
		Format string `json:"format"`
		Params []struct {
			Name  string    `json:"name"`
			Value float64   `json:"value"`
			CI    []float64 `json:"interval_95"`
		} `json:"parameters"`
		HeldOutAfter struct {
			Position float64 `json:"rms_position_m"`
		} `json:"held_out_after"`
	}
	data, err := os.ReadFile(filepath.Join(report, "report.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(data, &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Format != "stickslip-fit-report/1" || len(rep.Params) != 1 || rep.Params[0].Name != "friction:pine/tile" {
		t.Errorf("report.json: %+v", rep)
	}
	if rep.HeldOutAfter.Position > 1e-4 {
		t.Errorf("held-out position error after the fit %g m", rep.HeldOutAfter.Position)
	}
	if _, err := os.Stat(filepath.Clean(report) + ".checkpoint.json"); err == nil {
		t.Error("checkpoint left behind after a finished fit")
	}

	// The same fit from a fit file, with --json: identical report bytes
	// apart from the paths it names.
	fitFile := filepath.Join(dir, "slide.yaml")
	src := "scene: crate-slide\nset: [materials.pairs.0.friction=0.25]\ntrain: [" + train + "]\nheld_out: [" + held + "]\n" +
		"parameters:\n  - {name: friction:pine/tile, bounds: [0.05, 1.5]}\nwindow: 0.25\n"
	if err := os.WriteFile(fitFile, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errs = runCmd(t, "fit", "--json", "--out", fitted, "--report", report, fitFile)
	if code != 0 {
		t.Fatalf("fit FILE: exit %d\n%s", code, errs)
	}
	var again struct {
		Params []struct {
			Value float64 `json:"value"`
		} `json:"parameters"`
	}
	if err := json.Unmarshal([]byte(out), &again); err != nil {
		t.Fatalf("--json stdout is not JSON: %v\n%s", err, out)
	}
	if again.Params[0].Value != rep.Params[0].Value {
		t.Errorf("fit file gave μ = %v, flags %v", again.Params[0].Value, rep.Params[0].Value)
	}
	if first, _, _ := strings.Cut(errs, "\n"); !strings.HasPrefix(first, "{") {
		t.Errorf("--json progress is not JSON lines: %q", first)
	}
}

func TestFitBadInput(t *testing.T) {
	dir := t.TempDir()
	train, _ := slideLogs(t, dir)
	decreasing := filepath.Join(dir, "decreasing.csv")
	os.WriteFile(decreasing, []byte("t,crate.x\n0,0\n0.2,0.1\n0.1,0.2\n"), 0o644)
	partial := filepath.Join(dir, "partial.csv")
	os.WriteFile(partial, []byte("t,crate.x,crate.y\n0,0,0\n0.1,0.1,0\n0.2,0.2,0\n"), 0o644)
	badFit := filepath.Join(dir, "bad.yaml")
	os.WriteFile(badFit, []byte("scene: crate-slide\ntrain: ["+train+"]\nparameters:\n  - {name: mass:crate, initial: 9, bounds: [1, 5]}\n"), 0o644)
	out := []string{"--out", filepath.Join(dir, "f.yaml"), "--report", filepath.Join(dir, "r")}
	tests := []struct {
		name string
		args []string
		msg  string
	}{
		{"unknown parameter", []string{"--scene", "crate-slide", "--log", train, "--param", "friction:pine/steel"}, "no material pair pine/steel"},
		{"nothing free", []string{"--scene", "crate-slide", "--log", train}, "nothing is free"},
		{"no log", []string{"--scene", "crate-slide", "--param", "mass:crate"}, "at least one training log"},
		{"missing log file", []string{"--scene", "crate-slide", "--log", filepath.Join(dir, "nope.csv"), "--param", "mass:crate"}, "nope.csv"},
		{"decreasing time", []string{"--scene", "crate-slide", "--log", decreasing, "--param", "mass:crate"}, "decreasing.csv:4:1: column \"t\": time 0.1 does not increase"},
		{"missing columns", []string{"--scene", "crate-slide", "--log", partial, "--param", "mass:crate"}, "missing columns crate.z"},
		{"bounds exclude initial", []string{badFit}, "bad.yaml:4: parameters[0]: mass:crate: initial value 9 lies outside the bounds [1, 5]"},
		{"bad bounds flag", []string{"--scene", "crate-slide", "--log", train, "--param", "mass:crate", "--bounds", "mass:crate=1"}, "want NAME=LOWER,UPPER"},
		{"bad smoothing", []string{"--scene", "crate-slide", "--log", train, "--param", "mass:crate", "--smoothing", "0,1"}, "large to small"},
		{"resume without checkpoint", []string{"--scene", "crate-slide", "--log", train, "--param", "mass:crate", "--resume", "--checkpoint", filepath.Join(dir, "none.json")}, "--resume"},
		{"file and flags", []string{"--scene", "crate-slide", badFit}, "not both"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			code, _, errs := runCmd(t, append(append([]string{"fit"}, out...), tc.args...)...)
			if code != 2 || !strings.Contains(errs, tc.msg) {
				t.Errorf("exit %d, stderr %q; want 2 and a message containing %q", code, errs, tc.msg)
			}
		})
	}
}
