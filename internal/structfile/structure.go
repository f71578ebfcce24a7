package structfile

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/capacity"
	"trussmonitor/internal/model"
	"trussmonitor/internal/units"
	"trussmonitor/internal/yamlfile"
)

// material is a material as declared, in SI.
type material struct {
	id       string
	e        float64
	alpha    float64
	hasAlpha bool
	density  float64
	hasRho   bool
	fy       float64 // yield strength, Pa (0: not given)
	line     int
}

// section is a section as declared, in SI.
type section struct {
	id       string
	area     float64
	material string
	mat      *material
	radius   float64        // weaker-axis radius of gyration, m (0: not given)
	curve    capacity.Curve // EN 1993-1-1 buckling curve (0: not given)
	line     int
}

// state carries the lookups built while reading one file.
type state struct {
	st        *model.Structure
	dim       int
	nodes     map[string]int
	materials map[string]*material
	sections  map[string]*section
	members   map[string]int
	memberMat []*material
	groupLine map[string]int
	inGroup   map[string]map[int]bool
	supports  map[int]int  // node index -> index in st.Supports
	badNode   map[int]bool // nodes whose coordinates did not read
}

var axisNames = [3]string{"x", "y", "z"}

// structure reads the root mapping.
func (r *reader) structure(root *yaml.Node) *model.Structure {
	r.checkAliases(root, 0)
	if len(r.Errors()) > 0 {
		return nil
	}
	m, ok := r.Fields(root, "", "name", "title", "dimension", "units", "gravity",
		"nodes", "materials", "sections", "members", "groups", "supports", "patterns", "cases", "design")
	if !ok {
		return nil
	}
	s := &state{
		st:        &model.Structure{Groups: map[string][]int{}},
		nodes:     map[string]int{},
		materials: map[string]*material{},
		sections:  map[string]*section{},
		members:   map[string]int{},
		groupLine: map[string]int{},
		inGroup:   map[string]map[int]bool{},
		supports:  map[int]int{},
		badNode:   map[int]bool{},
	}
	if n, ok := r.Need(m, root, "", "name"); ok {
		if v, ok := r.id(n, "name"); ok {
			s.st.Name = v
		}
	}
	if n, ok := m["title"]; ok {
		if v, ok := r.Str(n, "title"); ok {
			s.st.Title = v
		}
	}
	s.dim = 3 // keep going with 3 if the dimension is missing or wrong
	if n, ok := r.Need(m, root, "", "dimension"); ok {
		if v, ok := r.Number(n, "dimension"); ok {
			if v != 2 && v != 3 {
				r.Errorf(n, "dimension", "must be 2 (plane truss, x and y) or 3 (space truss, x, y and z), not %v", n.Value)
			} else {
				s.dim = int(v)
			}
		}
	}
	s.st.Dim = s.dim
	r.unitsBlock(m["units"])
	s.st.Units = r.unitSystem()
	s.st.Gravity = [3]float64{0, -1, 0}
	if s.dim == 3 {
		s.st.Gravity = [3]float64{0, 0, -1}
	}
	if n, ok := m["gravity"]; ok {
		if g, ok := r.vector(n, "gravity", s.dim); ok {
			s.st.Gravity = g
		}
	}
	if n, ok := m["design"]; ok {
		r.designBlock(s, n)
	}
	if n, ok := r.Need(m, root, "", "nodes"); ok {
		r.nodes(s, n)
	}
	if n, ok := r.Need(m, root, "", "materials"); ok {
		r.materials(s, n)
	}
	if n, ok := r.Need(m, root, "", "sections"); ok {
		r.sections(s, n)
	}
	if n, ok := m["groups"]; ok {
		r.groupsDecl(s, n)
	}
	if n, ok := r.Need(m, root, "", "members"); ok {
		r.members(s, n)
	}
	if n, ok := m["groups"]; ok {
		r.groupsMembers(s, n)
	}
	for name, idx := range s.st.Groups {
		if len(idx) == 0 {
			r.ErrorAt(s.groupLine[name], "groups["+name+"]", "group has no members; list them under members: or give members groups: [%s]", name)
		}
		sort.Ints(idx)
	}
	if n, ok := m["supports"]; ok {
		r.supports(s, n)
	}
	if n, ok := m["patterns"]; ok {
		r.patterns(s, n)
	}
	if n, ok := m["cases"]; ok {
		r.cases(s, n)
	}
	r.geometry(s)
	r.designInputs(s)
	return s.st
}

