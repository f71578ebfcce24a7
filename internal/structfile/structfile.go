// Package structfile reads structure files: YAML descriptions of a
// pin-jointed truss (nodes, materials, sections, members, groups, supports,
// load patterns and load cases) in which every dimensional number carries a
// unit or inherits a declared default. It resolves units to SI, checks
// references and values, and produces a *model.Structure.
//
// Problems are collected, not returned one at a time: Parse and LoadFile
// return an ErrorList whose entries name the file, the line and the field.
// The format is documented in docs/structure-file.md.
package structfile

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"regexp"
	"strconv"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/model"
)

// MaxFileSize is the largest structure file accepted (64 MiB, room for a
// grid of several hundred thousand members).
const MaxFileSize = 64 << 20

// LoadFile reads and checks the structure file at path.
func LoadFile(path string) (*model.Structure, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("structure file: %w", err)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, MaxFileSize+1))
	if err != nil {
		return nil, fmt.Errorf("structure file %s: %w", path, err)
	}
	return Parse(path, data)
}

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

// Parse reads and checks a structure file given as bytes; file names it in
// messages and is stored in Structure.File. Hash is the hex SHA-256 of data.
// On any problem it returns nil and an ErrorList.
func Parse(file string, data []byte) (s *model.Structure, err error) {
	if len(data) > MaxFileSize {
		return nil, ErrorList{{File: file, Msg: fmt.Sprintf("file is larger than %d bytes; a structure file this big is not supported", MaxFileSize)}}
	}
	root, perr := parseYAML(data)
	if perr != nil {
		line := 0
		msg := perr.Error()
		if m := yamlLine.FindStringSubmatch(msg); m != nil {
			line, _ = strconv.Atoi(m[1])
			if parserProblems[m[2]] {
				// yaml.v3 reports parser (not scanner) errors with a
				// 0-based line; make it 1-based like everything else.
				line++
				msg = "YAML syntax: " + m[2] + " (the line is where the enclosing list or mapping starts; the mistake is there or further down)"
			} else {
				msg = "YAML syntax: " + m[2]
			}
		}
		return nil, ErrorList{{File: file, Line: line, Msg: msg, Err: perr}}
	}
	r := &reader{file: file}
	st := r.structure(root)
	if len(r.errs) > 0 {
		r.errs.sort()
		return nil, r.errs
	}
	sum := sha256.Sum256(data)
	st.File = file
	st.Hash = hex.EncodeToString(sum[:])
	return st, nil
}

// parseYAML decodes exactly one YAML document into a node tree. The YAML
// library is not expected to panic, but a structure file is input and must
// never crash the service, so a panic is turned into an error here.
func parseYAML(data []byte) (root *yaml.Node, err error) {
	defer func() {
		if p := recover(); p != nil {
			root, err = nil, fmt.Errorf("YAML parser failed on this input: %v", p)
		}
	}()
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var doc yaml.Node
	if err := dec.Decode(&doc); err != nil {
		if errors.Is(err, io.EOF) {
			return nil, errors.New("file is empty; a structure file declares at least name, dimension and nodes (see docs/structure-file.md)")
		}
		return nil, err
	}
	var extra yaml.Node
	if err := dec.Decode(&extra); !errors.Is(err, io.EOF) {
		if err != nil {
			return nil, err
		}
		return nil, fmt.Errorf("yaml: line %d: a second YAML document (---) follows; a structure file holds one", extra.Line)
	}
	if doc.Kind != yaml.DocumentNode || len(doc.Content) != 1 {
		return nil, errors.New("file holds no YAML document")
	}
	return doc.Content[0], nil
}
