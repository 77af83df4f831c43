package viewer

import (
	"errors"
	"math"
	"strings"
	"testing"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

func TestReadTrajectory(t *testing.T) {
	const log = `t,crate.x,crate.y,crate.z,crate.qw,crate.qx,crate.qy,crate.qz,crate.vx,arm.q,puck.x,puck.y,puck.z
0,0,0,0.1,1,0,0,0,0,0.5,1,1,0
0.1,0.2,0,0.1,1,0,0,0,0,0.5,,,
0.2,0.4,0,0.1,0.7071067811865476,0,0,0.7071067811865476,0,0.5,NaN,1,0
0.3,0.6,0,0.1,0,0,0,1,0,0.5,2,1,0
`
	tr, err := ReadTrajectory(strings.NewReader(log), "log.csv")
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(tr.Bodies, ","); got != "crate,puck" {
		t.Fatalf("bodies %q, want crate,puck (arm.q is a joint column)", got)
	}
	crate, puck := tr.Body("crate"), tr.Body("puck")
	if tr.Body("arm") != -1 {
		t.Error("arm is not a body")
	}
	// Linear interpolation of positions.
	p, hasRot, ok := tr.PoseAt(crate, 0.05)
	if !ok || !hasRot || r3.Norm(r3.Sub(p.Pos, r3.Vec{X: 0.1, Z: 0.1})) > 1e-12 {
		t.Errorf("crate at 0.05: %v %v %v", p.Pos, hasRot, ok)
	}
	// Orientation halfway between a quarter and a half turn about z is
	// three eighths of a turn (normalized blend of unit quaternions; the
	// angle of the blend between two rotations a quarter turn apart is at
	// the midpoint by symmetry).
	p, _, _ = tr.PoseAt(crate, 0.25)
	want := contact.QuatFromAxisAngle(r3.Vec{Z: 1}, 3*math.Pi/4)
	if a := contact.Angle(p.Rot, want); a > 1e-9 {
		t.Errorf("crate orientation at 0.25 off by %v rad", a)
	}
	// Exact sample times return the sample.
	if p, _, ok := tr.PoseAt(crate, 0.3); !ok || !near(p.Pos.X, 0.6, 1e-15) {
		t.Errorf("crate at its last sample: %v %v", p.Pos, ok)
	}
	// Outside the log: no pose.
	for _, tt := range []float64{-0.1, 0.31} {
		if _, _, ok := tr.PoseAt(crate, tt); ok {
			t.Errorf("pose at %v outside the log", tt)
		}
	}
	// Missing samples (empty and NaN cells) are skipped: the puck moves
	// from x = 1 at t = 0 to x = 2 at t = 0.3.
	p, hasRot, ok = tr.PoseAt(puck, 0.15)
	if !ok || hasRot || !near(p.Pos.X, 1.5, 1e-12) {
		t.Errorf("puck at 0.15 across missing samples: %v rot %v ok %v", p.Pos, hasRot, ok)
	}
}

func TestReadTrajectoryErrors(t *testing.T) {
	tests := []struct {
		name, in string
		line     int
		field    string
		msg      string
	}{
		{"empty", "", 1, "", "empty file"},
		{"no time", "crate.x,crate.y,crate.z\n1,2,3\n", 1, "", `no column "t"`},
		{"no bodies", "t,arm.q\n0,1\n", 1, "", "no body position columns"},
		{"partial position", "t,crate.x,crate.y\n0,1,2\n", 1, "", "crate.z"},
		{"partial orientation", "t,b.x,b.y,b.z,b.qw\n0,1,2,3,1\n", 1, "", "orientation columns"},
		{"duplicate", "t,b.x,b.y,b.z,b.x\n0,1,2,3,4\n", 1, "b.x", "twice"},
		{"not a number", "t,b.x,b.y,b.z\n0,1,2,3\n0.1,1,two,3\n", 3, "b.y", `"two" is not a number`},
		{"infinite", "t,b.x,b.y,b.z\n0,1,2,Inf\n", 2, "b.z", "not a number"},
		{"time back", "t,b.x,b.y,b.z\n0,1,2,3\n0,1,2,3\n", 3, "t", "does not increase"},
		{"time missing", "t,b.x,b.y,b.z\n,1,2,3\n", 2, "t", "time is missing"},
		{"zero quaternion", "t,b.x,b.y,b.z,b.qw,b.qx,b.qy,b.qz\n0,1,2,3,0,0,0,0\n", 2, "b.qw", "zero"},
		{"header only", "t,b.x,b.y,b.z\n", 2, "", "no samples"},
		{"ragged", "t,b.x,b.y,b.z\n0,1,2\n", 0, "", "wrong number of fields"},
	}
	for _, tc := range tests {
		_, err := ReadTrajectory(strings.NewReader(tc.in), "run7.csv")
		var fe *sim.FileError
		if !errors.As(err, &fe) {
			t.Errorf("%s: error %v is not a *sim.FileError", tc.name, err)
			continue
		}
		if fe.File != "run7.csv" || (tc.line != 0 && fe.Line != tc.line) || fe.Field != tc.field || !strings.Contains(err.Error(), tc.msg) {
			t.Errorf("%s: error %q (line %d field %q), want line %d field %q containing %q", tc.name, err, fe.Line, fe.Field, tc.line, tc.field, tc.msg)
		}
	}
}

func FuzzReadTrajectory(f *testing.F) {
	f.Add("t,b.x,b.y,b.z\n0,1,2,3\n0.1,1,2,3\n")
	f.Add("t,b.x,b.y,b.z,b.qw,b.qx,b.qy,b.qz\n0,1,2,3,1,0,0,0\n0.5,,,,,,,\n")
	f.Add("t\n")
	f.Fuzz(func(t *testing.T, in string) {
		tr, err := ReadTrajectory(strings.NewReader(in), "fuzz.csv")
		if err != nil {
			return
		}
		for b := range tr.Bodies {
			for _, tt := range []float64{tr.Times[0], (tr.Times[0] + tr.Times[len(tr.Times)-1]) / 2} {
				if p, hasRot, ok := tr.PoseAt(b, tt); ok && hasRot && !near(p.Rot.Norm(), 1, 1e-9) {
					t.Fatalf("non-unit orientation %v", p.Rot)
				}
			}
		}
	})
}
