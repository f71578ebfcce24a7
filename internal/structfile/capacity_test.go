package structfile

import (
	"math"
	"strings"
	"testing"

	"trussmonitor/internal/capacity"
)

// designDoc is baseDoc with a design basis and the inputs it needs.
func designDoc(design, material, section, member string) string {
	d := strings.Replace(baseDoc, "units: {length: m, force: kN}\n", "units: {length: m, force: kN}\n"+design, 1)
	d = strings.Replace(d, "  - {id: steel, modulus: 200 GPa, thermal_coefficient: 12e-6 1/K, density: 7850 kg/m3}",
		"  - {id: steel, modulus: 200 GPa, thermal_coefficient: 12e-6 1/K, density: 7850 kg/m3"+material+"}", 1)
	d = strings.Replace(d, "  - {id: s, area: 1000 mm2, material: steel}", "  - {id: s, area: 1000 mm2, material: steel"+section+"}", 1)
	d = strings.Replace(d, "  - {id: BC, from: B, to: C, section: s}", "  - {id: BC, from: B, to: C, section: s"+member+"}", 1)
	return d
}

const enDesign = "design: {standard: EN 1993-1-1, gamma_M0: 1.0, gamma_M1: 1.1}\n"

func TestDesignInputs(t *testing.T) {
	s, err := Parse("d.yaml", []byte(designDoc(enDesign, ", yield_strength: 355 N/mm2", ", second_moment: 250 cm4, buckling_curve: b", ", buckling_factor: 0.7, buckling_curve: c")))
	if err != nil {
		t.Fatal(err)
	}
	if s.Design == nil || s.Design.Standard != capacity.EN1993 || s.Design.GammaM0 != 1 || s.Design.GammaM1 != 1.1 {
		t.Fatalf("design %+v", s.Design)
	}
	ab, bc := s.Members[0], s.Members[1]
	if ab.Fy != 355e6 || math.Abs(ab.RadiusOfGyration-0.05) > 1e-15 || ab.Curve != capacity.CurveB {
		t.Errorf("AB: fy %v r %v curve %v; want 355e6, sqrt(250e-8/1e-3) = 0.05 m, b", ab.Fy, ab.RadiusOfGyration, ab.Curve)
	}
	if bc.Curve != capacity.CurveC || bc.BucklingFactor != 0.7 {
		t.Errorf("BC: curve %v factor %v", bc.Curve, bc.BucklingFactor)
	}
	if l := s.EffectiveBucklingLength(1); math.Abs(l-0.7*3) > 1e-12 {
		t.Errorf("BC buckling length %v, want 0.7 x 3 m", l)
	}
	if l := s.EffectiveBucklingLength(2); math.Abs(l-5) > 1e-12 {
		t.Errorf("AC buckling length %v, want the default 1.0 x 5 m", l)
	}
	r, err := s.Resistances()
	if err != nil || len(r) != 3 {
		t.Fatalf("resistances %v, %v", r, err)
	}
	if math.Abs(r[0].TensionN-355e3) > 1e-6 {
		t.Errorf("AB N_pl,Rd %v, want 1000 mm2 x 355 N/mm2 / 1.0", r[0].TensionN)
	}

	// AISC: radius given in inches, buckling length given.
	s, err = Parse("d.yaml", []byte(designDoc("design: {standard: AISC 360-16}\n", ", yield_strength: 50 ksi", ", radius_of_gyration: 2 in", ", buckling_length: 2.5 m")))
	if err != nil {
		t.Fatal(err)
	}
	if s.Design.Standard != capacity.AISC360 || s.Members[1].BucklingLength != 2.5 || s.Members[0].RadiusOfGyration != 0.0508 {
		t.Errorf("AISC read: %+v %+v", s.Design, s.Members[1])
	}
	// No design basis: no resistances, no requirement.
	s, err = Parse("d.yaml", []byte(baseDoc))
	if err != nil {
		t.Fatal(err)
	}
	if r, err := s.Resistances(); r != nil || err != nil {
		t.Errorf("no design: %v, %v", r, err)
	}
}

