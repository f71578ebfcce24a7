package structfile

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/units"
)

// reader walks a YAML node tree, collecting errors with file, line and
// field instead of stopping at the first one.
type reader struct {
	file  string
	errs  ErrorList
	units map[units.Dimension]string // default unit per dimension
}

// errorf records a problem at node n (its line) for field.
func (r *reader) errorf(n *yaml.Node, field, format string, args ...any) {
	line := 0
	if n != nil {
		line = n.Line
	}
	r.errs = append(r.errs, &Error{File: r.file, Line: line, Field: field, Msg: fmt.Sprintf(format, args...)})
}

// errorAt records a problem at an explicit line.
func (r *reader) errorAt(line int, field, format string, args ...any) {
	r.errs = append(r.errs, &Error{File: r.file, Line: line, Field: field, Msg: fmt.Sprintf(format, args...)})
}

// wrap records a problem caused by err.
func (r *reader) wrap(n *yaml.Node, field string, err error, hint string) {
	msg := err.Error()
	if hint != "" {
		msg += "; " + hint
	}
	r.errs = append(r.errs, &Error{File: r.file, Line: n.Line, Field: field, Msg: msg, Err: err})
}

// kindName names a YAML node kind for messages.
func kindName(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		if n.ShortTag() == "!!null" {
			return "an empty value"
		}
		return fmt.Sprintf("the scalar %q", truncate(n.Value))
	case yaml.AliasNode:
		return "an alias"
	}
	return "an unexpected node"
}

func truncate(s string) string {
	if len(s) > 40 {
		return s[:40] + "..."
	}
	return s
}

// fields checks that n is a mapping with string keys from allowed, each at
// most once, and returns the value node per key. Unknown and duplicate keys
// are reported; ok is false when n is not a mapping at all.
func (r *reader) fields(n *yaml.Node, field string, allowed ...string) (map[string]*yaml.Node, bool) {
	if n.Kind != yaml.MappingNode {
		r.errorf(n, field, "expected a mapping (key: value lines), found %s", kindName(n))
		return nil, false
	}
	out := make(map[string]*yaml.Node, len(n.Content)/2)
	keyLine := make(map[string]int, len(n.Content)/2)
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		if k.Kind != yaml.ScalarNode {
			r.errorf(k, field, "expected a field name, found %s", kindName(k))
			continue
		}
		name := k.Value
		if !contains(allowed, name) {
			r.errorf(k, join(field, name), "unknown field %q; allowed here: %s", truncate(name), strings.Join(allowed, ", "))
			continue
		}
		if l, dup := keyLine[name]; dup {
			r.errorf(k, join(field, name), "field given twice (first on line %d); keep one", l)
			continue
		}
		keyLine[name] = k.Line
		out[name] = v
	}
	return out, true
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// join builds a field path.
func join(parent, child string) string {
	if parent == "" {
		return child
	}
	return parent + "." + child
}

// need returns the value of a required key or reports it missing.
func (r *reader) need(m map[string]*yaml.Node, parent *yaml.Node, field, key string) (*yaml.Node, bool) {
	v, ok := m[key]
	if !ok {
		r.errorf(parent, join(field, key), "required field is missing")
		return nil, false
	}
	return v, true
}

// isNull reports an explicitly empty value ("key:" or "key: null").
func isNull(n *yaml.Node) bool {
	return n.Kind == yaml.ScalarNode && n.ShortTag() == "!!null"
}

// str reads a non-empty string scalar.
func (r *reader) str(n *yaml.Node, field string) (string, bool) {
	if n.Kind != yaml.ScalarNode || isNull(n) {
		r.errorf(n, field, "expected a text value, found %s", kindName(n))
		return "", false
	}
	if strings.TrimSpace(n.Value) == "" {
		r.errorf(n, field, "must not be empty")
		return "", false
	}
	return n.Value, true
}

// validID reports whether s is usable as an id: letters, digits, '_', '-'
// and '.', starting with a letter or digit (ids appear in MQTT topics and
// metric labels).
func validID(s string) bool {
	if s == "" || len(s) > 100 {
		return false
	}
	for i, c := range s {
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9':
		case (c == '_' || c == '-' || c == '.') && i > 0:
		default:
			return false
		}
	}
	return true
}

// id reads an identifier.
func (r *reader) id(n *yaml.Node, field string) (string, bool) {
	s, ok := r.str(n, field)
	if !ok {
		return "", false
	}
	if !validID(s) {
		r.errorf(n, field, "%q is not a valid id: use letters, digits, '_', '-' and '.', starting with a letter or digit (at most 100 characters)", truncate(s))
		return "", false
	}
	return s, true
}

// number reads a plain dimensionless number (factor, vector component).
func (r *reader) number(n *yaml.Node, field string) (float64, bool) {
	if n.Kind != yaml.ScalarNode {
		r.errorf(n, field, "expected a number, found %s", kindName(n))
		return 0, false
	}
	tag := n.ShortTag()
	if tag != "!!int" && tag != "!!float" {
		r.errorf(n, field, "expected a plain number (no unit), found %s", kindName(n))
		return 0, false
	}
	var v float64
	if err := n.Decode(&v); err != nil {
		r.errorf(n, field, "expected a number: %v", err)
		return 0, false
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		r.errorf(n, field, "%s is not a finite number", n.Value)
		return 0, false
	}
	return v, true
}

