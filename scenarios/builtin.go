package scenarios

import (
	"embed"
	"fmt"
	"io/fs"
	"path"
	"sort"
	"strings"

	"gopkg.in/yaml.v3"
)

//go:embed builtin/*.yaml
var builtinFS embed.FS

// BuiltinNames returns the names of the built-in scenes in sorted order.
func BuiltinNames() []string {
	entries, _ := builtinFS.ReadDir("builtin")
	var names []string
	for _, e := range entries {
		if n, ok := strings.CutSuffix(e.Name(), ".yaml"); ok {
			names = append(names, n)
		}
	}
	sort.Strings(names)
	return names
}

// Builtin returns the source of the built-in scene called name and its
// one-line description.
func Builtin(name string) ([]byte, string, error) {
	src, err := builtinFS.ReadFile(path.Join("builtin", name+".yaml"))
	if err != nil || strings.ContainsAny(name, "/\\") {
		return nil, "", fmt.Errorf("scenarios: no built-in scene %q; built-in scenes: %s", name, strings.Join(BuiltinNames(), ", "))
	}
	var doc struct {
		Description string `yaml:"description"`
	}
	if err := yaml.Unmarshal(src, &doc); err != nil {
		return nil, "", fmt.Errorf("scenarios: built-in scene %q: %v", name, err)
	}
	return src, doc.Description, nil
}

// LoadBuiltin loads the built-in scene called name with the given
// overrides. Messages name it "builtin:NAME".
func LoadBuiltin(name string, overrides ...string) (*Scene, error) {
	src, _, err := Builtin(name)
	if err != nil {
		return nil, err
	}
	// Built-in scenes are self-contained; any table file they named would
	// come from the embedded directory, never from disk.
	files, _ := fs.Sub(builtinFS, "builtin")
	l := Loader{Overrides: overrides, Files: files}
	return l.Load(src, "builtin:"+name)
}