func TestDesignInputErrors(t *testing.T) {
	fy, sec := ", yield_strength: 355 N/mm2", ", radius_of_gyration: 40 mm, buckling_curve: b"
	tests := []struct {
		name                         string
		design, mat, section, member string
		line                         int
		field, msg                   string
	}{
		{"unknown standard", "design: {standard: BS 5950}\n", fy, sec, "", 4, "design.standard", `unknown design standard "BS 5950"`},
		{"EN without gamma", "design: {standard: EN 1993-1-1, gamma_M0: 1.0}\n", fy, sec, "", 4, "design.gamma_M1", "missing; give the partial factor"},
		{"gamma below 1", "design: {standard: EN 1993-1-1, gamma_M0: 0.9, gamma_M1: 1.0}\n", fy, sec, "", 4, "design.gamma_M0", "outside 1..1.5"},
		{"gamma with AISC", "design: {standard: AISC 360-16, gamma_M0: 1.0}\n", fy, ", radius_of_gyration: 40 mm", "", 4, "design.gamma_M0", "phi = 0.90"},
		{"curve with AISC", "design: {standard: AISC 360-16}\n", fy, sec, "", 12, "sections[s].buckling_curve", "belong to EN 1993-1-1"},
		{"no yield strength", enDesign, "", sec, "", 17, "members[BC]", "needs a yield strength"},
		{"yield strength in the wrong unit", enDesign, ", yield_strength: 355 GPa", sec, "", 10, "materials[steel].yield_strength", "yield strength must be positive and below the modulus"},
		{"negative yield strength", enDesign, ", yield_strength: -355 MPa", sec, "", 10, "materials[steel].yield_strength", "must be positive"},
		{"no radius", enDesign, fy, ", buckling_curve: b", "", 16, "members[AB]", "radius_of_gyration or second_moment"},
		{"both radius and second moment", enDesign, fy, ", radius_of_gyration: 40 mm, second_moment: 100 cm4, buckling_curve: b", "", 12, "sections[s]", "not both"},
		{"second moment as length", enDesign, fy, ", second_moment: 100 mm, buckling_curve: b", "", 12, "sections[s].second_moment", "mm"},
		{"no curve", enDesign, fy, ", radius_of_gyration: 40 mm", "", 16, "members[AB]", "needs a buckling curve"},
		{"bad curve", enDesign, fy, ", radius_of_gyration: 40 mm, buckling_curve: e", "", 12, "sections[s].buckling_curve", "unknown buckling curve"},
		{"both length and factor", enDesign, fy, sec, ", buckling_length: 3 m, buckling_factor: 1", 17, "members[BC]", "not both"},
		{"zero factor", enDesign, fy, sec, ", buckling_factor: 0", 17, "members[BC].buckling_factor", "above 0"},
		{"huge factor", enDesign, fy, sec, ", buckling_factor: 20", 17, "members[BC].buckling_factor", "at most 10"},
		{"negative length", enDesign, fy, sec, ", buckling_length: -3 m", 17, "members[BC].buckling_length", "must be positive"},
		{"vanishing second moment", enDesign, fy, ", second_moment: 1e-300 mm4, buckling_curve: b", "", 16, "members[AB]", "is not a positive finite number"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Parse("d.yaml", []byte(designDoc(tc.design, tc.mat, tc.section, tc.member)))
			wantError(t, err, "d.yaml", tc.line, tc.field, tc.msg)
		})
	}
}

func TestReferenceLoad(t *testing.T) {
	doc := strings.Replace(baseDoc, "  - {name: p, forces: [{node: C, y: -10}]}", "  - {name: p, reference_load: 2.5 kN/m, forces: [{node: C, y: -10}]}", 1)
	s, err := Parse("r.yaml", []byte(doc))
	if err != nil {
		t.Fatal(err)
	}
	if v, u, ok := s.Patterns[0].InReferenceUnit(0.4); !ok || v != 1 || u != "kN/m" {
		t.Errorf("0.4 x 2.5 kN/m = %v %q %v", v, u, ok)
	}
	if _, _, ok := s.Patterns[1].InReferenceUnit(1); ok {
		t.Error("a pattern without reference_load has one")
	}
	for text, msg := range map[string]string{"1 mm": "measures length", "-1 kN": "must be positive", "[1]": "expected a load with its unit", "1": "expected a load with its unit"} {
		doc := strings.Replace(baseDoc, "  - {name: p, forces: [{node: C, y: -10}]}", "  - {name: p, reference_load: "+text+", forces: [{node: C, y: -10}]}", 1)
		_, err := Parse("r.yaml", []byte(doc))
		wantError(t, err, "r.yaml", 22, "patterns[p].reference_load", msg)
	}
}
