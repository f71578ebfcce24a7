package structfile

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"trussmonitor/internal/units"
	"trussmonitor/internal/yamlfile"
)

// baseDoc is a small valid plane truss; the invalid cases below replace one
// of its lines (numbered in the comments) to make exactly one thing wrong.
const baseDoc = `name: t
dimension: 2
units: {length: m, force: kN}
nodes:
  - {id: A, at: [0, 0]}
  - {id: B, at: [4, 0]}
  - {id: C, at: [4, 3]}
materials:
  - {id: steel, modulus: 200 GPa, thermal_coefficient: 12e-6 1/K, density: 7850 kg/m3}
sections:
  - {id: s, area: 1000 mm2, material: steel}
groups:
  - {name: g}
members:
  - {id: AB, from: A, to: B, section: s, groups: [g]}
  - {id: BC, from: B, to: C, section: s}
  - {id: AC, from: A, to: C, section: s}
supports:
  - {node: A, fix: [x, y]}
  - {node: B, fix: [y]}
patterns:
  - {name: p, forces: [{node: C, y: -10}]}
  - {name: t, temperatures: [{groups: [g], change: 5 K}], settlements: [{node: B, y: -5 mm}]}
cases:
  - {name: c, combine: {p: 1, t: 0.5}}
`

// replaceLine returns baseDoc with line n (1-based) replaced by text.
func replaceLine(n int, text string) string {
	lines := strings.Split(baseDoc, "\n")
	lines[n-1] = text
	return strings.Join(lines, "\n")
}

func TestBaseDocIsValid(t *testing.T) {
	s, err := Parse("base.yaml", []byte(baseDoc))
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Nodes) != 3 || len(s.Members) != 3 || len(s.Patterns) != 2 || len(s.Cases) != 1 {
		t.Fatalf("counts: %d nodes, %d members, %d patterns, %d cases", len(s.Nodes), len(s.Members), len(s.Patterns), len(s.Cases))
	}
	if got := s.Patterns[1].Settlements[0].D[1]; got != -0.005 {
		t.Errorf("settlement = %v m, want -0.005", got)
	}
	if got := s.Patterns[0].Forces[0].F[1]; got != -10000 {
		t.Errorf("force = %v N, want -10000 (bare number in the default unit kN)", got)
	}
}

// wantError checks that errs holds an error on line with field whose
// formatted text names file, line and field and contains msg.
func wantError(t *testing.T, err error, file string, line int, field, msg string) {
	t.Helper()
	if err == nil {
		t.Fatalf("accepted; want an error on line %d field %s: %s", line, field, msg)
	}
	var list yamlfile.ErrorList
	if !errors.As(err, &list) {
		t.Fatalf("error %T is not an yamlfile.ErrorList: %v", err, err)
	}
	prefix := fmt.Sprintf("%s:%d: %s: ", file, line, field)
	if field == "" {
		prefix = fmt.Sprintf("%s:%d: ", file, line)
	}
	if line == 0 {
		prefix = strings.Replace(prefix, ":0:", ":", 1)
	}
	for _, e := range list {
		text := e.Error()
		if strings.HasPrefix(text, prefix) && strings.Contains(text, msg) {
			if e.File != file || e.Line != line || e.Field != field {
				t.Errorf("fields of %q: File %q Line %d Field %q", text, e.File, e.Line, e.Field)
			}
			return
		}
	}
	t.Errorf("no error starting %q and containing %q; got:\n%v", prefix, msg, err)
}

