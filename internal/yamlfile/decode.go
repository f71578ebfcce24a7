// Package yamlfile reads the project's YAML files (structure files and
// sensor maps) with line numbers: Decode turns the bytes into one node tree
// without ever panicking, and a Reader walks the tree collecting every
// problem as an *Error that names file, line and field.
package yamlfile

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"regexp"
	"strconv"

	"go.yaml.in/yaml/v3"
)

var yamlLine = regexp.MustCompile(`^yaml: line (\d+): (.*)$`)

// parserProblems are the messages of the YAML parser stage (as opposed to
// the scanner), whose line yaml.v3 reports counting from 0.
var parserProblems = map[string]bool{
	"did not find expected key":              true,
	"did not find expected <document start>": true,
	"did not find expected node content":     true,
	"did not find expected ',' or '}'":       true,
	"did not find expected ',' or ']'":       true,
	"did not find expected '-' indicator":    true,
	"found undefined tag handle":             true,
	"found duplicate %YAML directive":        true,
	"found incompatible YAML document":       true,
	"found duplicate %TAG directive":         true,
}

// Decode decodes data, which must hold exactly one YAML document, into its
// root node. kind names the file's format in messages ("structure file",
// "sensor map"); empty says what an empty file lacks. On failure the error
// is an ErrorList of one *Error with the file, the 1-based line of the
// YAML syntax problem (yaml.v3 counts the parser's lines from 0) and what
// is wrong.
func Decode(file string, data []byte, kind, empty string) (*yaml.Node, error) {
	root, err := decode(data, kind, empty)
	if err == nil {
		return root, nil
	}
	line := 0
	msg := err.Error()
	if m := yamlLine.FindStringSubmatch(msg); m != nil {
		line, _ = strconv.Atoi(m[1])
		if parserProblems[m[2]] {
			line++
			msg = "YAML syntax: " + m[2] + " (the line is where the enclosing list or mapping starts; the mistake is there or further down)"
		} else {
			msg = "YAML syntax: " + m[2]
		}
	}
	return nil, ErrorList{{File: file, Line: line, Msg: msg, Err: err}}
}

// decode decodes exactly one YAML document into a node tree. The YAML
// library is not expected to panic, but these files are input and must
// never crash the service, so a panic is turned into an error here.
func decode(data []byte, kind, empty string) (root *yaml.Node, err error) {
	defer func() {
		if p := recover(); p != nil {
			root, err = nil, fmt.Errorf("YAML parser failed on this input: %v", p)
		}
	}()
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var doc yaml.Node
	if err := dec.Decode(&doc); err != nil {
		if errors.Is(err, io.EOF) {
			return nil, fmt.Errorf("file is empty; %s", empty)
		}
		return nil, err
	}
	var extra yaml.Node
	if err := dec.Decode(&extra); !errors.Is(err, io.EOF) {
		if err != nil {
			return nil, err
		}
		return nil, fmt.Errorf("yaml: line %d: a second YAML document (---) follows; a %s holds one", extra.Line, kind)
	}
	if doc.Kind != yaml.DocumentNode || len(doc.Content) != 1 {
		return nil, errors.New("file holds no YAML document")
	}
	return doc.Content[0], nil
}
