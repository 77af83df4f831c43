package sim

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

func bounceRun(t *testing.T) *Run {
	t.Helper()
	m := &Model{Gravity: down, Static: []StaticShape{floor(0)},
		Bodies: []Body{sphereBody("ball", 0.06, 0.05, r3.Vec{Z: 0.3})}, Materials: materials(0.5, 0.6)}
	run, err := Rollout(m, Settings{Duration: 0.6, FrameEvery: 5}, []byte("name: test\n"))
	if err != nil {
		t.Fatal(err)
	}
	return run
}

func TestRunRoundTrip(t *testing.T) {
	run := bounceRun(t)
	dir := filepath.Join(t.TempDir(), "run")
	if err := run.Write(dir); err != nil {
		t.Fatal(err)
	}
	got, err := ReadRun(dir)
	if err != nil {
		t.Fatal(err)
	}
	// Frames and contacts read back exactly (shortest round-trip decimal).
	if !reflect.DeepEqual(got.Frames, run.Frames) {
		t.Error("frames differ after write and read")
	}
	if !reflect.DeepEqual(got.Contacts, run.Contacts) {
		t.Error("contacts differ after write and read")
	}
	if !bytes.Equal(got.Scene, run.Scene) || got.TimeStep != run.TimeStep || got.Stats != run.Stats {
		t.Error("scene, time step or stats differ after write and read")
	}
	if len(run.Contacts) == 0 {
		t.Fatal("the bouncing ball made no contact records")
	}
}

func TestRunFilesByteIdentical(t *testing.T) {
	// Same inputs give bit-identical outputs (DESIGN.md, Bad input).
	dirs := [2]string{filepath.Join(t.TempDir(), "a"), filepath.Join(t.TempDir(), "b")}
	for _, d := range dirs {
		if err := bounceRun(t).Write(d); err != nil {
			t.Fatal(err)
		}
	}
	for _, f := range []string{RunManifestFile, RunStatesFile, RunContactsFile, RunSceneFile} {
		a, _ := os.ReadFile(filepath.Join(dirs[0], f))
		b, _ := os.ReadFile(filepath.Join(dirs[1], f))
		if len(a) == 0 || !bytes.Equal(a, b) {
			t.Errorf("%s differs between two runs of the same scene (%d and %d bytes)", f, len(a), len(b))
		}
	}
}

func TestRunWriteRefusesForeignDirectory(t *testing.T) {
	dir := t.TempDir()
	keep := filepath.Join(dir, "notes.txt")
	if err := os.WriteFile(keep, []byte("mine"), 0o644); err != nil {
		t.Fatal(err)
	}
	err := bounceRun(t).Write(dir)
	if err == nil || !strings.Contains(err.Error(), "refusing to replace it") {
		t.Fatalf("got %v, want a refusal to replace a non-run directory", err)
	}
	if b, _ := os.ReadFile(keep); string(b) != "mine" {
		t.Error("the foreign directory's file was touched")
	}
}

func TestReadRunErrors(t *testing.T) {
	run := bounceRun(t)
	cases := []struct {
		name   string
		file   string
		mutate func(string) string
		want   string
	}{
		{"missing manifest", RunManifestFile, nil, "run.json is missing"},
		{"bad number", RunStatesFile, func(s string) string {
			lines := strings.Split(s, "\n")
			cells := strings.Split(lines[2], ",")
			cells[3] = "abc"
			lines[2] = strings.Join(cells, ",")
			return strings.Join(lines, "\n")
		}, `states.csv:3:4: column "ball.z": "abc" is not a finite number`},
		{"time not increasing", RunStatesFile, func(s string) string {
			lines := strings.Split(s, "\n")
			lines[3] = lines[2]
			return strings.Join(lines, "\n")
		}, `states.csv:4:1: column "t": time`},
		{"bad state", RunContactsFile, func(s string) string {
			lines := strings.Split(s, "\n")
			cells := strings.Split(lines[1], ",")
			cells[len(cells)-1] = "glued"
			lines[1] = strings.Join(cells, ",")
			return strings.Join(lines, "\n")
		}, `column "state": "glued" is not one of separating, sticking, sliding`},
		{"wrong header", RunStatesFile, func(s string) string {
			return strings.Replace(s, "ball.qw", "ball.qq", 1)
		}, `states.csv:1:5: column is "ball.qq", want "ball.qw"`},
		{"missing states", RunStatesFile, nil, "no such file"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "run")
			if err := run.Write(dir); err != nil {
				t.Fatal(err)
			}
			path := filepath.Join(dir, c.file)
			if c.mutate == nil {
				os.Remove(path)
			} else {
				b, _ := os.ReadFile(path)
				os.WriteFile(path, []byte(c.mutate(string(b))), 0o644)
			}
			_, err := ReadRun(dir)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("got error %v, want it to contain %q", err, c.want)
			}
			var fe *FileError
			if c.mutate != nil && !errors.As(err, &fe) {
				t.Errorf("error %T is not a *FileError", err)
			}
		})
	}
}

func TestEventsOfBouncingBall(t *testing.T) {
	// A ball dropped with e = 0.6 touches down and lifts off repeatedly
	// (Newton's law of impact); every touch-down precedes a lift-off.
	run := bounceRun(t)
	ev := run.Events()
	var downs, ups int
	for i, e := range ev {
		switch e.Kind {
		case TouchDown:
			downs++
		case LiftOff:
			ups++
			if downs != ups {
				t.Fatalf("event %d: lift-off without a touch-down before it", i)
			}
		}
	}
	if downs < 2 || ups < 2 {
		t.Errorf("got %d touch-downs and %d lift-offs, want at least 2 bounces: %v", downs, ups, ev)
	}
	// The first touch-down happens when the ball has fallen 0.25 m:
	// t = √(2·0.25/g) = 0.2258 s (free fall), within a frame (5 ms).
	if d := ev[0].T - 0.2258; ev[0].Kind != TouchDown || d < -0.006 || d > 0.006 {
		t.Errorf("first event %v at %.4f s, want touch-down at 0.2258 s", ev[0].Kind, ev[0].T)
	}
}
