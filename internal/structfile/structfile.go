// Package structfile reads structure files: YAML descriptions of a
// pin-jointed truss (nodes, materials, sections, members, groups, supports,
// load patterns and load cases) in which every dimensional number carries a
// unit or inherits a declared default. It resolves units to SI, checks
// references and values, and produces a *model.Structure.
//
// Problems are collected, not returned one at a time: Parse and LoadFile
// return a yamlfile.ErrorList whose entries name the file, the line and the field.
// The format is documented in docs/structure-file.md.
package structfile

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"os"

	"trussmonitor/internal/model"
	"trussmonitor/internal/yamlfile"
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

// Parse reads and checks a structure file given as bytes; file names it in
// messages and is stored in Structure.File. Hash is the hex SHA-256 of data.
// On any problem it returns nil and a yamlfile.ErrorList.
func Parse(file string, data []byte) (s *model.Structure, err error) {
	if len(data) > MaxFileSize {
		return nil, yamlfile.ErrorList{{File: file, Msg: fmt.Sprintf("file is larger than %d bytes; a structure file this big is not supported", MaxFileSize)}}
	}
	root, err := yamlfile.Decode(file, data, "structure file", "a structure file declares at least name, dimension and nodes (see docs/structure-file.md)")
	if err != nil {
		return nil, err
	}
	r := &reader{Reader: yamlfile.Reader{File: file}}
	st := r.structure(root)
	if errs := r.Errors(); len(errs) > 0 {
		errs.Sort()
		return nil, errs
	}
	sum := sha256.Sum256(data)
	st.File = file
	st.Hash = hex.EncodeToString(sum[:])
	return st, nil
}
