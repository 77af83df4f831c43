package sim

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"stickslip/contact"

	"gonum.org/v1/gonum/spatial/r3"
)

// RunFormat identifies the version of the run directory layout.
const RunFormat = "stickslip-run/1"

// Names of the files in a run directory.
const (
	RunManifestFile = "run.json"
	RunStatesFile   = "states.csv"
	RunContactsFile = "contacts.csv"
	RunSceneFile    = "scene.yaml"
)

// BodyFrame is the state of one body in one frame, in world axes: the pose of
// the body frame, the linear velocity of its origin and its angular velocity.
type BodyFrame struct {
	Pose    contact.Pose
	Linear  r3.Vec
	Angular r3.Vec
}

// JointFrame is the state of one single-DOF joint in one frame: position,
// velocity, the commanded effort and the effort applied after limits.
type JointFrame struct {
	Q, QD, Tau, Effort float64
}

// Frame is one recorded instant of a rollout.
type Frame struct {
	Step   int
	T      float64
	Bodies []BodyFrame
	Joints []JointFrame
}

// ContactState classifies a contact by what its impulse does.
type ContactState int

// The contact states.
const (
	Separating ContactState = iota // no impulse
	Sticking                       // impulse inside the friction cone, no slip
	Sliding                        // impulse on the cone boundary, slipping
)

var contactStateNames = [...]string{"separating", "sticking", "sliding"}

func (s ContactState) String() string {
	if s < 0 || int(s) >= len(contactStateNames) {
		return "unknown"
	}
	return contactStateNames[s]
}

// ParseContactState returns the state named s.
func ParseContactState(s string) (ContactState, bool) {
	for i, n := range contactStateNames {
		if n == s {
			return ContactState(i), true
		}
	}
	return 0, false
}

// ContactRecord is one contact point in one frame. A and B name the bodies
// or static shapes; Normal points from A to B; impulses are those B receives
// over the step (N·s), the friction impulse as a world vector.
type ContactRecord struct {
	Frame           int
	T               float64
	A, B            string
	Feature         uint32
	Point           r3.Vec
	Normal          r3.Vec
	Gap             float64
	NormalImpulse   float64
	FrictionImpulse r3.Vec
	Slip            float64
	State           ContactState
}

// Run is the recorded output of a rollout.
type Run struct {
	TimeStep   float64
	BodyNames  []string
	JointNames []string
	Frames     []Frame
	Contacts   []ContactRecord
	// Scene is the scene file used, verbatim, with overrides applied.
	Scene []byte
	// Stats summarizes the contact solves.
	Stats RunStats
}

// RunStats summarizes the per-step contact solves of a rollout.
type RunStats struct {
	Steps            int     `json:"steps"`
	SolverIterMedian int     `json:"solver_iterations_median"`
	SolverIterMax    int     `json:"solver_iterations_max"`
	MaxResidual      float64 `json:"solver_residual_max"`
}

type runManifest struct {
	Format   string   `json:"format"`
	TimeStep float64  `json:"time_step"`
	Frames   int      `json:"frames"`
	Bodies   []string `json:"bodies"`
	Joints   []string `json:"joints"`
	States   string   `json:"states"`
	Contacts string   `json:"contacts"`
	Scene    string   `json:"scene"`
	Stats    RunStats `json:"stats"`
}

// BodyColumns are the per-body state column suffixes, in file order.
var BodyColumns = []string{"x", "y", "z", "qw", "qx", "qy", "qz", "vx", "vy", "vz", "wx", "wy", "wz"}

// JointColumns are the per-joint state column suffixes, in file order.
var JointColumns = []string{"q", "qd", "tau", "effort"}

var contactHeader = []string{"frame", "t", "a", "b", "feature", "px", "py", "pz", "nx", "ny", "nz",
	"gap", "impulse_n", "impulse_fx", "impulse_fy", "impulse_fz", "slip", "state"}

func bodyValues(b *BodyFrame) [13]float64 {
	p, q := b.Pose.Pos, b.Pose.Rot
	return [13]float64{p.X, p.Y, p.Z, q.W, q.X, q.Y, q.Z,
		b.Linear.X, b.Linear.Y, b.Linear.Z, b.Angular.X, b.Angular.Y, b.Angular.Z}
}

