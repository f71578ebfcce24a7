package structfile

import (
	"math"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/capacity"
	"trussmonitor/internal/model"
	"trussmonitor/internal/units"
	"trussmonitor/internal/yamlfile"
)

// Bounds of the design inputs. Values outside are refused as typing or
// unit mistakes, not as engineering judgements.
const (
	// minGamma and maxGamma bound the partial factors gamma_M0, gamma_M1:
	// EN 1993-1-1 6.1 recommends 1.00 and national annexes choose values
	// from 1.00 to about 1.1 (common practice); 1.5 leaves room.
	minGamma, maxGamma = 1.0, 1.5
	// maxBucklingFactor bounds the buckling-length factor (a cantilever
	// strut is 2.0; 10 is far beyond any truss member, common practice).
	maxBucklingFactor = 10
)

// designBlock reads the structure's design basis:
//
//	design:
//	  standard: EN 1993-1-1      # or AISC 360-16
//	  gamma_M0: 1.0              # EN 1993-1-1 only, required
//	  gamma_M1: 1.0
func (r *reader) designBlock(s *state, n *yaml.Node) {
	m, ok := r.Fields(n, "design", "standard", "gamma_M0", "gamma_M1")
	if !ok {
		return
	}
	sn, ok := r.Need(m, n, "design", "standard")
	if !ok {
		return
	}
	name, ok := r.Str(sn, "design.standard")
	if !ok {
		return
	}
	std, err := capacity.ParseStandard(name)
	if err != nil {
		r.Wrap(sn, "design.standard", err, "")
		return
	}
	d := &capacity.Design{Standard: std}
	for _, g := range []struct {
		key string
		out *float64
	}{{"gamma_M0", &d.GammaM0}, {"gamma_M1", &d.GammaM1}} {
		gn, given := m[g.key]
		f := "design." + g.key
		if std != capacity.EN1993 {
			if given {
				r.Errorf(gn, f, "partial factors belong to EN 1993-1-1; %s uses its resistance factor phi = 0.90; remove %s", std, g.key)
			}
			continue
		}
		if !given {
			r.Errorf(n, f, "missing; give the partial factor of your national annex (EN 1993-1-1 6.1 recommends 1.0)")
			continue
		}
		v, ok := r.Number(gn, f)
		if !ok {
			continue
		}
		if v < minGamma || v > maxGamma {
			r.Errorf(gn, f, "partial factor %v is outside %v..%v", v, minGamma, maxGamma)
			continue
		}
		*g.out = v
	}
	s.st.Design, s.st.DesignLine = d, n.Line
}

// yieldStrength reads a material's yield_strength (stress, positive, below
// the modulus).
func (r *reader) yieldStrength(mat *material, m map[string]*yaml.Node, f string) {
	v, ok := m["yield_strength"]
	if !ok {
		return
	}
	fy, ok := r.quantity(v, f+".yield_strength", units.Stress)
	if !ok {
		return
	}
	if !(fy > 0) || (mat.e > 0 && fy >= mat.e) {
		r.Errorf(v, f+".yield_strength", "yield strength must be positive and below the modulus of elasticity, got %s (check the unit)", v.Value)
		return
	}
	mat.fy = fy
}

// sectionBuckling reads a section's radius_of_gyration or second_moment
// (about its weaker axis) and buckling_curve.
func (r *reader) sectionBuckling(s *state, sec *section, m map[string]*yaml.Node, it *yaml.Node, f string) {
	rn, hasR := m["radius_of_gyration"]
	in, hasI := m["second_moment"]
	if hasR && hasI {
		r.Errorf(it, f, "give either radius_of_gyration or second_moment (about the weaker axis), not both")
		return
	}
	if hasR {
		if v, ok := r.positiveQuantity(rn, f+".radius_of_gyration", units.Length, "radius of gyration"); ok {
			sec.radius = v
		}
	}
	if hasI {
		if v, ok := r.positiveQuantity(in, f+".second_moment", units.SecondMoment, "second moment of area"); ok && sec.area > 0 {
			sec.radius = math.Sqrt(v / sec.area)
		}
	}
	if cn, ok := m["buckling_curve"]; ok {
		sec.curve = r.curve(s, cn, f+".buckling_curve")
	}
}

