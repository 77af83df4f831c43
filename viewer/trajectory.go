package viewer

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"

	"stickslip/contact"
	"stickslip/sim"

	"gonum.org/v1/gonum/spatial/r3"
)

// Trajectory is a logged motion of bodies: the body poses of a log CSV with
// the columns of a run's states file (t, then <body>.x, .y, .z and
// optionally .qw, .qx, .qy, .qz). Other columns are ignored. Empty or NaN
// cells are missing samples, which interpolation skips.
type Trajectory struct {
	Times  []float64
	Bodies []string
	// Pos[b][i] is body b's position in sample i; Valid[b][i] reports
	// whether the sample was logged.
	Pos   [][]r3.Vec
	Valid [][]bool
	// Rot[b] holds body b's orientations, nil when the log has no
	// orientation columns for it (validity as for positions).
	Rot [][]contact.Quat
}

// ReadTrajectoryFile reads a log CSV from path.
func ReadTrajectoryFile(path string) (*Trajectory, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadTrajectory(f, path)
}

// ReadTrajectory reads a log CSV; name is the file name that errors carry
// (they are *sim.FileError with the line, column and column name).
func ReadTrajectory(rd io.Reader, name string) (*Trajectory, error) {
	cr := csv.NewReader(rd)
	cr.ReuseRecord = true
	head, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			err = errors.New("empty file: want a header row starting with t")
		}
		return nil, &sim.FileError{File: name, Line: 1, Err: err}
	}
	head = append([]string(nil), head...) // the reader reuses its record
	col := map[string]int{}
	for i, h := range head {
		h = strings.TrimSpace(h)
		if _, dup := col[h]; dup {
			return nil, &sim.FileError{File: name, Line: 1, Column: i + 1, Field: h, Err: errors.New("column appears twice")}
		}
		col[h] = i
	}
	tcol, ok := col["t"]
	if !ok {
		return nil, &sim.FileError{File: name, Line: 1, Err: errors.New("no column \"t\" (time in seconds)")}
	}
	// Bodies are the prefixes with all of x, y, z, in header order.
	type bodyCols struct {
		name string
		pos  [3]int
		rot  [4]int // -1 when absent
	}
	var bodies []bodyCols
	seen := map[string]bool{}
	for _, h := range head {
		prefix, suffix, ok := strings.Cut(strings.TrimSpace(h), ".")
		if !ok || seen[prefix] || (suffix != "x" && suffix != "y" && suffix != "z") {
			continue
		}
		seen[prefix] = true
		bc := bodyCols{name: prefix, rot: [4]int{-1, -1, -1, -1}}
		missing := []string{}
		for i, s := range []string{"x", "y", "z"} {
			j, ok := col[prefix+"."+s]
			if !ok {
				missing = append(missing, prefix+"."+s)
			}
			bc.pos[i] = j
		}
		if len(missing) > 0 {
			return nil, &sim.FileError{File: name, Line: 1, Err: fmt.Errorf("body %q: missing position column(s) %s", prefix, strings.Join(missing, ", "))}
		}
		nrot := 0
		for i, s := range []string{"qw", "qx", "qy", "qz"} {
			if j, ok := col[prefix+"."+s]; ok {
				bc.rot[i] = j
				nrot++
			}
		}
		if nrot != 0 && nrot != 4 {
			return nil, &sim.FileError{File: name, Line: 1, Err: fmt.Errorf("body %q: has %d of the 4 orientation columns qw, qx, qy, qz; give all or none", prefix, nrot)}
		}
		bodies = append(bodies, bc)
	}
	if len(bodies) == 0 {
		return nil, &sim.FileError{File: name, Line: 1, Err: errors.New("no body position columns (<body>.x, <body>.y, <body>.z)")}
	}
	tr := &Trajectory{
		Bodies: make([]string, len(bodies)),
		Pos:    make([][]r3.Vec, len(bodies)),
		Valid:  make([][]bool, len(bodies)),
		Rot:    make([][]contact.Quat, len(bodies)),
	}
	for b, bc := range bodies {
		tr.Bodies[b] = bc.name
	}
	cell := func(i int, rec []string) (float64, bool, error) {
		s := strings.TrimSpace(rec[i])
		if s == "" {
			return 0, false, nil
		}
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsInf(v, 0) {
			line, _ := cr.FieldPos(i)
			return 0, false, &sim.FileError{File: name, Line: line, Column: i + 1, Field: strings.TrimSpace(head[i]), Err: fmt.Errorf("%q is not a number (leave the cell empty for a missing sample)", rec[i])}
		}
		return v, !math.IsNaN(v), nil
	}
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, &sim.FileError{File: name, Err: err}
		}
		t, ok, err := cell(tcol, rec)
		if err != nil {
			return nil, err
		}
		line, _ := cr.FieldPos(tcol)
		if !ok {
			return nil, &sim.FileError{File: name, Line: line, Column: tcol + 1, Field: "t", Err: errors.New("time is missing")}
		}
		if n := len(tr.Times); n > 0 && !(t > tr.Times[n-1]) {
			return nil, &sim.FileError{File: name, Line: line, Column: tcol + 1, Field: "t", Err: fmt.Errorf("time %v does not increase (previous %v)", t, tr.Times[n-1])}
		}
		tr.Times = append(tr.Times, t)
		for b, bc := range bodies {
			var v [7]float64
			valid := true
			for i, j := range bc.pos {
				x, ok, err := cell(j, rec)
				if err != nil {
					return nil, err
				}
				v[i] = x
				valid = valid && ok
			}
			if bc.rot[0] >= 0 {
				for i, j := range bc.rot {
					x, ok, err := cell(j, rec)
					if err != nil {
						return nil, err
					}
					v[3+i] = x
					valid = valid && ok
				}
				q := contact.Quat{W: v[3], X: v[4], Y: v[5], Z: v[6]}
				if valid && q.Norm() < 1e-9 {
					line, _ := cr.FieldPos(bc.rot[0])
					return nil, &sim.FileError{File: name, Line: line, Column: bc.rot[0] + 1, Field: strings.TrimSpace(head[bc.rot[0]]), Err: errors.New("orientation quaternion is zero")}
				}
				tr.Rot[b] = append(tr.Rot[b], q.Normalize())
			}
			tr.Pos[b] = append(tr.Pos[b], r3.Vec{X: v[0], Y: v[1], Z: v[2]})
			tr.Valid[b] = append(tr.Valid[b], valid)
		}
	}
	if len(tr.Times) == 0 {
		return nil, &sim.FileError{File: name, Line: 2, Err: errors.New("no samples after the header")}
	}
	return tr, nil
}

