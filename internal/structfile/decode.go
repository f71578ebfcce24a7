package structfile

import (
	"errors"
	"fmt"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/units"
	"trussmonitor/internal/yamlfile"
)

// reader walks a structure file's node tree (see yamlfile.Reader) with
// the file's default units.
type reader struct {
	yamlfile.Reader
	units map[units.Dimension]string // default unit per dimension
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
	s, ok := r.Str(n, field)
	if !ok {
		return "", false
	}
	if !validID(s) {
		r.Errorf(n, field, "%q is not a valid id: use letters, digits, '_', '-' and '.', starting with a letter or digit (at most 100 characters)", yamlfile.Truncate(s))
		return "", false
	}
	return s, true
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
	if n.Kind != yaml.ScalarNode || yamlfile.IsNull(n) {
		r.Errorf(n, field, "expected a quantity of %s such as \"%s\", found %s", dim, example(dim), yamlfile.KindName(n))
		return 0, false
	}
	def := r.units[dim]
	var v float64
	var err error
	switch n.ShortTag() {
	case "!!int", "!!float":
		var f float64
		if derr := n.Decode(&f); derr != nil {
			r.Errorf(n, field, "expected a number: %v", derr)
			return 0, false
		}
		v, err = units.FromNumber(f, dim, def)
	case "!!str":
		v, err = units.Parse(n.Value, dim, def)
	default:
		r.Errorf(n, field, "expected a quantity of %s such as \"%s\", found %s", dim, example(dim), yamlfile.KindName(n))
		return 0, false
	}
	if err != nil {
		hint := ""
		if errors.Is(err, units.ErrMissingUnit) {
			hint = fmt.Sprintf("or declare a default under units: %s", unitKeys[dim])
		}
		r.Wrap(n, field, err, hint)
		return 0, false
	}
	return v, true
}

// positiveQuantity is quantity for a value that must be positive; what
// names it in the message.
func (r *reader) positiveQuantity(n *yaml.Node, field string, dim units.Dimension, what string) (float64, bool) {
	v, ok := r.quantity(n, field, dim)
	if ok && !(v > 0) {
		r.Errorf(n, field, "%s must be positive, got %s", what, n.Value)
		return v, false
	}
	return v, ok
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
		r.Errorf(n, field, "expected true or false, found %s", yamlfile.KindName(n))
		return false, false
	}
	var b bool
	if err := n.Decode(&b); err != nil {
		r.Errorf(n, field, "expected true or false: %v", err)
		return false, false
	}
	return b, true
}

// seq returns the items of a list.
func (r *reader) seq(n *yaml.Node, field string) ([]*yaml.Node, bool) {
	if n.Kind != yaml.SequenceNode {
		r.Errorf(n, field, "expected a list, found %s", yamlfile.KindName(n))
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
		r.Errorf(n, field, "list is empty")
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
		r.Errorf(n, "", "nesting deeper than 64 levels; a structure file needs no more than 5")
		return
	}
	switch n.Kind {
	case yaml.AliasNode:
		r.Errorf(n, "", "YAML aliases (*%s) are not accepted in structure files; write the value out", yamlfile.Truncate(n.Value))
		return
	case yaml.MappingNode:
		for i := 0; i+1 < len(n.Content); i += 2 {
			if n.Content[i].Kind == yaml.ScalarNode && n.Content[i].Value == "<<" && n.Content[i].Tag == "!!merge" {
				r.Errorf(n.Content[i], "", "YAML merge keys (<<) are not accepted in structure files; write the fields out")
			}
		}
	}
	for _, c := range n.Content {
		r.checkAliases(c, depth+1)
	}
}