// unitsBlock reads the default unit per dimension.
func (r *reader) unitsBlock(n *yaml.Node) {
	r.units = map[units.Dimension]string{}
	if n == nil {
		return
	}
	keys := make([]string, 0, len(unitKeys))
	byKey := map[string]units.Dimension{}
	for d := units.Length; d <= units.SecondMoment; d++ {
		if k, ok := unitKeys[d]; ok {
			keys = append(keys, k)
			byKey[k] = d
		}
	}
	m, ok := r.Fields(n, "units", keys...)
	if !ok {
		return
	}
	for k, v := range m {
		f := "units." + k
		sym, ok := r.Str(v, f)
		if !ok {
			continue
		}
		if _, err := units.Check(sym, byKey[k]); err != nil {
			r.Wrap(v, f, err, "")
			continue
		}
		r.units[byKey[k]] = sym
	}
}

// unitSystem is the system of units of the declared default units.
func (r *reader) unitSystem() units.System {
	syms := make([]string, 0, len(r.units))
	for _, sym := range r.units {
		syms = append(syms, sym)
	}
	return units.SystemOf(syms...)
}

// vector reads a dimensionless direction vector of dim components and
// normalises it to unit length.
func (r *reader) vector(n *yaml.Node, field string, dim int) ([3]float64, bool) {
	var out [3]float64
	items, ok := r.seq(n, field)
	if !ok {
		return out, false
	}
	if len(items) != dim {
		r.Errorf(n, field, "expected %d components for a %dD structure, found %d", dim, dim, len(items))
		return out, false
	}
	good := true
	for k, it := range items {
		v, ok := r.Number(it, fmt.Sprintf("%s[%d]", field, k))
		if !ok {
			good = false
			continue
		}
		out[k] = v
	}
	if !good {
		return out, false
	}
	l := math.Sqrt(out[0]*out[0] + out[1]*out[1] + out[2]*out[2])
	if l == 0 || math.IsInf(l, 0) {
		r.Errorf(n, field, "the vector has zero length; give a direction such as [0, 1]")
		return out, false
	}
	for k := range out {
		out[k] /= l
	}
	return out, true
}

// item returns the field prefix of a list entry: name[id] once the id is
// known, name[index] before.
func item(list string, i int, id string) string {
	if id != "" {
		return list + "[" + id + "]"
	}
	return fmt.Sprintf("%s[%d]", list, i)
}

func (r *reader) nodes(s *state, n *yaml.Node) {
	items, ok := r.seq(n, "nodes")
	if !ok {
		return
	}
	if len(items) == 0 {
		r.Errorf(n, "nodes", "no nodes declared")
	}
	for i, it := range items {
		m, id, f, ok := r.entry(it, "nodes", "node", "id", i, firstDeclared(s.nodes, func(i int) int { return s.st.Nodes[i].Line }), "id", "at")
		if !ok {
			continue
		}
		node := model.Node{ID: id, Line: it.Line}
		at, ok := r.Need(m, it, f, "at")
		if ok {
			node.X, ok = r.coords(s, at, f+".at")
		}
		if !ok {
			s.badNode[len(s.st.Nodes)] = true
		}
		s.nodes[node.ID] = len(s.st.Nodes)
		s.st.Nodes = append(s.st.Nodes, node)
	}
}

// coords reads [x, y] or [x, y, z] lengths.
func (r *reader) coords(s *state, n *yaml.Node, field string) ([3]float64, bool) {
	var x [3]float64
	items, ok := r.seq(n, field)
	if !ok {
		return x, false
	}
	if s.dim == 2 && len(items) == 3 {
		r.Errorf(items[2], field, "a z coordinate in a 2D file (dimension: 2); give [x, y], or set dimension: 3")
		return x, false
	}
	if len(items) != s.dim {
		want := "[x, y]"
		if s.dim == 3 {
			want = "[x, y, z]"
		}
		r.Errorf(n, field, "expected %d coordinates %s, found %d", s.dim, want, len(items))
		return x, false
	}
	good := true
	for k, it := range items {
		v, ok := r.quantity(it, fmt.Sprintf("%s[%d]", field, k), units.Length)
		if !ok {
			good = false
		}
		x[k] = v
	}
	return x, good
}

// entry reads the fields of item i of the list kind (for example
// "materials"), checks its identifying field key ("id" or "name") and
// rejects a repeated value: firstLine gives the line of an earlier
// declaration of the same one. It returns the fields, the identifier and
// the item's field path naming it.
func (r *reader) entry(it *yaml.Node, kind, noun, key string, i int, firstLine func(id string) (int, bool), allowed ...string) (m map[string]*yaml.Node, id, f string, ok bool) {
	f = item(kind, i, "")
	if m, ok = r.Fields(it, f, allowed...); !ok {
		return nil, "", f, false
	}
	idn, ok := r.Need(m, it, f, key)
	if !ok {
		return nil, "", f, false
	}
	if id, ok = r.id(idn, f+"."+key); !ok {
		return nil, "", f, false
	}
	f = item(kind, i, id)
	if line, dup := firstLine(id); dup {
		r.Errorf(idn, f+"."+key, "duplicate %s %s %q (first declared on line %d)", noun, key, id, line)
		return nil, "", f, false
	}
	return m, id, f, true
}