func bodyFromValues(v []float64) BodyFrame {
	return BodyFrame{
		Pose: contact.Pose{
			Pos: r3.Vec{X: v[0], Y: v[1], Z: v[2]},
			Rot: contact.Quat{W: v[3], X: v[4], Y: v[5], Z: v[6]},
		},
		Linear:  r3.Vec{X: v[7], Y: v[8], Z: v[9]},
		Angular: r3.Vec{X: v[10], Y: v[11], Z: v[12]},
	}
}

func formatFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// StateHeader returns the column names of a states file for the given bodies
// and joints: t, then <body>.<col> and <joint>.<col>.
func StateHeader(bodies, joints []string) []string {
	h := []string{"t"}
	for _, b := range bodies {
		for _, c := range BodyColumns {
			h = append(h, b+"."+c)
		}
	}
	for _, j := range joints {
		for _, c := range JointColumns {
			h = append(h, j+"."+c)
		}
	}
	return h
}

// WriteStates writes the frames as a states CSV.
func (r *Run) WriteStates(w io.Writer) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(StateHeader(r.BodyNames, r.JointNames)); err != nil {
		return err
	}
	row := make([]string, 0, 1+13*len(r.BodyNames)+4*len(r.JointNames))
	for i := range r.Frames {
		f := &r.Frames[i]
		row = append(row[:0], formatFloat(f.T))
		for j := range f.Bodies {
			for _, v := range bodyValues(&f.Bodies[j]) {
				row = append(row, formatFloat(v))
			}
		}
		for _, j := range f.Joints {
			row = append(row, formatFloat(j.Q), formatFloat(j.QD), formatFloat(j.Tau), formatFloat(j.Effort))
		}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteContacts writes the contact records as a contacts CSV.
func (r *Run) WriteContacts(w io.Writer) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(contactHeader); err != nil {
		return err
	}
	for i := range r.Contacts {
		c := &r.Contacts[i]
		row := []string{strconv.Itoa(c.Frame), formatFloat(c.T), c.A, c.B,
			strconv.FormatUint(uint64(c.Feature), 10),
			formatFloat(c.Point.X), formatFloat(c.Point.Y), formatFloat(c.Point.Z),
			formatFloat(c.Normal.X), formatFloat(c.Normal.Y), formatFloat(c.Normal.Z),
			formatFloat(c.Gap), formatFloat(c.NormalImpulse),
			formatFloat(c.FrictionImpulse.X), formatFloat(c.FrictionImpulse.Y), formatFloat(c.FrictionImpulse.Z),
			formatFloat(c.Slip), c.State.String()}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// Write stores the run in directory dir, atomically (see WriteDir, with
// run.json as the marker of a run directory).
func (r *Run) Write(dir string) error {
	var states, contacts bytes.Buffer
	if err := r.WriteStates(&states); err != nil {
		return err
	}
	if err := r.WriteContacts(&contacts); err != nil {
		return err
	}
	man, err := json.MarshalIndent(runManifest{
		Format:   RunFormat,
		TimeStep: r.TimeStep,
		Frames:   len(r.Frames),
		Bodies:   nonNil(r.BodyNames),
		Joints:   nonNil(r.JointNames),
		States:   RunStatesFile,
		Contacts: RunContactsFile,
		Scene:    RunSceneFile,
		Stats:    r.Stats,
	}, "", "  ")
	if err != nil {
		return err
	}
	return WriteDir(dir, RunManifestFile, map[string][]byte{
		RunStatesFile:   states.Bytes(),
		RunContactsFile: contacts.Bytes(),
		RunSceneFile:    r.Scene,
		RunManifestFile: append(man, '\n'),
	})
}

// WriteDir writes files (name → contents) as the directory dir,
// atomically: they are written to a hidden sibling directory that then
// replaces dir, so readers never see a half-written directory. An existing
// dir is replaced only if it is empty or holds the file marker, so that a
// mistyped path never destroys unrelated files.
func WriteDir(dir, marker string, files map[string][]byte) error {
	dir = filepath.Clean(dir)
	if err := checkReplaceable(dir, marker); err != nil {
		return err
	}
	parent := filepath.Dir(dir)
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return err
	}
	tmp, err := os.MkdirTemp(parent, "."+filepath.Base(dir)+".tmp-")
	if err != nil {
		return err
	}
	defer os.RemoveAll(tmp)
	names := make([]string, 0, len(files))
	for n := range files {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		if err := os.WriteFile(filepath.Join(tmp, n), files[n], 0o644); err != nil {
			return err
		}
	}
	if err := os.Chmod(tmp, 0o755); err != nil {
		return err
	}
	return replaceDir(tmp, dir)
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

func checkReplaceable(dir, marker string) error {
	entries, err := os.ReadDir(dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	if len(entries) == 0 {
		return nil
	}
	if _, err := os.Stat(filepath.Join(dir, marker)); err != nil {
		return fmt.Errorf("%s: exists and is not a directory this command wrote (no %s); refusing to replace it", dir, marker)
	}
	return nil
}

// replaceDir moves tmp to dir, keeping the old dir until the move succeeded.
func replaceDir(tmp, dir string) error {
	old := ""
	if _, err := os.Stat(dir); err == nil {
		old = tmp + ".old"
		if err := os.Rename(dir, old); err != nil {
			return err
		}
	}
	if err := os.Rename(tmp, dir); err != nil {
		if old != "" {
			os.Rename(old, dir)
		}
		return err
	}
	if old != "" {
		return os.RemoveAll(old)
	}
	return nil
}

// FileError is an error in a run or log file, located by line and column
// (1-based; zero when unknown) and the column name where it applies.
type FileError struct {
	File   string
	Line   int
	Column int
	Field  string
	Err    error
}

func (e *FileError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
		if e.Column > 0 {
			fmt.Fprintf(&b, ":%d", e.Column)
		}
	}
	if e.Field != "" {
		fmt.Fprintf(&b, ": column %q", e.Field)
	}
	fmt.Fprintf(&b, ": %v", e.Err)
	return b.String()
}

func (e *FileError) Unwrap() error { return e.Err }

// ReadRun reads a run directory written by Run.Write.
func ReadRun(dir string) (*Run, error) {
	manPath := filepath.Join(dir, RunManifestFile)
	data, err := os.ReadFile(manPath)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s: not a run directory: %s is missing", dir, RunManifestFile)
		}
		return nil, err
	}
	var man runManifest
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&man); err != nil {
		return nil, &FileError{File: manPath, Err: err}
	}
	if man.Format != RunFormat {
		return nil, &FileError{File: manPath, Field: "format", Err: fmt.Errorf("format %q is not %q", man.Format, RunFormat)}
	}
	r := &Run{TimeStep: man.TimeStep, BodyNames: man.Bodies, JointNames: man.Joints, Stats: man.Stats}
	statesPath := filepath.Join(dir, RunStatesFile)
	if err := r.readStates(statesPath); err != nil {
		return nil, err
	}
	if len(r.Frames) != man.Frames {
		return nil, &FileError{File: statesPath, Err: fmt.Errorf("has %d frames, %s says %d", len(r.Frames), RunManifestFile, man.Frames)}
	}
	if err := r.readContacts(filepath.Join(dir, RunContactsFile)); err != nil {
		return nil, err
	}
	if r.Scene, err = os.ReadFile(filepath.Join(dir, RunSceneFile)); err != nil {
		return nil, err
	}
	return r, nil
}

