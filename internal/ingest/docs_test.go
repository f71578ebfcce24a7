package ingest

import (
	"go/ast"
	"go/parser"
	"go/token"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// reasonConstants collects the string constants named Reason... of the
// packages in dirs (test files left out): the dead-letter reasons the code
// can give, whatever they are (ingest's own, the SenML decoder's and the
// sensor map's).
func reasonConstants(t *testing.T, dirs ...string) []string {
	t.Helper()
	seen := map[string]bool{}
	for _, dir := range dirs {
		entries, err := os.ReadDir(dir)
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range entries {
			if e.IsDir() || !strings.HasSuffix(e.Name(), ".go") || strings.HasSuffix(e.Name(), "_test.go") {
				continue
			}
			f, err := parser.ParseFile(token.NewFileSet(), filepath.Join(dir, e.Name()), nil, 0)
			if err != nil {
				t.Fatal(err)
			}
			{
				for _, decl := range f.Decls {
					gd, ok := decl.(*ast.GenDecl)
					if !ok || gd.Tok != token.CONST {
						continue
					}
					for _, spec := range gd.Specs {
						vs := spec.(*ast.ValueSpec)
						for i, name := range vs.Names {
							if !strings.HasPrefix(name.Name, "Reason") || i >= len(vs.Values) {
								continue
							}
							if lit, ok := vs.Values[i].(*ast.BasicLit); ok && lit.Kind == token.STRING {
								v, err := strconv.Unquote(lit.Value)
								if err != nil {
									t.Fatal(err)
								}
								seen[v] = true
							}
						}
					}
				}
			}
		}
	}
	out := make([]string, 0, len(seen))
	for v := range seen {
		out = append(out, v)
	}
	slices.Sort(out)
	return out
}

// TestReadmeDeadLetterReasons: the README's table of dead-letter reasons
// lists exactly the reasons the code can give, and states the payload limit
// of the default configuration.
func TestReadmeDeadLetterReasons(t *testing.T) {
	data, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	text := string(data)
	start := strings.Index(text, "| reason | refused because |")
	if start < 0 {
		t.Fatal("README.md has no table of dead-letter reasons (| reason | refused because |)")
	}
	table := text[start:]
	if end := strings.Index(table, "\n\n"); end >= 0 {
		table = table[:end]
	}
	var documented []string
	for _, m := range regexp.MustCompile("(?m)^\\| `([a-z_]+)` \\|").FindAllStringSubmatch(table, -1) {
		documented = append(documented, m[1])
	}
	slices.Sort(documented)
	code := reasonConstants(t, ".", "../senml", "../sensors")
	if !slices.Equal(documented, code) {
		t.Errorf("README reasons %v\ncode reasons   %v", documented, code)
	}
	if !strings.Contains(text, "64 KiB") {
		t.Error("README does not state the 64 KiB payload limit")
	}
	if strings.Contains(text, "is relative to the receiver's clock, negative") {
		t.Error("README still says a relative time is accepted")
	}
}