// firstDeclared is the look-up entry takes for a list whose entries are
// indexed by id in index: the line on which id was first declared (line
// gives it for an indexed value), and whether it was.
func firstDeclared[T any](index map[string]T, line func(T) int) func(id string) (int, bool) {
	return func(id string) (int, bool) {
		v, dup := index[id]
		if !dup {
			return 0, false
		}
		return line(v), true
	}
}

func (r *reader) materials(s *state, n *yaml.Node) {
	items, ok := r.seq(n, "materials")
	if !ok {
		return
	}
	for i, it := range items {
		m, id, f, ok := r.entry(it, "materials", "material", "id", i, firstDeclared(s.materials, func(m *material) int { return m.line }), "id", "modulus", "thermal_coefficient", "density", "description", "yield_strength")
		if !ok {
			continue
		}
		mat := &material{id: id, line: it.Line}
		s.materials[id] = mat
		if d, ok := m["description"]; ok {
			r.Str(d, f+".description")
		}
		if v, ok := r.Need(m, it, f, "modulus"); ok {
			mat.e, _ = r.positiveQuantity(v, f+".modulus", units.Stress, "modulus of elasticity")
		}
		if v, ok := m["thermal_coefficient"]; ok {
			if a, ok := r.quantity(v, f+".thermal_coefficient", units.ThermalCoefficient); ok {
				mat.alpha, mat.hasAlpha = a, true
			}
		}
		if v, ok := m["density"]; ok {
			if d, ok := r.quantity(v, f+".density", units.Density); ok {
				if d < 0 {
					r.Errorf(v, f+".density", "density must not be negative, got %s", v.Value)
				}
				mat.density, mat.hasRho = d, true
			}
		}
		r.yieldStrength(mat, m, f)
	}
}

func (r *reader) sections(s *state, n *yaml.Node) {
	items, ok := r.seq(n, "sections")
	if !ok {
		return
	}
	for i, it := range items {
		m, id, f, ok := r.entry(it, "sections", "section", "id", i, firstDeclared(s.sections, func(m *section) int { return m.line }), "id", "area", "material", "description", "radius_of_gyration", "second_moment", "buckling_curve")
		if !ok {
			continue
		}
		sec := &section{id: id, line: it.Line}
		s.sections[id] = sec
		if d, ok := m["description"]; ok {
			r.Str(d, f+".description")
		}
		if v, ok := r.Need(m, it, f, "area"); ok {
			sec.area, _ = r.positiveQuantity(v, f+".area", units.Area, "cross-section area")
		}
		if v, ok := r.Need(m, it, f, "material"); ok {
			if mid, ok := r.id(v, f+".material"); ok {
				mat, found := s.materials[mid]
				if !found {
					r.Errorf(v, f+".material", "unknown material %q; declared materials: %s", mid, keyList(s.materials))
				}
				sec.material, sec.mat = mid, mat
			}
		}
		r.sectionBuckling(s, sec, m, it, f)
	}
}

// keyList lists a map's keys sorted, shortened for messages.
func keyList[T any](m map[string]T) string {
	if len(m) == 0 {
		return "(none)"
	}
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	if len(keys) > 12 {
		return strings.Join(keys[:12], ", ") + fmt.Sprintf(", ... (%d in all)", len(keys))
	}
	return strings.Join(keys, ", ")
}

// groupsDecl reads the group names (first pass, before members).
func (r *reader) groupsDecl(s *state, n *yaml.Node) {
	items, ok := r.seq(n, "groups")
	if !ok {
		return
	}
	for i, it := range items {
		f := item("groups", i, "")
		m, ok := r.Fields(it, f, "name", "members", "description")
		if !ok {
			continue
		}
		nn, ok := r.Need(m, it, f, "name")
		if !ok {
			continue
		}
		name, ok := r.id(nn, f+".name")
		if !ok {
			continue
		}
		if l, dup := s.groupLine[name]; dup {
			r.Errorf(nn, item("groups", i, name)+".name", "duplicate group name %q (first declared on line %d)", name, l)
			continue
		}
		s.groupLine[name] = it.Line
		s.st.Groups[name] = nil
		if d, ok := m["description"]; ok {
			r.Str(d, item("groups", i, name)+".description")
		}
	}
}

