package main

import (
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// viewRun simulates a short built-in scene into a fresh run directory.
func viewRun(t *testing.T) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "drop")
	code, out, errs := runCmd(t, "simulate", "--out", dir, "--set", "settings.duration=0.6", "--quiet", "ball-drop")
	if code != 0 {
		t.Fatalf("simulate exit %d: %s %s", code, out, errs)
	}
	return dir
}

// copyRun copies a run directory so that one file can be spoiled.
func copyRun(t *testing.T, src string) string {
	t.Helper()
	dst := filepath.Join(t.TempDir(), "copy")
	if err := os.MkdirAll(dst, 0o755); err != nil {
		t.Fatal(err)
	}
	entries, err := os.ReadDir(src)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		b, err := os.ReadFile(filepath.Join(src, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dst, e.Name()), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dst
}

func TestViewBadRunDirectory(t *testing.T) {
	good := viewRun(t)
	tmp := t.TempDir()
	spoil := func(file string, edit func(string) string) string {
		d := copyRun(t, good)
		p := filepath.Join(d, file)
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(edit(string(b))), 0o644); err != nil {
			t.Fatal(err)
		}
		return d
	}
	remove := func(file string) string {
		d := copyRun(t, good)
		os.Remove(filepath.Join(d, file))
		return d
	}
	badLog := filepath.Join(tmp, "log.csv")
	os.WriteFile(badLog, []byte("t,ball.x,ball.y,ball.z\n0,0,0,1\n0,0,0,1\n"), 0o644)
	otherLog := filepath.Join(tmp, "other.csv")
	os.WriteFile(otherLog, []byte("t,cart.x,cart.y,cart.z\n0,0,0,1\n"), 0o644)
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"no directory", []string{"view", filepath.Join(tmp, "nothing")}, "run.json is missing"},
		{"no states", []string{"view", remove("states.csv")}, "states.csv"},
		{"no scene", []string{"view", remove("scene.yaml")}, "scene.yaml"},
		{"malformed states", []string{"view", spoil("states.csv", func(s string) string {
			lines := strings.SplitN(s, "\n", 3)
			lines[1] = strings.Replace(lines[1], ",", ",abc", 1)
			return strings.Join(lines, "\n")
		})}, "states.csv:2"},
		{"malformed contacts", []string{"view", spoil("contacts.csv", func(s string) string { return "frame,t\n" + s })}, "contacts.csv:1"},
		{"malformed manifest", []string{"view", spoil("run.json", func(s string) string { return s[:len(s)/2] })}, "run.json"},
		{"malformed scene", []string{"view", spoil("scene.yaml", func(s string) string { return s + "\nbogus_field: 1\n" })}, "bogus_field"},
		{"scene without the run's body", []string{"view", spoil("scene.yaml", func(s string) string { return strings.ReplaceAll(s, "ball", "orb") })}, `run body "ball" is not a body of the scene`},
		{"bad log", []string{"view", "--log", badLog, good}, "log.csv:3:1"},
		{"log of other bodies", []string{"view", "--log", otherLog, good}, "the log names no body of the run"},
		{"missing log", []string{"view", "--log", filepath.Join(tmp, "none.csv"), good}, "none.csv"},
		{"bad size", []string{"view", "--size", "12", good}, "WIDTHxHEIGHT"},
		{"bad camera", []string{"view", "--camera", "tilt=3", good}, "unknown key"},
		{"frame out of range", []string{"view", "--frame", "100000", good}, "outside the run's frames"},
		{"frame word", []string{"view", "--frame", "middle", good}, "first-slip"},
		{"contact out of range", []string{"view", "--frame", "0", "--contact", "7", good}, "--contact 7"},
		{"two runs", []string{"view", good, good}, "want one RUN"},
	}
	for _, tc := range tests {
		code, _, errs := runCmd(t, tc.args...)
		if code != 2 || !strings.Contains(errs, tc.want) {
			t.Errorf("%s: exit %d, stderr %q; want 2 and a message containing %q", tc.name, code, errs, tc.want)
		}
	}
}

func TestViewHelpListsBindings(t *testing.T) {
	code, _, errs := runCmd(t, "view", "-h")
	if code != 0 {
		t.Errorf("view -h: exit %d", code)
	}
	for _, want := range []string{"-snapshot", "-camera", "play / pause", "jump to next / previous contact event", "orbit the camera"} {
		if !strings.Contains(errs, want) {
			t.Errorf("view -h lacks %q:\n%s", want, errs)
		}
	}
}

func TestViewWithoutDisplay(t *testing.T) {
	dir := viewRun(t)
	t.Setenv("DISPLAY", "")
	code, _, errs := runCmd(t, "view", dir)
	if code != 1 || !strings.Contains(errs, "--snapshot") {
		t.Errorf("interactive without a display: exit %d, stderr %q; want 1 pointing to --snapshot", code, errs)
	}
	code, _, errs = runCmd(t, "view", "--snapshot", filepath.Join(t.TempDir(), "x.png"), dir)
	if code != 1 || !strings.Contains(errs, "xvfb-run") {
		t.Errorf("snapshot without a display: exit %d, stderr %q; want 1 pointing to xvfb-run", code, errs)
	}
}

func TestViewSnapshot(t *testing.T) {
	if os.Getenv("DISPLAY") == "" {
		t.Skip("no DISPLAY: run under xvfb-run (make test does)")
	}
	dir := viewRun(t)
	out := filepath.Join(t.TempDir(), "touch.png")
	code, stdout, errs := runCmd(t, "view", "--frame", "largest-impulse", "--snapshot", out, "--size", "320x240",
		"--camera", "el=10", "--contact", "0", dir)
	if code != 0 {
		t.Fatalf("snapshot: exit %d, stderr %q", code, errs)
	}
	if !strings.Contains(stdout, "wrote "+out) {
		t.Errorf("stdout %q does not report the file", stdout)
	}
	f, err := os.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	if b := img.Bounds(); b.Dx() != 320 || b.Dy() != 240 {
		t.Errorf("image is %v, want 320x240", b)
	}
	// The run's own states file is a valid log: its ghost coincides with
	// the simulation and the command accepts it.
	code, _, errs = runCmd(t, "view", "--log", filepath.Join(dir, "states.csv"), "--frame", "last", "--snapshot", out, "--size", "160x120", dir)
	if code != 0 {
		t.Errorf("snapshot with the run as its own log: exit %d, %s", code, errs)
	}
}
