package calibrate

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stickslip/sim"
)

func TestReadLog(t *testing.T) {
	src := "t, carton.x ,carton_y_mm,elbow_deg\n" +
		"0,0.1,200,90\n" +
		"0.01,,NaN,45\n" +
		"0.025,0.3,250,\n"
	r := &LogReader{Columns: []ColumnMap{
		{From: "carton_y_mm", To: "carton.y", Unit: "mm"},
		{From: "elbow_deg", To: "elbow.q", Unit: "deg", Scale: 2},
	}}
	lg, err := r.Read(strings.NewReader(src), "a.csv")
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(lg.Columns, ","); got != "carton.x,carton.y,elbow.q" {
		t.Errorf("columns %s", got)
	}
	want := map[string][]float64{
		"carton.x": {0.1, math.NaN(), 0.3},
		"carton.y": {0.2, math.NaN(), 0.25},            // mm → m
		"elbow.q":  {math.Pi, math.Pi / 2, math.NaN()}, // degrees → rad, then ×2
	}
	for name, w := range want {
		got := lg.Column(name)
		for i := range w {
			if !(got[i] == w[i] || math.Abs(got[i]-w[i]) < 1e-15 || math.IsNaN(got[i]) && math.IsNaN(w[i])) {
				t.Errorf("%s[%d] = %v, want %v", name, i, got[i], w[i])
			}
		}
	}
	if lg.T[2] != 0.025 || lg.Lines[2] != 4 {
		t.Errorf("row 2: t = %v on line %d", lg.T[2], lg.Lines[2])
	}
}

func TestReadLogErrors(t *testing.T) {
	tests := []struct {
		name, src  string
		cols       []ColumnMap
		line, col  int
		field, msg string
	}{
		{"empty", "", nil, 1, 0, "", "empty file"},
		{"no time", "x,crate.x\n1,2\n", nil, 1, 0, "t", "no time column t"},
		{"decreasing time", "t,crate.x\n0,1\n0.2,2\n0.1,3\n", nil, 4, 1, "t", "time 0.1 does not increase (previous row, line 3, has 0.2)"},
		{"repeated time", "t,crate.x\n0,1\n0,2\n", nil, 3, 1, "t", "does not increase"},
		{"missing time", "t,crate.x\n0,1\n,2\n", nil, 3, 1, "t", "time is missing"},
		{"not a number", "t,crate.x\n0,1\n0.1,abc\n", nil, 3, 2, "crate.x", `"abc" is not a number`},
		{"infinite", "t,crate.x\n0,1\n0.1,inf\n", nil, 3, 2, "crate.x", "out of range"},
		{"overflow", "t,crate.x\n0,1e999\n", nil, 2, 2, "crate.x", "out of range"},
		{"short row", "t,crate.x\n0,1\n0.1\n", nil, 3, 1, "", "wrong number of fields"},
		{"no rows", "t,crate.x\n", nil, 1, 0, "", "no data rows"},
		{"duplicate column", "t,crate.x,crate.x\n0,1,2\n", nil, 1, 3, "crate.x", "repeats column 2"},
		{"empty name", "t,,crate.x\n0,1,2\n", nil, 1, 2, "", "empty column name"},
		{"mapped column absent", "t,crate.x\n0,1\n", []ColumnMap{{From: "x_mm", To: "crate.x", Unit: "mm"}}, 1, 0, "x_mm", "the file has no such column"},
		{"unknown unit", "t,x\n0,1\n", []ColumnMap{{From: "x", To: "crate.x", Unit: "furlong"}}, 1, 2, "x", `unknown unit "furlong"`},
		{"mapping makes a duplicate", "t,x,crate.x\n0,1,2\n", []ColumnMap{{From: "x", To: "crate.x"}}, 1, 3, "crate.x", "repeats column 2"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := (&LogReader{Columns: tc.cols}).Read(strings.NewReader(tc.src), "log.csv")
			var fe *sim.FileError
			if !errors.As(err, &fe) {
				t.Fatalf("error %v, want a *sim.FileError", err)
			}
			if fe.File != "log.csv" || fe.Line != tc.line || fe.Column != tc.col || fe.Field != tc.field || !strings.Contains(fe.Err.Error(), tc.msg) {
				t.Errorf("got %q (line %d, column %d, field %q), want line %d, column %d, field %q, message containing %q",
					err, fe.Line, fe.Column, fe.Field, tc.line, tc.col, tc.field, tc.msg)
			}
		})
	}
}

// A run written by simulate is itself a valid log.
func TestRunFileIsALog(t *testing.T) {
	run := &sim.Run{TimeStep: 0.01, BodyNames: []string{"crate"}, JointNames: []string{"elbow"}}
	for i := range 3 {
		f := sim.Frame{T: 0.01 * float64(i), Bodies: make([]sim.BodyFrame, 1), Joints: []sim.JointFrame{{Q: float64(i)}}}
		f.Bodies[0].Pose.Rot.W = 1
		f.Bodies[0].Pose.Pos.X = 0.5 * float64(i)
		run.Frames = append(run.Frames, f)
	}
	path := filepath.Join(t.TempDir(), "states.csv")
	fh, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := run.WriteStates(fh); err != nil {
		t.Fatal(err)
	}
	fh.Close()
	lg, err := (&LogReader{}).ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if len(lg.Columns) != 13+4 || lg.Column("crate.x")[2] != 1 || lg.Column("elbow.q")[1] != 1 {
		t.Errorf("read back %d columns: %v", len(lg.Columns), lg.Columns)
	}
}