// groupsMembers adds the members listed under each group (second pass).
func (r *reader) groupsMembers(s *state, n *yaml.Node) {
	if n.Kind != yaml.SequenceNode {
		return // reported by groupsDecl
	}
	seenDecl := map[string]bool{}
	for i, it := range n.Content {
		if it.Kind != yaml.MappingNode {
			continue
		}
		var name string
		var list *yaml.Node
		for k := 0; k+1 < len(it.Content); k += 2 {
			switch it.Content[k].Value {
			case "name":
				name = it.Content[k+1].Value
			case "members":
				list = it.Content[k+1]
			}
		}
		if s.groupLine[name] != it.Line || seenDecl[name] || list == nil {
			continue // invalid or duplicate declaration, already reported
		}
		seenDecl[name] = true
		f := item("groups", i, name) + ".members"
		ids, nodes, _ := r.idList(list, f)
		for k, id := range ids {
			mi, found := s.members[id]
			if !found {
				r.Errorf(nodes[k], f, "unknown member %q", id)
				continue
			}
			r.addToGroup(s, name, mi, nodes[k], f)
		}
	}
}

// addToGroup adds member mi to group name, rejecting repeats.
func (r *reader) addToGroup(s *state, name string, mi int, at *yaml.Node, field string) {
	set := s.inGroup[name]
	if set == nil {
		set = map[int]bool{}
		s.inGroup[name] = set
	}
	if set[mi] {
		r.Errorf(at, field, "member %q is already in group %q", s.st.Members[mi].ID, name)
		return
	}
	set[mi] = true
	s.st.Groups[name] = append(s.st.Groups[name], mi)
}

func (r *reader) members(s *state, n *yaml.Node) {
	items, ok := r.seq(n, "members")
	if !ok {
		return
	}
	if len(items) == 0 {
		r.Errorf(n, "members", "no members declared")
	}
	for i, it := range items {
		m, id, f, ok := r.entry(it, "members", "member", "id", i, firstDeclared(s.members, func(i int) int { return s.st.Members[i].Line }), "id", "from", "to", "section", "groups", "buckling_length", "buckling_factor", "buckling_curve")
		if !ok {
			continue
		}
		mem := model.Member{ID: id, I: -1, J: -1, Line: it.Line}
		good := true
		for _, end := range []string{"from", "to"} {
			v, ok := r.Need(m, it, f, end)
			if !ok {
				good = false
				continue
			}
			nid, ok := r.id(v, f+"."+end)
			if !ok {
				good = false
				continue
			}
			ni, found := s.nodes[nid]
			if !found {
				r.Errorf(v, f+"."+end, "unknown node %q; declare it under nodes:", nid)
				good = false
				continue
			}
			if end == "from" {
				mem.I = ni
			} else {
				mem.J = ni
			}
		}
		if good && mem.I == mem.J {
			r.Errorf(it, f, "member starts and ends at the same node %q", s.st.Nodes[mem.I].ID)
		}
		var mat *material
		var msec *section
		if v, ok := r.Need(m, it, f, "section"); ok {
			if sid, ok := r.id(v, f+".section"); ok {
				sec, found := s.sections[sid]
				if !found {
					r.Errorf(v, f+".section", "unknown section %q; declared sections: %s", sid, keyList(s.sections))
				} else {
					mem.Section, mem.A, msec = sid, sec.area, sec
					if sec.mat != nil {
						mat = sec.mat
						mem.Material, mem.E, mem.Alpha, mem.Density = mat.id, mat.e, mat.alpha, mat.density
					}
				}
			}
		}
		r.memberBuckling(s, &mem, msec, mat, m, it, f)
		mi := len(s.st.Members)
		s.members[id] = mi
		s.st.Members = append(s.st.Members, mem)
		s.memberMat = append(s.memberMat, mat)
		if v, ok := m["groups"]; ok {
			gf := f + ".groups"
			names, nodes, _ := r.idList(v, gf)
			for k, g := range names {
				if _, found := s.groupLine[g]; !found {
					r.Errorf(nodes[k], gf, "unknown group %q; declare it under groups: (declared: %s)", g, keyList(s.groupLine))
					continue
				}
				r.addToGroup(s, g, mi, nodes[k], gf)
			}
		}
	}
}