func TestValidationErrors(t *testing.T) {
	tests := []struct {
		name    string
		line    int    // line of baseDoc to replace
		text    string // replacement
		errLine int
		field   string
		msg     string
	}{
		// references
		{"unknown node", 16, "  - {id: BC, from: B, to: X, section: s}", 16, "members[BC].to", `unknown node "X"`},
		{"unknown section", 16, "  - {id: BC, from: B, to: C, section: big}", 16, "members[BC].section", `unknown section "big"; declared sections: s`},
		{"unknown material", 11, "  - {id: s, area: 1000 mm2, material: iron}", 11, "sections[s].material", `unknown material "iron"`},
		{"unknown group on member", 15, "  - {id: AB, from: A, to: B, section: s, groups: [h]}", 15, "members[AB].groups", `unknown group "h"`},
		{"unknown group in temperature", 23, "  - {name: t, temperatures: [{groups: [h], change: 5 K}]}", 23, "patterns[t].temperatures[0].groups", `unknown group "h"`},
		{"unknown member in temperature", 23, "  - {name: t, temperatures: [{members: [ZZ], change: 5 K}]}", 23, "patterns[t].temperatures[0].members", `unknown member "ZZ"`},
		{"unknown member in group", 13, "  - {name: g, members: [ZZ]}", 13, "groups[g].members", `unknown member "ZZ"`},
		{"case names missing pattern", 25, "  - {name: c, combine: {p: 1, q: 2}}", 25, "cases[c].combine.q", `unknown pattern "q"; declared patterns: p, t`},
		{"load on nonexistent node", 22, "  - {name: p, forces: [{node: Q, y: -10}]}", 22, "patterns[p].forces[0].node", `load on unknown node "Q"`},
		{"support on nonexistent node", 20, "  - {node: Z, fix: [y]}", 20, "supports[Z].node", `unknown node "Z"`},
		{"settlement without support", 23, "  - {name: t, settlements: [{node: C, y: -5 mm}]}", 23, "patterns[t].settlements[0].node", `node "C" has no support`},
		{"settlement in a free direction", 23, "  - {name: t, settlements: [{node: B, x: 5 mm}]}", 23, "patterns[t].settlements[0].x", `node "B" is not fixed in x`},
		{"settlement along a normal of a fixed support", 23, "  - {name: t, settlements: [{node: B, normal: 5 mm}]}", 23, "patterns[t].settlements[0].normal", "is not an inclined roller"},

		// duplicates
		{"duplicate node", 6, "  - {id: A, at: [4, 0]}", 6, "nodes[A].id", `duplicate node id "A" (first declared on line 5)`},
		{"duplicate member", 17, "  - {id: BC, from: A, to: C, section: s}", 17, "members[BC].id", `duplicate member id "BC" (first declared on line 16)`},
		{"duplicate material", 10, "  - {id: steel, modulus: 1 GPa}\nsections:", 10, "materials[steel].id", `duplicate material id "steel"`},
		{"duplicate section", 12, "  - {id: s, area: 1 mm2, material: steel}\ngroups:", 12, "sections[s].id", `duplicate section id "s"`},
		{"duplicate group", 14, "  - {name: g}\nmembers:", 14, "groups[g].name", `duplicate group name "g"`},
		{"duplicate pattern", 23, "  - {name: p, self_weight: 1}", 23, "patterns[p].name", `duplicate pattern name "p"`},
		{"duplicate case", 26, "  - {name: c, combine: {p: 2}}", 26, "cases[c].name", `duplicate case name "c"`},
		{"duplicate support", 20, "  - {node: A, fix: [y]}", 20, "supports[A].node", `node "A" already has a support (line 19)`},
		{"duplicate field", 5, "  - {id: A, at: [0, 0], at: [1, 1]}", 5, "nodes[0].at", "field given twice"},
		{"pattern twice in a case", 25, "  - {name: c, combine: {p: 1, p: 2}}", 25, "cases[c].combine.p", "pattern listed twice"},
		{"member twice in a group", 13, "  - {name: g, members: [AB]}", 13, "groups[g].members", `member "AB" is already in group "g"`},

		// geometry
		{"coincident nodes", 7, "  - {id: C, at: [4, 0]}", 7, "nodes[C].at", `node "C" is at the same position as node "B" (line 6)`},
		{"zero-length member", 7, "  - {id: C, at: [4, 0]}", 16, "members[BC]", "member has zero length"},
		{"member on one node", 16, "  - {id: BC, from: B, to: B, section: s}", 16, "members[BC]", `member starts and ends at the same node "B"`},
		{"z coordinate in 2D", 5, "  - {id: A, at: [0, 0, 1]}", 5, "nodes[A].at", "a z coordinate in a 2D file"},
		{"z force in 2D", 22, "  - {name: p, forces: [{node: C, z: -10}]}", 22, "patterns[p].forces[0].z", "a z component in a 2D file"},
		{"z fixed in 2D", 19, "  - {node: A, fix: [x, z]}", 19, "supports[A].fix", "axis z in a 2D file"},
		{"two coordinates short", 5, "  - {id: A, at: [0]}", 5, "nodes[A].at", "expected 2 coordinates [x, y], found 1"},

		// units
		{"missing unit", 9, "  - {id: steel, modulus: 200}", 9, "materials[steel].modulus", "no default stress (force per area) unit is declared; write it with a unit (one of Pa, kPa, MPa, GPa, N/mm2, psi, ksi, psf); or declare a default under units: stress"},
		{"unknown unit", 9, "  - {id: steel, modulus: 200 GPascal}", 9, "materials[steel].modulus", `unknown unit "GPascal"`},
		{"unit of the wrong dimension", 11, "  - {id: s, area: 1000 mm, material: steel}", 11, "sections[s].area", `"mm" is a unit of length, expected an area unit`},
		{"unknown default unit", 3, "units: {length: m, force: kilonewton}", 3, "units.force", `unknown unit "kilonewton"`},
		{"default unit of the wrong dimension", 3, "units: {length: kN, force: kN}", 3, "units.length", `"kN" is a unit of force, expected a length unit`},
		{"unknown units key", 3, "units: {length: m, force: kN, pressure: kPa}", 3, "units.pressure", `unknown field "pressure"`},
		{"missing length unit", 3, "units: {force: kN}", 5, "nodes[A].at[0]", "no default length unit"},

		// values
		{"zero area", 11, "  - {id: s, area: 0 mm2, material: steel}", 11, "sections[s].area", "cross-section area must be positive"},
		{"negative area", 11, "  - {id: s, area: -5 cm2, material: steel}", 11, "sections[s].area", "cross-section area must be positive"},
		{"zero modulus", 9, "  - {id: steel, modulus: 0 GPa}", 9, "materials[steel].modulus", "modulus of elasticity must be positive"},
		{"negative modulus", 9, "  - {id: steel, modulus: -200 GPa}", 9, "materials[steel].modulus", "modulus of elasticity must be positive"},
		{"negative density", 9, "  - {id: steel, modulus: 200 GPa, density: -1 kg/m3}", 9, "materials[steel].density", "density must not be negative"},
		{"NaN coordinate", 5, "  - {id: A, at: [.nan, 0]}", 5, "nodes[A].at[0]", "not a finite number"},
		{"NaN in a string", 6, `  - {id: B, at: ["NaN m", 0]}`, 6, "nodes[B].at[0]", "not a finite number"},
		{"infinite modulus", 9, "  - {id: steel, modulus: .inf}", 9, "materials[steel].modulus", "not a finite number"},
		{"infinite factor", 25, "  - {name: c, combine: {p: .inf}}", 25, "cases[c].combine.p", "not a finite number"},
		{"overflowing value", 9, "  - {id: steel, modulus: 1e308 ksi}", 9, "materials[steel].modulus", "overflows"},
		{"negative spring", 20, "  - {node: B, fix: [y], spring: {x: -5 MN/m}}", 20, "supports[B].spring.x", "spring stiffness must be positive"},
		{"spring on a fixed axis", 20, "  - {node: B, fix: [y], spring: {y: 5 MN/m}}", 20, "supports[B].spring.y", "both fixed and on a spring"},
		{"spring in force units", 20, "  - {node: B, fix: [y], spring: {x: 5 MN}}", 20, "supports[B].spring.x", "expected a stiffness (force per length) unit"},
		{"zero normal", 20, "  - {node: B, normal: [0, 0]}", 20, "supports[B].normal", "zero length"},
		{"normal and fix", 20, "  - {node: B, fix: [y], normal: [0, 1]}", 20, "supports[B].normal", "cannot also fix axes"},
		{"unknown axis", 19, "  - {node: A, fix: [x, w]}", 19, "supports[A].fix", `unknown axis "w"`},
		{"support restrains nothing", 20, "  - {node: B}", 20, "supports[B]", "support restrains nothing"},
		{"dimension 4", 2, "dimension: 4", 2, "dimension", "must be 2 (plane truss, x and y) or 3"},
		{"bad id", 5, `  - {id: "A B", at: [0, 0]}`, 5, "nodes[0].id", `"A B" is not a valid id`},
		{"bad structure name", 1, "name: shm/roof", 1, "name", "is not a valid id"},
		{"unknown field", 5, "  - {id: A, at: [0, 0], mass: 3}", 5, "nodes[0].mass", `unknown field "mass"; allowed here: id, at`},
		{"unknown top-level field", 1, "name: t\nloads: []", 2, "loads", `unknown field "loads"`},
		{"missing required field", 11, "  - {id: s, material: steel}", 11, "sections[s].area", "required field is missing"},
		{"pattern without loads", 22, "  - {name: p}", 22, "patterns[p]", "pattern has no loads"},
		{"pattern with empty lists", 22, "  - {name: p, forces: [], self_weight: 0}", 22, "patterns[p]", "pattern has no loads"},
		{"parallel members", 17, "  - {id: AC, from: C, to: B, section: s}", 17, "members[AC]", `member joins the same nodes "C" and "B" as member "BC" (line 16)`},
		{"force without components", 22, "  - {name: p, forces: [{node: C}]}", 22, "patterns[p].forces[0]", "no force component given"},
		{"temperature without target", 23, "  - {name: t, temperatures: [{change: 5 K}]}", 23, "patterns[t].temperatures[0]", "give groups: or members:"},
		{"unknown is not a boolean", 22, "  - {name: p, unknown: maybe, forces: [{node: C, y: -10}]}", 22, "patterns[p].unknown", "expected true or false"},
		{"factor with a unit", 25, "  - {name: c, combine: {p: 1 kN}}", 25, "cases[c].combine.p", "expected a plain number (no unit)"},
		{"cases not a list", 25, "  {name: c}", 25, "cases", "expected a list, found a mapping"},
		{"empty case", 25, "  - {name: c, combine: {}}", 25, "cases[c].combine", "no patterns combined"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Parse("bad.yaml", []byte(replaceLine(tc.line, tc.text)))
			wantError(t, err, "bad.yaml", tc.errLine, tc.field, tc.msg)
		})
	}
}