// unitKeys maps each dimension to its key in the units block.
var unitKeys = map[units.Dimension]string{
	units.Length:             "length",
	units.Force:              "force",
	units.Stress:             "stress",
	units.Area:               "area",
	units.TemperatureChange:  "temperature",
	units.ThermalCoefficient: "thermal_coefficient",
	units.Density:            "density",
	units.Stiffness:          "stiffness",
	units.SecondMoment:       "second_moment",
}

// quantity reads a number with a unit (or a bare number taking the declared
// default unit) and returns it in SI.
func (r *reader) quantity(n *yaml.Node, field string, dim units.Dimension) (float64, bool) {
	if n.Kind != yaml.ScalarNode || isNull(n) {
		r.errorf(n, field, "expected a quantity of %s such as \"%s\", found %s", dim, example(dim), kindName(n))
		return 0, false
	}
	def := r.units[dim]
	var v float64
	var err error
	switch n.ShortTag() {
	case "!!int", "!!float":
		var f float64
		if derr := n.Decode(&f); derr != nil {
			r.errorf(n, field, "expected a number: %v", derr)
			return 0, false
		}
		v, err = units.FromNumber(f, dim, def)
	case "!!str":
		v, err = units.Parse(n.Value, dim, def)
	default:
		r.errorf(n, field, "expected a quantity of %s such as \"%s\", found %s", dim, example(dim), kindName(n))
		return 0, false
	}
	if err != nil {
		hint := ""
		if errors.Is(err, units.ErrMissingUnit) {
			hint = fmt.Sprintf("or declare a default under units: %s", unitKeys[dim])
		}
		r.wrap(n, field, err, hint)
		return 0, false
	}
	return v, true
}

// example gives a sample quantity of a dimension for messages.
func example(dim units.Dimension) string {
	switch dim {
	case units.Length:
		return "3.0 m"
	case units.Force:
		return "-20 kN"
	case units.Stress:
		return "210000 N/mm2"
	case units.Area:
		return "7400 mm2"
	case units.TemperatureChange:
		return "20 K"
	case units.ThermalCoefficient:
		return "12e-6 1/K"
	case units.Density:
		return "7850 kg/m3"
	case units.Stiffness:
		return "20 MN/m"
	case units.SecondMoment:
		return "2060 cm4"
	}
	return "1 " + dim.SI()
}

// boolean reads true or false.
func (r *reader) boolean(n *yaml.Node, field string) (bool, bool) {
	if n.Kind != yaml.ScalarNode || n.ShortTag() != "!!bool" {
		r.errorf(n, field, "expected true or false, found %s", kindName(n))
		return false, false
	}
	var b bool
	if err := n.Decode(&b); err != nil {
		r.errorf(n, field, "expected true or false: %v", err)
		return false, false
	}
	return b, true
}

// seq returns the items of a list.
func (r *reader) seq(n *yaml.Node, field string) ([]*yaml.Node, bool) {
	if n.Kind != yaml.SequenceNode {
		r.errorf(n, field, "expected a list, found %s", kindName(n))
		return nil, false
	}
	return n.Content, true
}

// idList reads a list of ids; a single scalar counts as a one-item list.
func (r *reader) idList(n *yaml.Node, field string) ([]string, []*yaml.Node, bool) {
	items := []*yaml.Node{n}
	if n.Kind == yaml.SequenceNode {
		items = n.Content
	}
	if len(items) == 0 {
		r.errorf(n, field, "list is empty")
		return nil, nil, false
	}
	ids := make([]string, 0, len(items))
	nodes := make([]*yaml.Node, 0, len(items))
	ok := true
	for i, it := range items {
		f := field
		if n.Kind == yaml.SequenceNode {
			f = fmt.Sprintf("%s[%d]", field, i)
		}
		s, good := r.id(it, f)
		if !good {
			ok = false
			continue
		}
		ids = append(ids, s)
		nodes = append(nodes, it)
	}
	return ids, nodes, ok
}

// checkAliases rejects YAML aliases anywhere in the tree: the schema has
// no use for them, and refusing them bounds the work on hostile input.
func (r *reader) checkAliases(n *yaml.Node, depth int) {
	if depth > 64 {
		r.errorf(n, "", "nesting deeper than 64 levels; a structure file needs no more than 5")
		return
	}
	switch n.Kind {
	case yaml.AliasNode:
		r.errorf(n, "", "YAML aliases (*%s) are not accepted in structure files; write the value out", truncate(n.Value))
		return
	case yaml.MappingNode:
		for i := 0; i+1 < len(n.Content); i += 2 {
			if n.Content[i].Kind == yaml.ScalarNode && n.Content[i].Value == "<<" && n.Content[i].Tag == "!!merge" {
				r.errorf(n.Content[i], "", "YAML merge keys (<<) are not accepted in structure files; write the fields out")
			}
		}
	}
	for _, c := range n.Content {
		r.checkAliases(c, depth+1)
	}
}

// sortErrors orders the problems by line (stable, so problems on one line
// keep the order they were found in).
func (l ErrorList) sort() {
	sort.SliceStable(l, func(i, j int) bool { return l[i].Line < l[j].Line })
}