func (r *reader) supports(s *state, n *yaml.Node) {
	items, ok := r.seq(n, "supports")
	if !ok {
		return
	}
	for i, it := range items {
		f := item("supports", i, "")
		m, ok := r.Fields(it, f, "node", "fix", "normal", "spring")
		if !ok {
			continue
		}
		nn, ok := r.Need(m, it, f, "node")
		if !ok {
			continue
		}
		nid, ok := r.id(nn, f+".node")
		if !ok {
			continue
		}
		f = item("supports", i, nid)
		ni, found := s.nodes[nid]
		if !found {
			r.Errorf(nn, f+".node", "unknown node %q", nid)
			continue
		}
		if prev, dup := s.supports[ni]; dup {
			r.Errorf(nn, f+".node", "node %q already has a support (line %d); put all its restraints in one entry", nid, s.st.Supports[prev].Line)
			continue
		}
		sup := model.Support{Node: ni, Line: it.Line}
		if v, ok := m["fix"]; ok {
			axes, nodes, _ := r.idList(v, f+".fix")
			for k, a := range axes {
				ax := r.axis(s, nodes[k], f+".fix", a)
				if ax < 0 {
					continue
				}
				if sup.Fixed[ax] {
					r.Errorf(nodes[k], f+".fix", "%s is listed twice", a)
				}
				sup.Fixed[ax] = true
			}
		}
		if v, ok := m["normal"]; ok {
			if _, fixed := m["fix"]; fixed {
				r.Errorf(v, f+".normal", "an inclined roller (normal) cannot also fix axes in the same support; use either fix: or normal:")
			} else if nv, ok := r.vector(v, f+".normal", s.dim); ok {
				sup.Normal = &nv
			}
		}
		if v, ok := m["spring"]; ok {
			sm, ok := r.Fields(v, f+".spring", axisNames[:s.dim]...)
			if ok {
				for ax := 0; ax < 3; ax++ {
					sv, given := sm[axisNames[ax]]
					if !given {
						continue
					}
					sf := f + ".spring." + axisNames[ax]
					k, ok := r.positiveQuantity(sv, sf, units.Stiffness, "spring stiffness")
					if !ok {
						continue
					}
					if sup.Fixed[ax] {
						r.Errorf(sv, sf, "%s is both fixed and on a spring; use one", axisNames[ax])
						continue
					}
					sup.Spring[ax] = k
				}
				if len(sm) == 0 {
					r.Errorf(v, f+".spring", "no spring stiffness given; write for example spring: {x: 20 MN/m}")
				}
			}
		}
		if !sup.Fixed[0] && !sup.Fixed[1] && !sup.Fixed[2] && sup.Normal == nil &&
			sup.Spring == [3]float64{} {
			if _, hasFix := m["fix"]; !hasFix {
				if _, hasN := m["normal"]; !hasN {
					if _, hasS := m["spring"]; !hasS {
						r.Errorf(it, f, "support restrains nothing; give fix:, normal: or spring:")
					}
				}
			}
			continue
		}
		s.supports[ni] = len(s.st.Supports)
		s.st.Supports = append(s.st.Supports, sup)
	}
}

// axis converts "x", "y" or "z" to 0..2, reporting bad names and z in 2D.
func (r *reader) axis(s *state, n *yaml.Node, field, a string) int {
	for k, name := range axisNames {
		if a == name {
			if k >= s.dim {
				r.Errorf(n, field, "axis z in a 2D file (dimension: 2); use x or y")
				return -1
			}
			return k
		}
	}
	r.Errorf(n, field, "unknown axis %q; use x, y or z", a)
	return -1
}

func (r *reader) patterns(s *state, n *yaml.Node) {
	items, ok := r.seq(n, "patterns")
	if !ok {
		return
	}
	seen := map[string]int{}
	for i, it := range items {
		m, name, f, ok := r.entry(it, "patterns", "pattern", "name", i, firstDeclared(seen, func(line int) int { return line }), "name", "description", "self_weight", "forces", "temperatures", "settlements", "unknown", "reference_load")
		if !ok {
			continue
		}
		seen[name] = it.Line
		p := model.Pattern{Name: name, Line: it.Line}
		errsBefore := len(r.Errors())
		if d, ok := m["description"]; ok {
			r.Str(d, f+".description")
		}
		if v, ok := m["unknown"]; ok {
			p.Unknown, _ = r.boolean(v, f+".unknown")
		}
		if v, ok := m["reference_load"]; ok {
			r.referenceLoad(&p, v, f+".reference_load")
		}
		if v, ok := m["self_weight"]; ok {
			if w, ok := r.Number(v, f+".self_weight"); ok {
				p.SelfWeight = w
				if w != 0 {
					r.needDensity(s, v, f+".self_weight")
				}
			}
		}
		if v, ok := m["forces"]; ok {
			r.forces(s, &p, v, f+".forces")
		}
		if v, ok := m["temperatures"]; ok {
			r.temperatures(s, &p, v, f+".temperatures")
		}
		if v, ok := m["settlements"]; ok {
			r.settlements(s, &p, v, f+".settlements")
		}
		if len(r.Errors()) == errsBefore && p.SelfWeight == 0 && len(p.Forces) == 0 &&
			len(p.Temperatures) == 0 && len(p.Settlements) == 0 {
			r.Errorf(it, f, "pattern has no loads; give self_weight:, forces:, temperatures: or settlements:")
		}
		s.st.Patterns = append(s.st.Patterns, p)
	}
}