func openCSV(path string) (*os.File, *csv.Reader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	cr := csv.NewReader(bufio.NewReader(f))
	cr.ReuseRecord = true
	return f, cr, nil
}

// parseCell parses a float cell, reporting the file position on failure.
func parseCell(path string, cr *csv.Reader, col int, name, s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		line, _ := cr.FieldPos(col)
		return 0, &FileError{File: path, Line: line, Column: col + 1, Field: name, Err: fmt.Errorf("%q is not a finite number", s)}
	}
	return v, nil
}

func (r *Run) readStates(path string) error {
	f, cr, err := openCSV(path)
	if err != nil {
		return err
	}
	defer f.Close()
	head, err := cr.Read()
	if err != nil {
		return &FileError{File: path, Line: 1, Err: fmt.Errorf("reading header: %w", err)}
	}
	want := StateHeader(r.BodyNames, r.JointNames)
	if len(head) != len(want) {
		return &FileError{File: path, Line: 1, Err: fmt.Errorf("header has %d columns, want %d", len(head), len(want))}
	}
	for i := range want {
		if head[i] != want[i] {
			return &FileError{File: path, Line: 1, Column: i + 1, Err: fmt.Errorf("column is %q, want %q", head[i], want[i])}
		}
	}
	vals := make([]float64, len(want))
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return &FileError{File: path, Err: err}
		}
		for i, s := range rec {
			if vals[i], err = parseCell(path, cr, i, want[i], s); err != nil {
				return err
			}
		}
		fr := Frame{Step: int(math.Round(vals[0] / r.TimeStep)), T: vals[0], Bodies: make([]BodyFrame, len(r.BodyNames)), Joints: make([]JointFrame, len(r.JointNames))}
		for b := range fr.Bodies {
			fr.Bodies[b] = bodyFromValues(vals[1+13*b : 14+13*b])
		}
		off := 1 + 13*len(r.BodyNames)
		for j := range fr.Joints {
			v := vals[off+4*j:]
			fr.Joints[j] = JointFrame{Q: v[0], QD: v[1], Tau: v[2], Effort: v[3]}
		}
		if n := len(r.Frames); n > 0 && !(fr.T > r.Frames[n-1].T) {
			line, _ := cr.FieldPos(0)
			return &FileError{File: path, Line: line, Column: 1, Field: "t", Err: fmt.Errorf("time %v does not increase (previous %v)", fr.T, r.Frames[n-1].T)}
		}
		r.Frames = append(r.Frames, fr)
	}
}

