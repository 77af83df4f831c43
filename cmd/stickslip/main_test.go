package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// runCmd runs the command line in-process and returns status and output.
func runCmd(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(&env{stdout: &out, stderr: &errb}, args)
	return code, out.String(), errb.String()
}

func TestSimulateAndContacts(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "drop")
	code, out, errs := runCmd(t, "simulate", "--out", dir, "--set", "settings.duration=0.6", "--quiet", "ball-drop")
	if code != 0 {
		t.Fatalf("simulate exit %d: %s %s", code, out, errs)
	}
	for _, f := range []string{"run.json", "states.csv", "contacts.csv", "scene.yaml"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Errorf("run directory lacks %s", f)
		}
	}
	code, out, errs = runCmd(t, "contacts", dir)
	if code != 0 {
		t.Fatalf("contacts exit %d: %s", code, errs)
	}
	// A ball dropped from 1 m first touches down after √(2/g) = 0.4516 s
	// (free fall, REFERENCE-CHECKS.md).
	if !strings.Contains(out, "touch-down") || !strings.Contains(out, "0.45") {
		t.Errorf("contacts output lacks the touch-down at 0.45 s:\n%s", out)
	}
	code, out, _ = runCmd(t, "contacts", "--from", "0.5", "--to", "0.55", dir)
	if code != 0 || strings.Contains(out, "touch-down") {
		t.Errorf("time filter kept an event outside [0.5, 0.55] s:\n%s", out)
	}
	code, _, errs = runCmd(t, "contacts", "--body", "nobody", dir)
	if code != 2 || !strings.Contains(errs, `"nobody"`) {
		t.Errorf("unknown body: exit %d, stderr %q; want 2 naming it", code, errs)
	}
}

func TestBadInputExitStatus(t *testing.T) {
	tmp := t.TempDir()
	bad := filepath.Join(tmp, "bad.yaml")
	os.WriteFile(bad, []byte("name: x\nbodies:\n  - name: a\n    mass: -1\n    shapes: [{kind: sphere, radius: 0.1}]\n"), 0o644)
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"simulate", "no-such-scene"}, "no such scene file or built-in scene"},
		{[]string{"simulate", bad}, "bad.yaml:4"},
		{[]string{"simulate", "--set", "bodies.nobody.mass=1", "ball-drop"}, "nobody"},
		{[]string{"simulate", "--bogus", "ball-drop"}, "flag provided but not defined"},
		{[]string{"contacts", tmp}, "not a run directory"},
		{[]string{"frobnicate"}, "unknown command"},
	}
	for _, c := range cases {
		code, _, errs := runCmd(t, c.args...)
		if code != 2 || !strings.Contains(errs, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want 2 and %q", c.args, code, errs, c.want)
		}
	}
}

func TestScenesCommand(t *testing.T) {
	code, out, _ := runCmd(t, "scenes")
	if code != 0 || !strings.Contains(out, "crate-slide") {
		t.Fatalf("scenes: exit %d, output %q", code, out)
	}
	code, out, _ = runCmd(t, "scenes", "crate-slide")
	if code != 0 || !strings.Contains(out, "bodies:") {
		t.Errorf("scenes crate-slide: exit %d, output %q", code, out)
	}
}

func TestFlagsAfterArguments(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "slide")
	code, _, errs := runCmd(t, "simulate", "crate-slide", "--out", dir, "--quiet", "--duration", "0.05")
	if code != 0 {
		t.Fatalf("flags after the scene: exit %d: %s", code, errs)
	}
	if _, err := os.Stat(filepath.Join(dir, "run.json")); err != nil {
		t.Error("run not written where --out said")
	}
}

func TestGradcheckCommand(t *testing.T) {
	// A crate sliding on tile: the reverse and forward sweeps must agree
	// with central differences; its mass has no effect (the derivative is
	// zero to rounding), which the absolute tolerance accepts.
	code, out, errs := runCmd(t, "gradcheck", "crate-slide", "--duration", "0.05")
	if code != 0 || !strings.Contains(out, "friction:pine/tile") || !strings.Contains(out, "within relative error") {
		t.Fatalf("gradcheck: exit %d\n%s\n%s", code, out, errs)
	}
	code, _, errs = runCmd(t, "gradcheck", "crate-slide", "--param", "mass:nobody")
	if code != 2 || !strings.Contains(errs, `no body named "nobody"`) {
		t.Errorf("unknown parameter owner: exit %d, stderr %q", code, errs)
	}
	code, _, errs = runCmd(t, "gradcheck", "crate-slide", "--param", "viscosity:crate")
	if code != 2 || !strings.Contains(errs, "unknown quantity") {
		t.Errorf("unknown quantity: exit %d, stderr %q", code, errs)
	}
}