// needDensity reports members whose material has no density when a pattern
// asks for self-weight.
func (r *reader) needDensity(s *state, at *yaml.Node, field string) {
	missing := map[string]bool{}
	for _, mat := range s.memberMat {
		if mat != nil && !mat.hasRho {
			missing[mat.id] = true
		}
	}
	if len(missing) > 0 {
		r.Errorf(at, field, "self-weight needs a density, but material %s has none; add density: to it", keyList(missing))
	}
}

func (r *reader) forces(s *state, p *model.Pattern, n *yaml.Node, field string) {
	items, ok := r.seq(n, field)
	if !ok {
		return
	}
	for i, it := range items {
		f := fmt.Sprintf("%s[%d]", field, i)
		m, nid, ni, ok := r.atNode(s, it, f, "load on", "node", "x", "y", "z")
		if !ok {
			continue
		}
		nf := model.NodalForce{Node: ni, Line: it.Line}
		given, good := r.components(s, m, f, units.Force, nf.F[:])
		if given == 0 {
			r.Errorf(it, f, "no force component given; write for example {node: %s, y: -10 kN}", nid)
			continue
		}
		if good {
			p.Forces = append(p.Forces, nf)
		}
	}
}

// atNode reads an entry it (field f) with the fields allowed, one of them
// the required id of a declared node: the entry's fields, the node's id
// and index. what names the entry in the message for an unknown node
// ("load on", "settlement of").
func (r *reader) atNode(s *state, it *yaml.Node, f, what string, allowed ...string) (m map[string]*yaml.Node, nid string, ni int, ok bool) {
	if m, ok = r.Fields(it, f, allowed...); !ok {
		return nil, "", 0, false
	}
	nn, ok := r.Need(m, it, f, "node")
	if !ok {
		return nil, "", 0, false
	}
	if nid, ok = r.id(nn, f+".node"); !ok {
		return nil, "", 0, false
	}
	ni, found := s.nodes[nid]
	if !found {
		r.Errorf(nn, f+".node", "%s unknown node %q; declare it under nodes: or correct the id", what, nid)
		return nil, "", 0, false
	}
	return m, nid, ni, true
}

// components reads the x, y, z entries of m as quantities of dim into out,
// returning how many were given and whether all were valid.
func (r *reader) components(s *state, m map[string]*yaml.Node, f string, dim units.Dimension, out []float64) (int, bool) {
	given, good := 0, true
	for ax := 0; ax < 3; ax++ {
		v, ok := m[axisNames[ax]]
		if !ok {
			continue
		}
		given++
		if ax >= s.dim {
			r.Errorf(v, f+".z", "a z component in a 2D file (dimension: 2); use x and y")
			good = false
			continue
		}
		q, ok := r.quantity(v, f+"."+axisNames[ax], dim)
		if !ok {
			good = false
			continue
		}
		out[ax] = q
	}
	return given, good
}

func (r *reader) temperatures(s *state, p *model.Pattern, n *yaml.Node, field string) {
	items, ok := r.seq(n, field)
	if !ok {
		return
	}
	// first entry line per member, to reject a member heated twice
	seen := map[int]int{}
	for _, t := range p.Temperatures {
		seen[t.Member] = t.Line
	}
	for i, it := range items {
		f := fmt.Sprintf("%s[%d]", field, i)
		m, ok := r.Fields(it, f, "groups", "members", "change")
		if !ok {
			continue
		}
		cn, ok := r.Need(m, it, f, "change")
		if !ok {
			continue
		}
		dt, ok := r.quantity(cn, f+".change", units.TemperatureChange)
		if !ok {
			continue
		}
		var targets []int
		gn, hasG := m["groups"]
		mn, hasM := m["members"]
		if !hasG && !hasM {
			r.Errorf(it, f, "say which members change temperature: give groups: or members:")
			continue
		}
		if hasG {
			names, nodes, _ := r.idList(gn, f+".groups")
			for k, g := range names {
				idx := s.st.Groups[g]
				if _, declared := s.groupLine[g]; !declared {
					r.Errorf(nodes[k], f+".groups", "unknown group %q; declared groups: %s", g, keyList(s.groupLine))
					continue
				}
				targets = append(targets, idx...)
			}
		}
		if hasM {
			ids, nodes, _ := r.idList(mn, f+".members")
			for k, id := range ids {
				mi, found := s.members[id]
				if !found {
					r.Errorf(nodes[k], f+".members", "unknown member %q", id)
					continue
				}
				targets = append(targets, mi)
			}
		}
		noAlpha := map[string]bool{}
		for _, mi := range targets {
			if l, dup := seen[mi]; dup {
				r.Errorf(it, f, "member %q already receives a temperature change in this pattern (line %d); a member may appear once per pattern", s.st.Members[mi].ID, l)
				continue
			}
			seen[mi] = it.Line
			if mat := s.memberMat[mi]; mat != nil && !mat.hasAlpha {
				noAlpha[mat.id] = true
			}
			p.Temperatures = append(p.Temperatures, model.MemberTemperature{Member: mi, DeltaK: dt, Line: it.Line})
		}
		if len(noAlpha) > 0 {
			r.Errorf(it, f, "a temperature change needs a thermal coefficient, but material %s has none; add thermal_coefficient: to it", keyList(noAlpha))
		}
	}
}

