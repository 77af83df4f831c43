package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// pendulumTuneScene is a one-joint PD pendulum (a 1 kg bob 0.5 m below
// its pivot) that starts 0.3 rad off its target.
const pendulumTuneScene = `name: tune-arm
description: one PD joint
settings: {time_step: 0.002, duration: 0.8}
materials: {surfaces: [brass]}
bodies:
  - name: arm
    material: brass
    shapes: [{kind: sphere, radius: 0.03, pose: {position: [0, 0, -0.5]}}]
    mass: 1
    com: [0, 0, -0.5]
    inertia: {principal: [0.00036, 0.00036, 0.00036]}
    joint: {name: pivot, kind: revolute, parent: world, frame: {position: [0, 0, 1]}, axis: [0, 1, 0], position: 0.3}
actuators:
  - {name: pivot, joint: pivot, effort_limit: 20}
controller:
  pd:
    kp: {pivot: 20}
    kd: {pivot: 2}
    targets: {columns: [pivot], rows: [[0, 0], [0.2, 0], [0.7, 0.6], [2, 0.6]]}
`

// fitReport is a fit report for scene, as the fit command writes it.
func fitReport(scene string) string {
	return `{"format": "stickslip-fit-report/1", "scene": "` + scene + `",
  "parameters": [{"name": "mass:arm", "value": 1.05, "standard_error": 0.2},
                 {"name": "damping:pivot", "value": 0.02, "standard_error": 0.01}],
  "correlations": [[1, 0.2], [0.2, 1]]}`
}

func writeTuneFiles(t *testing.T, tune string) (dir, file string) {
	t.Helper()
	dir = t.TempDir()
	for name, src := range map[string]string{
		"arm.yaml":          pendulumTuneScene,
		"fit/report.json":   fitReport("arm.yaml"),
		"other/report.json": fitReport("pusher-cell"),
		"arm.tune.yaml":     tune,
	} {
		p := filepath.Join(dir, name)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dir, filepath.Join(dir, "arm.tune.yaml")
}

const goodTune = `scene: arm.yaml
horizon: 0.8
gains:
  - {name: kp:pivot, bounds: [1, 200]}
  - {name: kd:pivot, bounds: [0.1, 30]}
cost: {tracking: 1, effort: 1.0e-4, effort_limit: 1}
uncertainty: {report: fit/report.json, samples: 6, seed: 4}
iterations: 30
`

func TestTuneCommand(t *testing.T) {
	dir, file := writeTuneFiles(t, goodTune)
	out := filepath.Join(dir, "tuned")
	code, stdout, stderr := runCmd(t, "tune", "--out", out, file)
	if code != 0 {
		t.Fatalf("tune exit %d:\n%s\n%s", code, stdout, stderr)
	}
	if !strings.Contains(stdout, "ISO 10218") || !strings.Contains(stdout, "emergency stop") {
		t.Errorf("summary lacks the hardware caution:\n%s", stdout)
	}
	if !strings.Contains(stderr, "iteration") {
		t.Errorf("no progress on stderr:\n%s", stderr)
	}
	var rep struct {
		Format string `json:"format"`
		Gains  []struct {
			Name         string
			Initial, Tun float64
		} `json:"gains"`
		Before  struct{ Mean float64 } `json:"cost_before"`
		After   struct{ Mean float64 } `json:"cost_after"`
		Caution string                 `json:"caution"`
		Samples int                    `json:"samples"`
	}
	b, err := os.ReadFile(filepath.Join(out, "report.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Samples != 6 || !(rep.After.Mean < rep.Before.Mean) || !strings.Contains(rep.Caution, "ISO 10218") {
		t.Errorf("report: samples %d, cost %g → %g, caution %q", rep.Samples, rep.Before.Mean, rep.After.Mean, rep.Caution)
	}
	for _, f := range []string{"index.html", "cost.png", "joint-pivot.png"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("report lacks %s", f)
		}
	}
	// The tuned scene loads and holds the tuned gains, not the old ones.
	scene := filepath.Join(dir, "tune-arm-tuned.yaml")
	src, err := os.ReadFile(scene)
	if err != nil {
		t.Fatal(err)
	}
	if strings.Contains(string(src), "pivot: 20\n") {
		t.Errorf("tuned scene still has kp 20:\n%s", src)
	}
	if code, _, stderr := runCmd(t, "simulate", "--quiet", "--out", filepath.Join(dir, "run"), scene); code != 0 {
		t.Errorf("the tuned scene does not simulate: %s", stderr)
	}
	// --json prints the report itself.
	code, stdout, _ = runCmd(t, "tune", "--quiet", "--json", "--iterations", "2", "--out", out, file)
	if code != 0 || !strings.HasPrefix(stdout, "{") || !strings.Contains(stdout, `"stickslip-tune-report/1"`) {
		t.Errorf("--json: exit %d, stdout %.200s", code, stdout)
	}
}

func TestTuneBadInput(t *testing.T) {
	for _, c := range []struct {
		name string
		edit func(string) string
		want []string
	}{
		{"gain without bounds", func(s string) string {
			return strings.Replace(s, "{name: kp:pivot, bounds: [1, 200]}", "{name: kp:pivot}", 1)
		}, []string{"gains[0].bounds", "kp:pivot has no bounds", ":4"}},
		{"unknown actuator", func(s string) string { return strings.Replace(s, "kd:pivot", "kd:wrist", 1) },
			[]string{"gains[1]", `no actuator named "wrist"`, "actuators: pivot", ":5"}},
		{"fit report from another scene", func(s string) string { return strings.Replace(s, "fit/report.json", "other/report.json", 1) },
			[]string{"uncertainty.report", `belongs to scene "pusher-cell"`}},
		{"unknown field", func(s string) string { return s + "speed: 3\n" },
			[]string{"field speed not found"}},
		{"reversed bounds", func(s string) string { return strings.Replace(s, "[0.1, 30]", "[30, 0.1]", 1) },
			[]string{"gains[1]", "leave no room"}},
		{"pose of a jointed body", func(s string) string {
			return strings.Replace(s, "cost: {tracking: 1,", "task: {final_pose: {body: arm, position: [0, 0, 0.5]}}\ncost: {final_pose: 1, tracking: 1,", 1)
		}, []string{"final pose", "revolute joint"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, file := writeTuneFiles(t, c.edit(goodTune))
			code, _, stderr := runCmd(t, "tune", "--quiet", file)
			if code != 2 {
				t.Errorf("exit %d, want 2; stderr %s", code, stderr)
			}
			for _, w := range c.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("error %q lacks %q", strings.TrimSpace(stderr), w)
				}
			}
		})
	}
}
