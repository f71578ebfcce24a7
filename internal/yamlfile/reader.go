package yamlfile

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"go.yaml.in/yaml/v3"
)

// Reader walks a YAML node tree, collecting problems with file, line and
// field instead of stopping at the first one.
type Reader struct {
	// File names the source in every Error.
	File string
	// Max bounds how many problems are kept (0: no bound); the next one
	// is replaced by a note that there are more.
	Max  int
	errs ErrorList
}

// Errors returns the problems found so far, in the order found.
func (r *Reader) Errors() ErrorList { return r.errs }

func (r *Reader) add(e *Error) {
	if r.Max > 0 && len(r.errs) >= r.Max {
		if len(r.errs) == r.Max {
			r.errs = append(r.errs, &Error{File: r.File, Line: e.Line, Msg: "too many errors; fix these first"})
		}
		return
	}
	r.errs = append(r.errs, e)
}

// Errorf records a problem at node n (its line) for field.
func (r *Reader) Errorf(n *yaml.Node, field, format string, args ...any) {
	line := 0
	if n != nil {
		line = n.Line
	}
	r.ErrorAt(line, field, format, args...)
}

// ErrorAt records a problem at an explicit line (0: unknown).
func (r *Reader) ErrorAt(line int, field, format string, args ...any) {
	r.add(&Error{File: r.File, Line: line, Field: field, Msg: fmt.Sprintf(format, args...)})
}

// Wrap records a problem at node n caused by err, with an optional hint of
// what to do.
func (r *Reader) Wrap(n *yaml.Node, field string, err error, hint string) {
	msg := err.Error()
	if hint != "" {
		msg += "; " + hint
	}
	r.add(&Error{File: r.File, Line: n.Line, Field: field, Msg: msg, Err: err})
}

// KindName names a YAML node kind for messages.
func KindName(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		if IsNull(n) {
			return "an empty value"
		}
		return fmt.Sprintf("the scalar %q", Truncate(n.Value))
	case yaml.AliasNode:
		return "an alias"
	}
	return "an unexpected node"
}

// Truncate shortens a value quoted in a message to 40 bytes.
func Truncate(s string) string {
	if len(s) > 40 {
		return s[:40] + "..."
	}
	return s
}

// Join builds a field path: parent.child, or child at the top (or parent
// for an empty child).
func Join(parent, child string) string {
	switch {
	case parent == "":
		return child
	case child == "":
		return parent
	}
	return parent + "." + child
}

// IsNull reports an explicitly empty value ("key:" or "key: null").
func IsNull(n *yaml.Node) bool {
	return n.Kind == yaml.ScalarNode && n.ShortTag() == "!!null"
}

// Fields checks that n is a mapping with string keys from allowed, each at
// most once, and returns the value node per key. Unknown and duplicate keys
// are reported; ok is false when n is not a mapping at all.
func (r *Reader) Fields(n *yaml.Node, field string, allowed ...string) (map[string]*yaml.Node, bool) {
	if n.Kind != yaml.MappingNode {
		r.Errorf(n, field, "expected a mapping (key: value lines), found %s", KindName(n))
		return nil, false
	}
	out := make(map[string]*yaml.Node, len(n.Content)/2)
	keyLine := make(map[string]int, len(n.Content)/2)
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		if k.Kind != yaml.ScalarNode {
			r.Errorf(k, field, "expected a field name, found %s", KindName(k))
			continue
		}
		name := k.Value
		if !slices.Contains(allowed, name) {
			r.Errorf(k, Join(field, name), "unknown field %q; allowed here: %s", Truncate(name), strings.Join(allowed, ", "))
			continue
		}
		if l, dup := keyLine[name]; dup {
			r.Errorf(k, Join(field, name), "field given twice (first on line %d); keep one", l)
			continue
		}
		keyLine[name] = k.Line
		out[name] = v
	}
	return out, true
}

// Need returns the value of a required key of the mapping m (read from
// parent) or reports it missing.
func (r *Reader) Need(m map[string]*yaml.Node, parent *yaml.Node, field, key string) (*yaml.Node, bool) {
	v, ok := m[key]
	if !ok {
		r.Errorf(parent, Join(field, key), "required field is missing")
		return nil, false
	}
	return v, true
}

// Str reads a non-empty text scalar.
func (r *Reader) Str(n *yaml.Node, field string) (string, bool) {
	if n.Kind != yaml.ScalarNode || IsNull(n) {
		r.Errorf(n, field, "expected a text value, found %s", KindName(n))
		return "", false
	}
	if strings.TrimSpace(n.Value) == "" {
		r.Errorf(n, field, "must not be empty")
		return "", false
	}
	return n.Value, true
}

// Number reads a plain finite number (no unit).
func (r *Reader) Number(n *yaml.Node, field string) (float64, bool) {
	if n.Kind != yaml.ScalarNode {
		r.Errorf(n, field, "expected a number, found %s", KindName(n))
		return 0, false
	}
	tag := n.ShortTag()
	if tag != "!!int" && tag != "!!float" {
		r.Errorf(n, field, "expected a plain number (no unit), found %s", KindName(n))
		return 0, false
	}
	var v float64
	if err := n.Decode(&v); err != nil {
		r.Errorf(n, field, "expected a number: %v", err)
		return 0, false
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		r.Errorf(n, field, "%s is not a finite number", n.Value)
		return 0, false
	}
	return v, true
}