// TestInvalidFiles checks every file in testdata/invalid/: its first line is
// "# expect: LINE FIELD | MESSAGE" (FIELD "-" for none).
func TestInvalidFiles(t *testing.T) {
	files, err := filepath.Glob("../../testdata/invalid/*.yaml")
	if err != nil || len(files) == 0 {
		t.Fatalf("no invalid test files: %v", err)
	}
	for _, path := range files {
		t.Run(filepath.Base(path), func(t *testing.T) {
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			first, _, _ := strings.Cut(string(data), "\n")
			spec, ok := strings.CutPrefix(first, "# expect: ")
			if !ok {
				t.Fatalf("first line %q is not '# expect: LINE FIELD | MESSAGE'", first)
			}
			head, msg, _ := strings.Cut(spec, " | ")
			lineText, field, _ := strings.Cut(head, " ")
			line, err := strconv.Atoi(lineText)
			if err != nil {
				t.Fatalf("bad expect line %q", first)
			}
			if field == "-" {
				field = ""
			}
			_, err = LoadFile(path)
			wantError(t, err, path, line, field, msg)
		})
	}
}

func TestErrorsWrapUnitErrors(t *testing.T) {
	_, err := Parse("bad.yaml", []byte(replaceLine(9, "  - {id: steel, modulus: 200 GPascal}")))
	if !errors.Is(err, units.ErrUnknownUnit) {
		t.Errorf("error does not wrap units.ErrUnknownUnit: %v", err)
	}
}

func TestErrorsAreCollected(t *testing.T) {
	doc := strings.Replace(baseDoc, "section: s}", "section: x}", -1) // two bad sections
	_, err := Parse("bad.yaml", []byte(doc))
	var list yamlfile.ErrorList
	if !errors.As(err, &list) || len(list) != 2 {
		t.Fatalf("want 2 errors, got %v", err)
	}
	for i := 1; i < len(list); i++ {
		if list[i].Line < list[i-1].Line {
			t.Errorf("errors not in line order: %v", err)
		}
	}
}

func TestLoadFileMissing(t *testing.T) {
	_, err := LoadFile("no/such/structure.yaml")
	if !errors.Is(err, os.ErrNotExist) || !strings.Contains(err.Error(), "no/such/structure.yaml") {
		t.Errorf("want a not-exist error naming the path, got %v", err)
	}
}
