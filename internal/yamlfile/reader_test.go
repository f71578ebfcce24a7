package yamlfile

import (
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"
)

func root(t *testing.T, doc string) *yaml.Node {
	t.Helper()
	n, err := Decode("t.yaml", []byte(doc), "test file", "a test file needs a")
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// TestReaderFields: unknown and repeated keys are reported at their own
// line with the field path; the known keys come back.
func TestReaderFields(t *testing.T) {
	r := &Reader{File: "t.yaml"}
	f, ok := r.Fields(root(t, "a: 1\nb: x\nc: 2\na: 3\n"), "top", "a", "b")
	if !ok || len(f) != 2 || f["b"].Value != "x" {
		t.Fatalf("fields %v, %v", f, ok)
	}
	got := r.Errors().Error()
	for _, want := range []string{`t.yaml:3: top.c: unknown field "c"; allowed here: a, b`, "t.yaml:4: top.a: field given twice (first on line 1); keep one"} {
		if !strings.Contains(got, want) {
			t.Errorf("errors %q lack %q", got, want)
		}
	}
	if _, ok := r.Fields(root(t, "[1, 2]\n"), "top", "a"); ok {
		t.Error("a list accepted as a mapping")
	}
}

// TestReaderValues: Str and Number accept what they read and name the
// node's kind when they refuse.
func TestReaderValues(t *testing.T) {
	cases := []struct {
		doc  string
		num  bool
		want string // "" accepted, else a part of the message
	}{
		{"x: 2.5\n", true, ""},
		{"x: .inf\n", true, ".inf is not a finite number"},
		{"x: 3 kN\n", true, `expected a plain number (no unit), found the scalar "3 kN"`},
		{"x: [1]\n", true, "expected a number, found a list"},
		{"x: text\n", false, ""},
		{"x:\n", false, "expected a text value, found an empty value"},
		{"x: ' '\n", false, "must not be empty"},
	}
	for _, c := range cases {
		r := &Reader{File: "t.yaml"}
		n := root(t, c.doc).Content[1]
		if c.num {
			r.Number(n, "x")
		} else {
			r.Str(n, "x")
		}
		got := ""
		if errs := r.Errors(); len(errs) > 0 {
			got = errs.Error()
		}
		if (c.want == "") != (got == "") || !strings.Contains(got, c.want) {
			t.Errorf("%q: errors %q, want %q", c.doc, got, c.want)
		}
	}
}

// TestReaderMax: past Max problems one note says there are more.
func TestReaderMax(t *testing.T) {
	r := &Reader{File: "t.yaml", Max: 3}
	for i := 1; i <= 10; i++ {
		r.ErrorAt(i, "f", "problem %d", i)
	}
	errs := r.Errors()
	if len(errs) != 4 || errs[3].Msg != "too many errors; fix these first" || errs[2].Msg != "problem 3" {
		t.Errorf("errors %v", errs)
	}
}

// TestDecodeLines: every problem is at a 1-based line (yaml.v3 counts the
// parser's lines from 0, the scanner's from 1).
func TestDecodeLines(t *testing.T) {
	for _, c := range []struct{ doc, want string }{
		{"a:\n  - 1\n  b: 2\n", "t.yaml:2: YAML syntax: did not find expected '-' indicator"},
		{"a: [1, 2\nb: 3\n", "t.yaml:2: YAML syntax: did not find expected ',' or ']'"},
		{"a: 'x\n", "t.yaml:2: YAML syntax: found unexpected end of stream"},
		{"a: 1\n---\nb: 2\n", "t.yaml:2: YAML syntax: a second YAML document (---) follows; a test file holds one"},
		{"", "t.yaml: file is empty; a test file needs a"},
	} {
		_, err := Decode("t.yaml", []byte(c.doc), "test file", "a test file needs a")
		if err == nil || !strings.HasPrefix(err.Error(), c.want) {
			t.Errorf("%q: error %v, want %q", c.doc, err, c.want)
		}
	}
}