func (r *reader) settlements(s *state, p *model.Pattern, n *yaml.Node, field string) {
	items, ok := r.seq(n, field)
	if !ok {
		return
	}
	for i, it := range items {
		f := fmt.Sprintf("%s[%d]", field, i)
		m, nid, ni, ok := r.atNode(s, it, f, "settlement of", "node", "x", "y", "z", "normal")
		if !ok {
			continue
		}
		si, supported := s.supports[ni]
		if !supported {
			r.Errorf(m["node"], f+".node", "node %q has no support; a prescribed displacement needs a restraint in that direction", nid)
			continue
		}
		sup := s.st.Supports[si]
		st := model.Settlement{Node: ni, Line: it.Line}
		given, good := r.components(s, m, f, units.Length, st.D[:])
		for ax := 0; ax < s.dim; ax++ {
			if v, ok := m[axisNames[ax]]; ok && !sup.Fixed[ax] {
				r.Errorf(v, f+"."+axisNames[ax], "node %q is not fixed in %s (support on line %d); a settlement needs a fixed direction", nid, axisNames[ax], sup.Line)
				good = false
			}
		}
		if v, ok := m["normal"]; ok {
			given++
			if sup.Normal == nil {
				r.Errorf(v, f+".normal", "node %q is not an inclined roller (support on line %d); give the settlement along a fixed axis", nid, sup.Line)
				good = false
			} else if d, ok := r.quantity(v, f+".normal", units.Length); ok {
				st.D = [3]float64{d, 0, 0}
			} else {
				good = false
			}
		}
		if given == 0 {
			r.Errorf(it, f, "no displacement given; write for example {node: %s, y: -10 mm}", nid)
			continue
		}
		if good {
			p.Settlements = append(p.Settlements, st)
		}
	}
}

func (r *reader) cases(s *state, n *yaml.Node) {
	items, ok := r.seq(n, "cases")
	if !ok {
		return
	}
	seen := map[string]int{}
	for i, it := range items {
		m, name, f, ok := r.entry(it, "cases", "case", "name", i, firstDeclared(seen, func(line int) int { return line }), "name", "description", "combine")
		if !ok {
			continue
		}
		seen[name] = it.Line
		if d, ok := m["description"]; ok {
			r.Str(d, f+".description")
		}
		c := model.Case{Name: name, Line: it.Line}
		cn, ok := r.Need(m, it, f, "combine")
		if !ok {
			continue
		}
		cf := f + ".combine"
		if cn.Kind != yaml.MappingNode {
			r.Errorf(cn, cf, "expected pattern: factor lines, for example {dead: 1.0, crowd: 5.0}; found %s", yamlfile.KindName(cn))
			continue
		}
		if len(cn.Content) == 0 {
			r.Errorf(cn, cf, "no patterns combined")
		}
		used := map[string]int{}
		for k := 0; k+1 < len(cn.Content); k += 2 {
			kn, vn := cn.Content[k], cn.Content[k+1]
			pname, ok := r.id(kn, cf)
			if !ok {
				continue
			}
			pf := cf + "." + pname
			if l, dup := used[pname]; dup {
				r.Errorf(kn, pf, "pattern listed twice in this case (first on line %d)", l)
				continue
			}
			used[pname] = kn.Line
			if !s.st.HasPattern(pname) {
				r.Errorf(kn, pf, "unknown pattern %q; declared patterns: %s", pname, patternList(s.st))
				continue
			}
			v, ok := r.Number(vn, pf)
			if !ok {
				continue
			}
			c.Factors = append(c.Factors, model.Factor{Pattern: pname, Factor: v})
		}
		s.st.Cases = append(s.st.Cases, c)
	}
}

func patternList(st *model.Structure) string {
	m := map[string]bool{}
	for _, p := range st.Patterns {
		m[p.Name] = true
	}
	return keyList(m)
}