func (r *Run) readContacts(path string) error {
	f, cr, err := openCSV(path)
	if err != nil {
		return err
	}
	defer f.Close()
	head, err := cr.Read()
	if err != nil {
		return &FileError{File: path, Line: 1, Err: fmt.Errorf("reading header: %w", err)}
	}
	if strings.Join(head, ",") != strings.Join(contactHeader, ",") {
		return &FileError{File: path, Line: 1, Err: fmt.Errorf("header is %q, want %q", strings.Join(head, ","), strings.Join(contactHeader, ","))}
	}
	num := func(rec []string, i int) (float64, error) { return parseCell(path, cr, i, contactHeader[i], rec[i]) }
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return &FileError{File: path, Err: err}
		}
		var v [18]float64
		for _, i := range []int{1, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16} {
			if v[i], err = num(rec, i); err != nil {
				return err
			}
		}
		frame, err := strconv.Atoi(rec[0])
		if err != nil || frame < 0 || frame >= len(r.Frames) {
			line, _ := cr.FieldPos(0)
			return &FileError{File: path, Line: line, Column: 1, Field: "frame", Err: fmt.Errorf("%q is not a frame index in [0, %d)", rec[0], len(r.Frames))}
		}
		feat, err := strconv.ParseUint(rec[4], 10, 32)
		if err != nil {
			line, _ := cr.FieldPos(4)
			return &FileError{File: path, Line: line, Column: 5, Field: "feature", Err: fmt.Errorf("%q is not an unsigned integer", rec[4])}
		}
		st, ok := ParseContactState(rec[17])
		if !ok {
			line, _ := cr.FieldPos(17)
			return &FileError{File: path, Line: line, Column: 18, Field: "state", Err: fmt.Errorf("%q is not one of %s", rec[17], strings.Join(contactStateNames[:], ", "))}
		}
		r.Contacts = append(r.Contacts, ContactRecord{
			Frame: frame, T: v[1], A: rec[2], B: rec[3], Feature: uint32(feat),
			Point:           r3.Vec{X: v[5], Y: v[6], Z: v[7]},
			Normal:          r3.Vec{X: v[8], Y: v[9], Z: v[10]},
			Gap:             v[11],
			NormalImpulse:   v[12],
			FrictionImpulse: r3.Vec{X: v[13], Y: v[14], Z: v[15]},
			Slip:            v[16],
			State:           st,
		})
	}
}

// ContactsInFrame returns the records of frame i (records are stored in frame
// order, so this is a binary search).
func (r *Run) ContactsInFrame(i int) []ContactRecord {
	lo, hi := 0, len(r.Contacts)
	for lo < hi {
		m := (lo + hi) / 2
		if r.Contacts[m].Frame < i {
			lo = m + 1
		} else {
			hi = m
		}
	}
	end := lo
	for end < len(r.Contacts) && r.Contacts[end].Frame == i {
		end++
	}
	return r.Contacts[lo:end]
}
