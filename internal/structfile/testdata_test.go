package structfile

import (
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"trussmonitor/internal/model"
)

// structureFiles lists the structure files under testdata/: every
// structure.yaml and everything in testdata/reference/.
func structureFiles(t *testing.T) []string {
	t.Helper()
	var out []string
	err := filepath.WalkDir("../../testdata", func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && d.Name() == "invalid" {
			return filepath.SkipDir
		}
		if d.IsDir() {
			return nil
		}
		if d.Name() == "structure.yaml" || (filepath.Base(filepath.Dir(path)) == "reference" && strings.HasSuffix(path, ".yaml")) {
			out = append(out, path)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	sort.Strings(out)
	return out
}

func near(got, want, rel float64) bool {
	return math.Abs(got-want) <= rel*math.Abs(want)
}

func TestParseAllTestdata(t *testing.T) {
	type count struct{ dim, nodes, members, supports, patterns, cases int }
	want := map[string]count{
		"footbridge/structure.yaml":      {2, 18, 35, 2, 13, 6},
		"roof/structure.yaml":            {3, 111, 384, 28, 6, 5},
		"reference/logan-3-5.yaml":       {2, 4, 3, 3, 1, 1},
		"reference/two-bar.yaml":         {2, 3, 2, 2, 1, 1},
		"reference/three-bar.yaml":       {2, 4, 3, 3, 2, 2},
		"reference/fixed-bar.yaml":       {2, 3, 2, 3, 3, 3},
		"reference/tripod.yaml":          {3, 4, 3, 3, 2, 2},
		"reference/king-post.yaml":       {2, 3, 3, 2, 1, 1},
		"reference/pratt-4.yaml":         {2, 8, 13, 2, 2, 2},
		"reference/inclined-roller.yaml": {2, 3, 3, 2, 1, 1},
		"reference/spring-bar.yaml":      {2, 2, 1, 2, 1, 1},
	}
	seen := map[string]bool{}
	for _, path := range structureFiles(t) {
		rel, _ := filepath.Rel("../../testdata", path)
		rel = filepath.ToSlash(rel)
		t.Run(rel, func(t *testing.T) {
			s, err := LoadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if s.File != path || len(s.Hash) != 64 {
				t.Errorf("File %q Hash %q", s.File, s.Hash)
			}
			c, ok := want[rel]
			if !ok {
				t.Logf("no expected counts for %s (parsed: %d nodes, %d members)", rel, len(s.Nodes), len(s.Members))
				return
			}
			seen[rel] = true
			got := count{s.Dim, len(s.Nodes), len(s.Members), len(s.Supports), len(s.Patterns), len(s.Cases)}
			if got != c {
				t.Errorf("counts (dim, nodes, members, supports, patterns, cases) = %v, want %v", got, c)
			}
			checkIndices(t, s)
		})
	}
	for rel := range want {
		if !seen[rel] {
			t.Errorf("%s not found or not parsed", rel)
		}
	}
}

// checkIndices verifies that every index in s is in range and every value
// is finite and physical.
func checkIndices(t *testing.T, s *model.Structure) {
	t.Helper()
	n, m := len(s.Nodes), len(s.Members)
	for _, mem := range s.Members {
		if mem.I < 0 || mem.I >= n || mem.J < 0 || mem.J >= n || mem.I == mem.J {
			t.Errorf("member %s has node indices %d, %d", mem.ID, mem.I, mem.J)
		}
		if !(mem.E > 0) || !(mem.A > 0) || math.IsInf(mem.E, 0) || math.IsInf(mem.A, 0) {
			t.Errorf("member %s: E %v A %v", mem.ID, mem.E, mem.A)
		}
	}
	for _, sp := range s.Supports {
		if sp.Node < 0 || sp.Node >= n {
			t.Errorf("support node index %d", sp.Node)
		}
	}
	for g, idx := range s.Groups {
		if len(idx) == 0 {
			t.Errorf("group %s empty", g)
		}
		for _, i := range idx {
			if i < 0 || i >= m {
				t.Errorf("group %s member index %d", g, i)
			}
		}
	}
	for _, p := range s.Patterns {
		for _, f := range p.Forces {
			if f.Node < 0 || f.Node >= n {
				t.Errorf("pattern %s force node %d", p.Name, f.Node)
			}
		}
		for _, tm := range p.Temperatures {
			if tm.Member < 0 || tm.Member >= m {
				t.Errorf("pattern %s temperature member %d", p.Name, tm.Member)
			}
		}
	}
	for _, c := range s.Cases {
		for _, f := range c.Factors {
			if !s.HasPattern(f.Pattern) {
				t.Errorf("case %s names %s", c.Name, f.Pattern)
			}
		}
	}
}

func TestConvertedValues(t *testing.T) {
	// psi, in2 and kip via NIST SP 811 (2008) App. B exact factors.
	const psi = 4.4482216152605 / (0.0254 * 0.0254)
	logan, err := LoadFile("../../testdata/reference/logan-3-5.yaml")
	if err != nil {
		t.Fatal(err)
	}
	m := logan.Members[1]
	if !near(m.E, 30e6*psi, 1e-15) || !near(m.A, 2*0.0254*0.0254, 1e-15) {
		t.Errorf("Logan E = %v Pa, A = %v m2", m.E, m.A)
	}
	if got := logan.Nodes[2].X; !near(got[0], 120*0.0254, 1e-15) || !near(got[1], 3.048, 1e-15) {
		t.Errorf("Logan node 3 at %v m, want (3.048, 3.048)", got)
	}
	if f := logan.Patterns[0].Forces[0].F[1]; !near(f, -44482.216152605, 1e-15) {
		t.Errorf("Logan load %v N, want -10 kip = -44482.216152605 N", f)
	}

	fb, err := LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		t.Fatal(err)
	}
	// EN 1993-1-1 clause 3.2.6 steel constants.
	b1 := fb.Members[0]
	if b1.ID != "B1" || b1.E != 210e9 || !near(b1.A, 7.49e-3, 1e-15) || b1.Alpha != 12e-6 || b1.Density != 7850 {
		t.Errorf("B1 = %+v", b1)
	}
	l8, _ := fb.NodeIndex("L8")
	var spring *model.Support
	for i := range fb.Supports {
		if fb.Supports[i].Node == l8 {
			spring = &fb.Supports[i]
		}
	}
	if spring == nil || spring.Spring[0] != 20e6 || !spring.Fixed[1] || spring.Fixed[0] {
		t.Errorf("L8 support = %+v, want y fixed and a 20 MN/m spring in x", spring)
	}
	p, _ := fb.PatternIndex("settle_L8")
	if d := fb.Patterns[p].Settlements[0].D[1]; !near(d, -0.010, 1e-15) {
		t.Errorf("settlement %v m, want -0.010", d)
	}
	if fb.Gravity != [3]float64{0, -1, 0} {
		t.Errorf("gravity %v", fb.Gravity)
	}

	sb, err := LoadFile("../../testdata/reference/spring-bar.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if k := sb.Supports[1].Spring[0]; k != 1e8 {
		t.Errorf("spring 100 kN/mm = %v N/m, want 1e8", k)
	}
	ir, err := LoadFile("../../testdata/reference/inclined-roller.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if nv := ir.Supports[1].Normal; nv == nil || !near(nv[0], math.Sqrt2/2, 1e-15) || !near(nv[1], math.Sqrt2/2, 1e-15) {
		t.Errorf("normal %v, want (1, 1)/sqrt 2", nv)
	}
}

// TestFootbridgeIDs checks the Alder Creek ids and connectivity that sensor
// maps and the simulator rely on.
func TestFootbridgeIDs(t *testing.T) {
	s, err := LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i <= 8; i++ {
		for _, n := range []struct {
			id string
			x  [3]float64
		}{{fmt.Sprintf("L%d", i), [3]float64{3 * float64(i), 0, 0}}, {fmt.Sprintf("U%d", i), [3]float64{3 * float64(i), 2.5, 0}}} {
			k, ok := s.NodeIndex(n.id)
			if !ok || s.Nodes[k].X != n.x {
				t.Errorf("node %s missing or not at %v", n.id, n.x)
			}
		}
	}
	want := map[string][2]string{"C4": {"L3", "U4"}, "C5": {"U4", "L5"}}
	for i := 1; i <= 8; i++ {
		want[fmt.Sprintf("B%d", i)] = [2]string{fmt.Sprintf("L%d", i-1), fmt.Sprintf("L%d", i)}
		want[fmt.Sprintf("T%d", i)] = [2]string{fmt.Sprintf("U%d", i-1), fmt.Sprintf("U%d", i)}
		if i <= 4 {
			want[fmt.Sprintf("D%d", i)] = [2]string{fmt.Sprintf("U%d", i-1), fmt.Sprintf("L%d", i)}
		} else {
			want[fmt.Sprintf("D%d", i)] = [2]string{fmt.Sprintf("L%d", i-1), fmt.Sprintf("U%d", i)}
		}
	}
	for i := 0; i <= 8; i++ {
		want[fmt.Sprintf("V%d", i)] = [2]string{fmt.Sprintf("L%d", i), fmt.Sprintf("U%d", i)}
	}
	if len(s.Members) != len(want) {
		t.Errorf("%d members, want %d", len(s.Members), len(want))
	}
	for id, ends := range want {
		k, ok := s.MemberIndex(id)
		if !ok {
			t.Errorf("member %s missing", id)
			continue
		}
		m := s.Members[k]
		if got := [2]string{s.Nodes[m.I].ID, s.Nodes[m.J].ID}; got != ends {
			t.Errorf("member %s = %v, want %v", id, got, ends)
		}
	}
	groupOf := func(g string) map[string]bool {
		out := map[string]bool{}
		for _, i := range s.Groups[g] {
			out[s.Members[i].ID] = true
		}
		return out
	}
	if g := groupOf("top_chord"); len(g) != 8 || !g["T1"] || !g["T8"] {
		t.Errorf("top_chord = %v", g)
	}
	if g := groupOf("bottom_chord"); len(g) != 8 || !g["B1"] || !g["B8"] {
		t.Errorf("bottom_chord = %v", g)
	}
	if g := groupOf("web"); len(g) != 19 || !g["V0"] || !g["D8"] || !g["C5"] {
		t.Errorf("web = %v", g)
	}
	// Degree of static indeterminacy by counting (DESIGN.md): members +
	// reactions (the spring counts) - 2 x joints = 35 + 4 - 36 = 3.
	reactions := 0
	for _, sp := range s.Supports {
		for k := 0; k < 2; k++ {
			if sp.Fixed[k] || sp.Spring[k] > 0 {
				reactions++
			}
		}
	}
	if d := len(s.Members) + reactions - 2*len(s.Nodes); d != 3 {
		t.Errorf("degree of indeterminacy by counting = %d, want 3", d)
	}
	// Load totals: panel_i is 1 kN; crowd is 1 kPa x 24 m x 2.5 m = 60 kN;
	// deck dead load 1.5 kPa x 24 m x 2.5 m = 90 kN.
	totals := map[string]float64{"crowd": -60e3, "dead": -90e3}
	for i := 1; i <= 8; i++ {
		totals[fmt.Sprintf("panel_%d", i)] = -1e3
	}
	for name, want := range totals {
		k, ok := s.PatternIndex(name)
		if !ok {
			t.Errorf("pattern %s missing", name)
			continue
		}
		sum := 0.0
		for _, f := range s.Patterns[k].Forces {
			sum += f.F[1]
		}
		if !near(sum, want, 1e-12) {
			t.Errorf("pattern %s sums to %v N, want %v", name, sum, want)
		}
	}
	if u := s.UnknownPatterns(); len(u) != 1 || u[0] != "crowd" {
		t.Errorf("unknown patterns %v, want [crowd]", u)
	}
	for _, name := range []string{"dead_only", "service", "thermal", "panel_3_walker"} {
		if _, ok := s.CaseIndex(name); !ok {
			t.Errorf("case %s missing", name)
		}
	}
	k, _ := s.CaseIndex("service")
	if f := s.Cases[k].Factors; len(f) != 2 || f[0] != (model.Factor{Pattern: "dead", Factor: 1}) || f[1] != (model.Factor{Pattern: "crowd", Factor: 5}) {
		t.Errorf("service = %v", f)
	}
}

func TestRoofLoads(t *testing.T) {
	s, err := LoadFile(roofPath)
	if err != nil {
		t.Fatal(err)
	}
	// snow: 1 kPa x 24 m x 18 m = 432 kN; the drift half 216 kN; roofing 0.5 kPa = 216 kN.
	totals := map[string]float64{"snow": -432e3, "snow_drift_east": -216e3, "dead": -216e3, "maintenance": -4.5e3}
	for name, want := range totals {
		k, _ := s.PatternIndex(name)
		sum := 0.0
		for _, f := range s.Patterns[k].Forces {
			sum += f.F[2]
		}
		if !near(sum, want, 1e-12) {
			t.Errorf("%s sums to %v N, want %v", name, sum, want)
		}
	}
	k, _ := s.PatternIndex("snow_drift_east")
	for _, f := range s.Patterns[k].Forces {
		if s.Nodes[f.Node].X[0] < 12 {
			t.Errorf("drift load at %s, x < 12 m", s.Nodes[f.Node].ID)
		}
	}
	if len(s.Groups["top_layer"]) != 110 || len(s.Groups["bottom_layer"]) != 82 || len(s.Groups["webs"]) != 192 {
		t.Errorf("group sizes %d %d %d", len(s.Groups["top_layer"]), len(s.Groups["bottom_layer"]), len(s.Groups["webs"]))
	}
	w, _ := s.MemberIndex("W7_5c")
	if m := s.Members[w]; s.Nodes[m.I].ID != "B7_5" || s.Nodes[m.J].ID != "T8_6" {
		t.Errorf("W7_5c = %s-%s, want B7_5-T8_6", s.Nodes[m.I].ID, s.Nodes[m.J].ID)
	}
	if s.Gravity != [3]float64{0, 0, -1} {
		t.Errorf("gravity %v", s.Gravity)
	}
}

// TestDocExample parses the full example of docs/structure-file.md, so the
// documentation cannot drift from the reader.
func TestDocExample(t *testing.T) {
	doc, err := os.ReadFile("../../docs/structure-file.md")
	if err != nil {
		t.Fatal(err)
	}
	text := string(doc)
	start := strings.Index(text, "```yaml\n")
	if start < 0 {
		t.Fatal("no yaml block in docs/structure-file.md")
	}
	body := text[start+len("```yaml\n"):]
	body = body[:strings.Index(body, "```")]
	s, err := Parse("docs/structure-file.md", []byte(body))
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Nodes) != 4 || len(s.Members) != 5 || len(s.Patterns) != 4 || len(s.Cases) != 2 {
		t.Errorf("doc example: %d nodes, %d members, %d patterns, %d cases", len(s.Nodes), len(s.Members), len(s.Patterns), len(s.Cases))
	}
	k, _ := s.NodeIndex("L2")
	if s.Nodes[k].X[0] != 6 {
		t.Errorf("6000 mm read as %v m", s.Nodes[k].X[0])
	}
	p, _ := s.PatternIndex("temp_chords")
	if got := s.Patterns[p].Temperatures; len(got) != 3 || got[2].DeltaK != 0.5 {
		t.Errorf("temperatures %+v", got)
	}
	if s.Design == nil || s.Design.Standard.String() != "EN 1993-1-1" {
		t.Errorf("design %+v", s.Design)
	}
	d1, _ := s.MemberIndex("D1")
	d2, _ := s.MemberIndex("D2")
	if s.Members[d1].BucklingFactor != 0.9 || s.Members[d2].BucklingLength != 3.5 || s.Members[d2].Curve.String() != "b" || s.Members[d1].Curve.String() != "a" {
		t.Errorf("buckling inputs D1 %+v D2 %+v", s.Members[d1], s.Members[d2])
	}
	if rs, err := s.Resistances(); err != nil || len(rs) != 5 {
		t.Errorf("resistances %v, %v", rs, err)
	}
	c, _ := s.PatternIndex("crowd")
	if v, u, ok := s.Patterns[c].InReferenceUnit(2); !ok || v != 2 || u != "kPa" {
		t.Errorf("crowd reference load: %v %q %v", v, u, ok)
	}
}