// geometry checks for coincident nodes and zero-length members. Two points
// count as coincident when closer than 1e-9 of the structure's bounding-box
// diagonal (common practice: a relative tolerance well above rounding and
// well below any real member length).
func (r *reader) geometry(s *state) {
	nodes := s.st.Nodes
	if len(nodes) == 0 {
		return
	}
	huge := false
	for i, n := range nodes {
		c := math.Max(math.Abs(n.X[0]), math.Max(math.Abs(n.X[1]), math.Abs(n.X[2])))
		if !s.badNode[i] && c > model.MaxCoordinateM {
			r.ErrorAt(n.Line, "nodes["+n.ID+"].at", "coordinate %g m is beyond the valid range of +-%g m (%g km): no truss is that large and member lengths would be lost to rounding; check the number and the length unit (units: length)", c, model.MaxCoordinateM, model.MaxCoordinateM/1e3)
			huge = true
		}
	}
	if huge {
		return // distances are meaningless; the coincidence checks would mislead
	}
	lo, hi := nodes[0].X, nodes[0].X
	for _, n := range nodes {
		for k := 0; k < 3; k++ {
			lo[k] = math.Min(lo[k], n.X[k])
			hi[k] = math.Max(hi[k], n.X[k])
		}
	}
	tol := 1e-9 * dist(lo, hi)
	if math.IsInf(tol, 0) {
		r.ErrorAt(nodes[0].Line, "nodes", "the coordinates span more than 1e150 m; check the units")
		return
	}
	r.coincident(s, lo, tol)
	r.parallelMembers(s)
	for _, m := range s.st.Members {
		if m.I < 0 || m.J < 0 || m.I == m.J || s.badNode[m.I] || s.badNode[m.J] {
			continue
		}
		if dist(nodes[m.I].X, nodes[m.J].X) <= tol {
			r.ErrorAt(m.Line, "members["+m.ID+"]", "member has zero length: nodes %q and %q are at the same position", nodes[m.I].ID, nodes[m.J].ID)
		}
	}
}

// parallelMembers reports a member joining the same two nodes as an
// earlier one: in a pin-jointed model that is one member (with the summed
// area) or, far more often, a typing mistake in an end node.
func (r *reader) parallelMembers(s *state) {
	type pair [2]int
	first := make(map[pair]int, len(s.st.Members))
	for k, m := range s.st.Members {
		if m.I < 0 || m.J < 0 || m.I == m.J {
			continue
		}
		key := pair{min(m.I, m.J), max(m.I, m.J)}
		if j, dup := first[key]; dup {
			o := s.st.Members[j]
			r.ErrorAt(m.Line, "members["+m.ID+"]", "member joins the same nodes %q and %q as member %q (line %d); correct an end node, or model them as one member", s.st.Nodes[m.I].ID, s.st.Nodes[m.J].ID, o.ID, o.Line)
			continue
		}
		first[key] = k
	}
}

// coincident reports nodes closer than tol to an earlier node. It hashes
// the nodes into cells of side tol (relative to the lower corner lo of the
// bounding box, so the cell numbers stay small) and compares each node with
// the nodes of its own and the neighbouring cells: linear time for any
// layout. At most 100 problems are reported.
func (r *reader) coincident(s *state, lo [3]float64, tol float64) {
	type cell [3]int64
	nodes := s.st.Nodes
	cellOf := func(x [3]float64) cell {
		var c cell
		if tol == 0 {
			return c
		}
		for k := 0; k < 3; k++ {
			c[k] = int64(math.Floor((x[k] - lo[k]) / tol))
		}
		return c
	}
	grid := make(map[cell][]int, len(nodes))
	reported := 0
	for i, n := range nodes {
		if s.badNode[i] {
			continue
		}
		c := cellOf(n.X)
	search:
		for dx := int64(-1); dx <= 1; dx++ {
			for dy := int64(-1); dy <= 1; dy++ {
				for dz := int64(-1); dz <= 1; dz++ {
					for _, j := range grid[cell{c[0] + dx, c[1] + dy, c[2] + dz}] {
						if dist(nodes[j].X, n.X) <= tol {
							r.ErrorAt(n.Line, "nodes["+n.ID+"].at", "node %q is at the same position as node %q (line %d); merge them or correct the coordinates", n.ID, nodes[j].ID, nodes[j].Line)
							reported++
							break search
						}
					}
				}
			}
		}
		if reported >= 100 {
			return
		}
		grid[c] = append(grid[c], i)
	}
}

func dist(a, b [3]float64) float64 {
	dx, dy, dz := b[0]-a[0], b[1]-a[1], b[2]-a[2]
	return math.Sqrt(dx*dx + dy*dy + dz*dz)
}