// Body returns the index of the named body, or -1.
func (tr *Trajectory) Body(name string) int {
	for i, b := range tr.Bodies {
		if b == name {
			return i
		}
	}
	return -1
}

// PoseAt returns body b's logged pose at time t, interpolated between the
// nearest valid samples around t (linearly in position, normalized linear
// blend of orientations along the shorter arc), and whether t lies within
// the body's logged samples. hasRot reports whether the log gives
// orientations; without them the returned orientation is the identity.
func (tr *Trajectory) PoseAt(b int, t float64) (p contact.Pose, hasRot, ok bool) {
	hasRot = tr.Rot[b] != nil
	valid := tr.Valid[b]
	// hi: first sample after t; lo: last at or before.
	hi := sort.SearchFloat64s(tr.Times, math.Nextafter(t, math.Inf(1)))
	lo := hi - 1
	for lo >= 0 && !valid[lo] {
		lo--
	}
	for hi < len(valid) && !valid[hi] {
		hi++
	}
	p.Rot = contact.IdentityQuat
	switch {
	case lo < 0:
		return p, hasRot, false
	case tr.Times[lo] == t || hi == len(valid):
		if hi == len(valid) && tr.Times[lo] != t {
			return p, hasRot, false
		}
		p.Pos = tr.Pos[b][lo]
		if hasRot {
			p.Rot = tr.Rot[b][lo]
		}
		return p, hasRot, true
	}
	f := (t - tr.Times[lo]) / (tr.Times[hi] - tr.Times[lo])
	p.Pos = r3.Add(tr.Pos[b][lo], r3.Scale(f, r3.Sub(tr.Pos[b][hi], tr.Pos[b][lo])))
	if hasRot {
		q0, q1 := tr.Rot[b][lo], tr.Rot[b][hi]
		if q0.W*q1.W+q0.X*q1.X+q0.Y*q1.Y+q0.Z*q1.Z < 0 {
			q1 = contact.Quat{W: -q1.W, X: -q1.X, Y: -q1.Y, Z: -q1.Z}
		}
		p.Rot = contact.Quat{
			W: q0.W + f*(q1.W-q0.W), X: q0.X + f*(q1.X-q0.X),
			Y: q0.Y + f*(q1.Y-q0.Y), Z: q0.Z + f*(q1.Z-q0.Z),
		}.Normalize()
	}
	return p, hasRot, true
}
