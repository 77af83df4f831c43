package calibrate

import (
	"math"
	"strings"
	"testing"
)

// FuzzReadLog checks that the log reader never panics and that what it
// accepts keeps its promises: strictly increasing finite times and one
// value (finite or NaN for missing) per channel per row. Seeds are in
// testdata/fuzz/FuzzReadLog.
func FuzzReadLog(f *testing.F) {
	f.Add("t,crate.x\n0,1\n0.1,2\n", false)
	f.Fuzz(func(t *testing.T, src string, mapped bool) {
		r := &LogReader{}
		if mapped {
			r.Columns = []ColumnMap{{From: "x_mm", To: "crate.x", Unit: "mm"}, {From: "a_deg", To: "elbow.q", Unit: "deg"}}
		}
		lg, err := r.Read(strings.NewReader(src), "fuzz.csv")
		if err != nil {
			if err.Error() == "" {
				t.Error("empty error message")
			}
			return
		}
		if len(lg.T) == 0 || len(lg.Lines) != len(lg.T) || len(lg.Values) != len(lg.Columns) {
			t.Fatalf("inconsistent log: %d times, %d lines, %d value columns, %d names", len(lg.T), len(lg.Lines), len(lg.Values), len(lg.Columns))
		}
		for i, v := range lg.T {
			if math.IsNaN(v) || math.IsInf(v, 0) || (i > 0 && !(v > lg.T[i-1])) {
				t.Fatalf("time %d = %v after %v", i, v, lg.T[max(i-1, 0)])
			}
		}
		for c, col := range lg.Values {
			if len(col) != len(lg.T) {
				t.Fatalf("column %s has %d values for %d rows", lg.Columns[c], len(col), len(lg.T))
			}
			for _, v := range col {
				if math.IsInf(v, 0) {
					t.Fatalf("column %s holds %v", lg.Columns[c], v)
				}
			}
		}
	})
}
