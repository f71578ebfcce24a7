package structfile_test

import (
	"fmt"

	"trussmonitor/internal/structfile"
)

func ExampleParse() {
	doc := `
name: demo
dimension: 2
units: {length: m, force: kN}
nodes:
  - {id: A, at: [0, 0]}
  - {id: B, at: [8, 0]}
  - {id: C, at: [4, 3]}
materials:
  - {id: steel, modulus: 210000 N/mm2}
sections:
  - {id: s, area: 2 in2, material: steel}
members:
  - {id: AB, from: A, to: B, section: s}
  - {id: AC, from: A, to: C, section: s}
  - {id: BC, from: B, to: C, section: s}
supports:
  - {node: A, fix: [x, y]}
  - {node: B, fix: [y]}
patterns:
  - {name: P, forces: [{node: C, y: -60}]}
cases:
  - {name: P60, combine: {P: 1}}
`
	s, err := structfile.Parse("demo.yaml", []byte(doc))
	if err != nil {
		fmt.Println(err)
		return
	}
	m := s.Members[0]
	fmt.Printf("%s: %d nodes, %d members\n", s.Name, len(s.Nodes), len(s.Members))
	fmt.Printf("%s: E = %g Pa, A = %.6g m2\n", m.ID, m.E, m.A)
	fmt.Printf("load at C: %g N\n", s.Patterns[0].Forces[0].F[1])
	// Output:
	// demo: 3 nodes, 3 members
	// AB: E = 2.1e+11 Pa, A = 0.00129032 m2
	// load at C: -60000 N
}

func ExampleParse_errors() {
	doc := `
name: demo
dimension: 2
nodes:
  - {id: A, at: [0 m, 0 m]}
  - {id: B, at: [4, 0 m]}
materials:
  - {id: steel, modulus: 210 GPa}
sections:
  - {id: s, area: 1000 mm, material: steel}
members:
  - {id: AB, from: A, to: C, section: s}
`
	_, err := structfile.Parse("demo.yaml", []byte(doc))
	fmt.Println(err)
	// Output:
	// demo.yaml:6: nodes[B].at[0]: missing unit: 4 has no unit and no default length unit is declared; write it with a unit (one of m, cm, mm, ft, in); or declare a default under units: length
	// demo.yaml:10: sections[s].area: wrong dimension: "mm" is a unit of length, expected an area unit (one of m2, cm2, mm2, in2, ft2)
	// demo.yaml:12: members[AB].to: unknown node "C"; declare it under nodes:
}

func ExampleLoadFile() {
	s, err := structfile.LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(s.Title)
	fmt.Printf("%d nodes, %d members, unknown patterns %v\n", len(s.Nodes), len(s.Members), s.UnknownPatterns())
	// Output:
	// Alder Creek footbridge (plane Pratt truss, 8 x 3.0 m panels)
	// 18 nodes, 35 members, unknown patterns [crowd]
}
