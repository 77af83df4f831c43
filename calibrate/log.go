package calibrate

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"stickslip/sim"
)

// Log is a logged run: sample times and named channels. Channel names are
// run-file column names (sim.StateHeader) after any column mapping.
type Log struct {
	// File names the source in messages.
	File string
	// T holds the sample times in seconds, strictly increasing.
	T []float64
	// Columns are the channel names in file order, without t.
	Columns []string
	// Values[c][i] is channel Columns[c] at time T[i], in SI units; NaN
	// marks a missing sample.
	Values [][]float64
	// Lines[i] is the file line of row i, for messages.
	Lines []int
}

// Column returns the samples of the named channel, or nil if the log lacks
// it.
func (l *Log) Column(name string) []float64 {
	if i := slices.Index(l.Columns, name); i >= 0 {
		return l.Values[i]
	}
	return nil
}

// ColumnMap renames one column of a log and converts its unit. The value
// read is multiplied by the unit's factor to SI and then by Scale.
type ColumnMap struct {
	// From is the column's name in the file.
	From string
	// To is the run-file column name it stands for ("t" for time).
	To string
	// Unit is the file's unit: one of m, cm, mm, rad, deg, s, ms, or empty
	// for SI.
	Unit string
	// Scale multiplies after the unit conversion; zero means 1.
	Scale float64
}

// unitFactors convert a file unit to SI.
var unitFactors = map[string]float64{
	"": 1, "m": 1, "cm": 1e-2, "mm": 1e-3,
	"rad": 1, "deg": math.Pi / 180,
	"s": 1, "ms": 1e-3,
}

// Units lists the unit names a ColumnMap accepts.
const Units = "m, cm, mm, rad, deg, s, ms"

// Factor returns the number each value read is multiplied by.
func (c *ColumnMap) Factor() (float64, error) {
	f, ok := unitFactors[c.Unit]
	if !ok {
		return 0, fmt.Errorf("unknown unit %q (units: %s)", c.Unit, Units)
	}
	if c.Scale != 0 {
		if math.IsNaN(c.Scale) || math.IsInf(c.Scale, 0) {
			return 0, fmt.Errorf("scale %v is not finite", c.Scale)
		}
		f *= c.Scale
	}
	return f, nil
}

// A LogReader reads logs. Its zero value reads run-file states (comma
// separated, columns named as in run files, SI units).
type LogReader struct {
	// Columns rename and convert columns; columns not listed keep their
	// names and values.
	Columns []ColumnMap
	// Comma is the field delimiter (default ',').
	Comma rune
	// Comment, if not zero, starts lines that are ignored.
	Comment rune
}

// ReadFile reads the log at path.
func (r *LogReader) ReadFile(path string) (*Log, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return r.Read(f, path)
}

// Read reads a log from rd; file names it in messages. Errors are
// *sim.FileError values that give the line, column and column name.
func (r *LogReader) Read(rd io.Reader, file string) (*Log, error) {
	fail := func(line, col int, field string, format string, args ...any) error {
		return &sim.FileError{File: file, Line: line, Column: col, Field: field, Err: fmt.Errorf(format, args...)}
	}
	cr := csv.NewReader(rd)
	if r.Comma != 0 {
		cr.Comma = r.Comma
	}
	cr.Comment = r.Comment
	cr.ReuseRecord = true
	cr.TrimLeadingSpace = true
	head, err := cr.Read()
	if err == io.EOF {
		return nil, fail(1, 0, "", "empty file: want a header row naming t and run-file columns")
	}
	if err != nil {
		return nil, csvError(file, err)
	}
	headLine, _ := cr.FieldPos(0)
	names := make([]string, len(head))
	factors := make([]float64, len(head))
	for i, h := range head {
		names[i], factors[i] = strings.TrimSpace(h), 1
	}
	for k := range r.Columns {
		m := &r.Columns[k]
		i := slices.Index(names, m.From)
		if i < 0 {
			return nil, fail(headLine, 0, m.From, "column mapping %s → %s: the file has no such column (columns: %s)", m.From, m.To, strings.Join(names, ", "))
		}
		f, err := m.Factor()
		if err != nil {
			return nil, fail(headLine, i+1, m.From, "column mapping %s → %s: %v", m.From, m.To, err)
		}
		if m.To == "" {
			return nil, fail(headLine, i+1, m.From, "column mapping %s: no target name", m.From)
		}
		names[i], factors[i] = m.To, f
	}
	tcol := -1
	for i, n := range names {
		if n == "" {
			return nil, fail(headLine, i+1, "", "empty column name")
		}
		if j := slices.Index(names[:i], n); j >= 0 {
			return nil, fail(headLine, i+1, n, "column name repeats column %d", j+1)
		}
		if n == "t" {
			tcol = i
		}
	}
	if tcol < 0 {
		return nil, fail(headLine, 0, "t", "no time column t (columns: %s); map one with a column mapping to t", strings.Join(names, ", "))
	}
	lg := &Log{File: file}
	chans := make([]int, 0, len(names)-1)
	for i, n := range names {
		if i != tcol {
			chans = append(chans, i)
			lg.Columns = append(lg.Columns, n)
		}
	}
	lg.Values = make([][]float64, len(chans))
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvError(file, err)
		}
		line, _ := cr.FieldPos(0)
		cell := func(i int) (float64, bool, error) {
			s := strings.TrimSpace(rec[i])
			if s == "" || strings.EqualFold(s, "nan") {
				return math.NaN(), false, nil
			}
			v, err := strconv.ParseFloat(s, 64)
			if err != nil && !errors.Is(err, strconv.ErrRange) {
				return 0, false, fail(line, i+1, names[i], "%q is not a number", s)
			}
			v *= factors[i]
			if math.IsInf(v, 0) || err != nil {
				return 0, false, fail(line, i+1, names[i], "%q is out of range", s)
			}
			return v, true, nil
		}
		t, ok, err := cell(tcol)
		if err != nil {
			return nil, err
		}
		if !ok {
			return nil, fail(line, tcol+1, "t", "time is missing; every row needs a time")
		}
		if n := len(lg.T); n > 0 && !(t > lg.T[n-1]) {
			return nil, fail(line, tcol+1, "t", "time %v does not increase (previous row, line %d, has %v)", t, lg.Lines[n-1], lg.T[n-1])
		}
		lg.T = append(lg.T, t)
		lg.Lines = append(lg.Lines, line)
		for c, i := range chans {
			v, _, err := cell(i)
			if err != nil {
				return nil, err
			}
			lg.Values[c] = append(lg.Values[c], v)
		}
	}
	if len(lg.T) == 0 {
		return nil, fail(headLine, 0, "", "no data rows after the header")
	}
	return lg, nil
}

// csvError converts an encoding/csv error to a *sim.FileError.
func csvError(file string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &sim.FileError{File: file, Line: pe.Line, Column: pe.Column, Err: pe.Err}
	}
	return &sim.FileError{File: file, Err: err}
}