// curve reads a buckling curve letter (EN 1993-1-1 only).
func (r *reader) curve(s *state, n *yaml.Node, f string) capacity.Curve {
	name, ok := r.Str(n, f)
	if !ok {
		return 0
	}
	if s.st.Design != nil && s.st.Design.Standard != capacity.EN1993 {
		r.Errorf(n, f, "buckling curves belong to EN 1993-1-1; the design standard is %s; remove it", s.st.Design.Standard)
		return 0
	}
	c, err := capacity.ParseCurve(name)
	if err != nil {
		r.Wrap(n, f, err, "")
		return 0
	}
	return c
}

// memberBuckling reads a member's buckling_length or buckling_factor and
// its buckling_curve (overriding the section's), and copies the section's
// design inputs.
func (r *reader) memberBuckling(s *state, mem *model.Member, sec *section, mat *material, m map[string]*yaml.Node, it *yaml.Node, f string) {
	if sec != nil {
		mem.RadiusOfGyration, mem.Curve = sec.radius, sec.curve
	}
	if mat != nil {
		mem.Fy = mat.fy
	}
	ln, hasL := m["buckling_length"]
	kn, hasK := m["buckling_factor"]
	if hasL && hasK {
		r.Errorf(it, f, "give either buckling_length or buckling_factor, not both")
	} else if hasL {
		if v, ok := r.positiveQuantity(ln, f+".buckling_length", units.Length, "buckling length"); ok {
			mem.BucklingLength = v
		}
	} else if hasK {
		if v, ok := r.Number(kn, f+".buckling_factor"); ok {
			if !(v > 0) || v > maxBucklingFactor {
				r.Errorf(kn, f+".buckling_factor", "buckling-length factor must be above 0 and at most %v, got %v", maxBucklingFactor, v)
			} else {
				mem.BucklingFactor = v
			}
		}
	}
	if cn, ok := m["buckling_curve"]; ok {
		if c := r.curve(s, cn, f+".buckling_curve"); c != 0 {
			mem.Curve = c
		}
	}
}

// designInputs checks, when the structure declares a design basis, that
// every member has what its resistance needs.
func (r *reader) designInputs(s *state) {
	d := s.st.Design
	if d == nil {
		return
	}
	for _, mem := range s.st.Members {
		f := "members[" + mem.ID + "]"
		if mem.Section == "" {
			continue // reported already
		}
		if mem.Fy == 0 {
			r.ErrorAt(mem.Line, f, "the design standard %s needs a yield strength: add yield_strength to material %q", d.Standard, mem.Material)
		}
		if mem.RadiusOfGyration == 0 {
			r.ErrorAt(mem.Line, f, "the design standard %s needs the weaker-axis radius_of_gyration or second_moment of section %q", d.Standard, mem.Section)
		}
		if d.Standard == capacity.EN1993 && mem.Curve == 0 {
			r.ErrorAt(mem.Line, f, "EN 1993-1-1 needs a buckling curve (a0, a, b, c or d, Table 6.2): add buckling_curve to section %q or to the member", mem.Section)
		}
	}
	if len(r.Errors()) > 0 {
		return
	}
	for k, mem := range s.st.Members {
		_, err := capacity.Compute(*d, capacity.Member{A: mem.A, E: mem.E, Fy: mem.Fy, RadiusOfGyration: mem.RadiusOfGyration,
			BucklingLength: s.st.EffectiveBucklingLength(k), Curve: mem.Curve})
		if err != nil {
			r.ErrorAt(mem.Line, "members["+mem.ID+"]", "design resistance: %v", err)
		}
	}
}

// referenceLoad reads a pattern's reference_load: the load the pattern
// represents at factor 1, with its engineering unit (a force such as
// "1 kN", a pressure such as "1 kPa" or a line load such as "2.5 kN/m").
func (r *reader) referenceLoad(p *model.Pattern, n *yaml.Node, f string) {
	if n.Kind != yaml.ScalarNode || n.ShortTag() != "!!str" {
		r.Errorf(n, f, "expected a load with its unit such as \"1 kPa\", \"1 kN\" or \"2.5 kN/m\", found %s", yamlfile.KindName(n))
		return
	}
	v, u, err := units.ParseWritten(n.Value, units.Force, units.Pressure, units.Stiffness)
	if err != nil {
		r.Wrap(n, f, err, "")
		return
	}
	if !(v > 0) {
		r.Errorf(n, f, "reference load must be positive, got %s", n.Value)
		return
	}
	p.ReferenceValue, p.ReferenceUnit = v, u.Symbol
}
