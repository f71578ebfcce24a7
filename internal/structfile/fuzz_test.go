package structfile

import (
	"errors"
	"math"
	"testing"

	"trussmonitor/internal/yamlfile"
)

// FuzzParse feeds arbitrary bytes to Parse: it must never panic, and it
// returns either a structure whose indices are in range and whose values
// are finite, or an yamlfile.ErrorList whose entries name the file. The seed corpus
// is in testdata/fuzz/FuzzParse (the reference, invalid and footbridge
// files).
func FuzzParse(f *testing.F) {
	f.Add([]byte(baseDoc))
	f.Add([]byte(designDoc(enDesign, ", yield_strength: 355 N/mm2", ", second_moment: 250 cm4, buckling_curve: b", ", buckling_factor: 0.7, buckling_curve: c")))
	f.Add([]byte(designDoc("design: {standard: AISC 360-16}\n", ", yield_strength: 50 ksi", ", radius_of_gyration: 2 in", ", buckling_length: 2.5 m")))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := Parse("fuzz.yaml", data)
		if err != nil {
			if s != nil {
				t.Fatal("structure returned with an error")
			}
			var list yamlfile.ErrorList
			if !errors.As(err, &list) || len(list) == 0 {
				t.Fatalf("error is not a non-empty yamlfile.ErrorList: %T %v", err, err)
			}
			for _, e := range list {
				if e.File != "fuzz.yaml" || e.Msg == "" || e.Line < 0 {
					t.Fatalf("malformed error %+v", e)
				}
			}
			return
		}
		if len(s.Hash) != 64 || (s.Dim != 2 && s.Dim != 3) {
			t.Fatalf("hash %q dim %d", s.Hash, s.Dim)
		}
		checkIndices(t, s)
		// A structure accepted with a design basis has a finite, positive
		// resistance for every member.
		rs, err := s.Resistances()
		if err != nil {
			t.Fatalf("accepted structure's resistances: %v", err)
		}
		for k, r := range rs {
			if !(r.TensionN > 0) || !(r.CompressionN > 0) || math.IsInf(r.TensionN, 0) || math.IsInf(r.CompressionN, 0) {
				t.Fatalf("member %d resistance %+v", k, r)
			}
		}
		for _, n := range s.Nodes {
			for _, x := range n.X {
				if math.IsNaN(x) || math.IsInf(x, 0) {
					t.Fatalf("node %s at %v", n.ID, n.X)
				}
			}
			if s.Dim == 2 && n.X[2] != 0 {
				t.Fatalf("2D node %s has z = %v", n.ID, n.X[2])
			}
		}
		for _, p := range s.Patterns {
			for _, fo := range p.Forces {
				for _, v := range fo.F {
					if math.IsNaN(v) || math.IsInf(v, 0) {
						t.Fatalf("pattern %s force %v", p.Name, fo.F)
					}
				}
			}
		}
	})
}
