package scenarios

import (
	"reflect"
	"testing"
	"testing/fstest"
)

// FuzzLoad feeds arbitrary bytes to the loader. It must never panic, every
// failure must be an *Error, and whatever loads must survive Marshal and a
// second Load unchanged. The seed corpus in testdata/fuzz/FuzzLoad holds the
// built-in scenes and a scene using every feature.
func FuzzLoad(f *testing.F) {
	f.Add([]byte(richScene), "bodies.crate.mass=2")
	f.Add([]byte(controlScene), "controller.pd.kp.h=5")
	f.Fuzz(func(t *testing.T, src []byte, override string) {
		// Table files come from memory, never from the disk.
		l := Loader{Files: fstest.MapFS{"t.csv": {Data: []byte("t,h,k\n0,1,2\n0.5,-1,3\n")}}}
		if override != "" {
			l.Overrides = []string{override}
		}
		s, err := l.Load(src, "fuzz.yaml")
		if err != nil {
			if _, ok := err.(*Error); !ok {
				t.Fatalf("error %T is not an *Error: %v", err, err)
			}
			return
		}
		out, err := Marshal(s)
		if err != nil {
			t.Fatalf("Marshal of a loaded scene: %v", err)
		}
		l2 := Loader{Files: fstest.MapFS{}}
		s2, err := l2.Load(out, "fuzz-marshalled.yaml")
		if err != nil {
			t.Fatalf("reload: %v\n%s", err, out)
		}
		if !reflect.DeepEqual(s.Model, s2.Model) || s.Settings != s2.Settings {
			t.Fatalf("Marshal/Load changed the model\n%s", out)
		}
	})
}
