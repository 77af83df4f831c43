package scenarios

import (
	"fmt"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"
)

// override applies one "PATH=VALUE" assignment to the document rooted at
// root. Missing mapping keys along the path are created, so an override may
// set a field the file leaves at its default; whether the field exists is
// then checked by the decoder like any other, and its error names the
// override. A sequence element that does not exist is an error here.
func (d *decoder) override(root *yaml.Node, o string) {
	fail := func(format string, args ...any) {
		panic(&Error{File: d.file, Override: o, Msg: fmt.Sprintf(format, args...)})
	}
	path, value, ok := strings.Cut(o, "=")
	if !ok || path == "" {
		fail("want PATH=VALUE, such as bodies.crate.mass=2.5")
	}
	var val yaml.Node
	if err := yaml.Unmarshal([]byte(value), &val); err != nil {
		fail("value is not valid YAML: %v", strings.TrimPrefix(err.Error(), "yaml: "))
	}
	var v *yaml.Node
	if val.Kind == yaml.DocumentNode && len(val.Content) == 1 {
		v = val.Content[0]
	} else {
		v = &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!null", Value: ""}
	}
	keys := strings.Split(path, ".")
	n := root
	for i, key := range keys {
		so := strings.Join(keys[:i], ".")
		if key == "" {
			fail("empty key in path %q", path)
		}
		n = d.resolve(n, so)
		switch n.Kind {
		case yaml.MappingNode:
			var next *yaml.Node
			for k := 0; k+1 < len(n.Content); k += 2 {
				if n.Content[k].Value == key {
					next = n.Content[k+1]
				}
			}
			if next == nil {
				kn := &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: key}
				next = &yaml.Node{Kind: yaml.MappingNode, Tag: "!!map"}
				d.origin[kn], d.origin[next] = o, o
				n.Content = append(n.Content, kn, next)
			}
			n = next
		case yaml.SequenceNode:
			n = d.element(n, key, so, fail)
		default:
			if so == "" {
				so = "the document"
			}
			fail("%s is a single value, so %q cannot go into it", so, key)
		}
	}
	mark(d.origin, v, o)
	*n = *v
	d.origin[n] = o
}

// element finds the sequence element named by key: an index or the value
// of the element's name field.
func (d *decoder) element(n *yaml.Node, key, path string, fail func(string, ...any)) *yaml.Node {
	if i, err := strconv.Atoi(key); err == nil {
		if i < 0 || i >= len(n.Content) {
			fail("index %d is out of range: %s has %d elements", i, path, len(n.Content))
		}
		return n.Content[i]
	}
	var names []string
	for _, e := range n.Content {
		e := d.resolve(e, path)
		if e.Kind != yaml.MappingNode {
			continue
		}
		for k := 0; k+1 < len(e.Content); k += 2 {
			if e.Content[k].Value == "name" {
				if e.Content[k+1].Value == key {
					return e
				}
				names = append(names, e.Content[k+1].Value)
			}
		}
	}
	if len(names) == 0 {
		fail("%s has no element named %q; address its elements by index (0 to %d)", path, key, len(n.Content)-1)
	}
	fail("%s has no element named %q; names: %s (or an index)", path, key, strings.Join(names, ", "))
	return nil
}

// mark records every node of the tree v as coming from override o.
func mark(origin map[*yaml.Node]string, v *yaml.Node, o string) {
	origin[v] = o
	for _, c := range v.Content {
		mark(origin, c, o)
	}
}
