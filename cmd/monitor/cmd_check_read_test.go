package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// twoBarYAML is the symmetric two-bar truss of testdata/reference/two-bar.yaml
// with node C's coordinates and the load given by the test.
func twoBarYAML(cAt, load string) string {
	return `name: two-bar
dimension: 2
units:
  length: m
  force: kN
nodes:
  - {id: A, at: [-3, 4]}
  - {id: B, at: [3, 4]}
  - {id: C, at: ` + cAt + `}
materials:
  - {id: steel, modulus: 200 GPa, density: 7850 kg/m3}
sections:
  - {id: bar, area: 1000 mm2, material: steel}
members:
  - {id: AC, from: A, to: C, section: bar}
  - {id: BC, from: B, to: C, section: bar}
supports:
  - {node: A, fix: [x, y]}
  - {node: B, fix: [x, y]}
patterns:
  - name: P
    forces:
      - {node: C, ` + load + `}
cases:
  - {name: P100, combine: {P: 1}}
`
}

func writeTemp(t *testing.T, name, text string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestCheckGeometryAndPlausibility: the geometry section (extents, shortest
// and longest member, self-weight), the size warnings with their bounds,
// the magnitude error for an absurd coordinate, and "no member in
// compression" for a truss in pure tension.
func TestCheckGeometryAndPlausibility(t *testing.T) {
	// C at (0, 0): both bars 5 m; self-weight 2 x 7850 x 1e-3 x 5 x 9.80665
	// = 769.822 N (standard gravity, CGPM 1901).
	code, out, errs := runModelCmd(t, runCheck, writeTemp(t, "ok.yaml", twoBarYAML("[0, 0]", "y: -100")))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{
		"extent x     -3.000 m to 3.000 m (6.000 m)",
		"extent y     0.000 m to 4.000 m (4.000 m)",
		"shortest     AC, 5.000 m", "longest      AC, 5.000 m",
		"self-weight  0.770 kN",
		"sizes        plausible (members 10 mm to 300 m, coordinates within 5 km: common practice)",
		// Both bars hang in tension under a downward load.
		"max tension 62.500 kN in AC, no member in compression",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, " in ,") {
		t.Errorf("an extreme names no member:\n%s", out)
	}

	// 8000 meant as mm with m as the default length: an 8 km member.
	code, out, errs = runModelCmd(t, runCheck, writeTemp(t, "mm.yaml", twoBarYAML("[0, -8000]", "y: -100")))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{"WARNING      member AC: length 8004.001 m is longer than 300 m", "WARNING      node C: coordinate 8000 m is beyond 5000 m", "common practice"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}

	// 8e30: an error about the magnitude, not about coinciding nodes.
	code, _, errs = runModelCmd(t, runCheck, writeTemp(t, "huge.yaml", twoBarYAML("[0, 8e30]", "y: -100")))
	if code == 0 || !strings.Contains(errs, "beyond the valid range") || strings.Contains(errs, "coincide") {
		t.Errorf("8e30: exit %d, stderr %q", code, errs)
	}
}

// TestCheckSensorsOfAnotherStructure: the roof's sensor map with the
// footbridge is refused by check, as by run --check-config and the other
// commands (one shared check, instrumented.SensorsFor).
func TestCheckSensorsOfAnotherStructure(t *testing.T) {
	code, _, errs := runModelCmd(t, runCheck, footbridgeFile, "--sensors", "../../testdata/roof/sensors.yaml")
	if code == 0 || !strings.Contains(errs, "is the sensor map of structure") || !strings.Contains(errs, "roof/sensors.yaml") {
		t.Errorf("exit %d, stderr %q", code, errs)
	}
	// A structure with every member and pattern of the footbridge but
	// another name: the map's references all resolve, and before the shared
	// check this exited 0 with no word.
	data, err := os.ReadFile(footbridgeFile)
	if err != nil {
		t.Fatal(err)
	}
	other := writeTemp(t, "copy.yaml", strings.Replace(string(data), "\nname: alder-creek\n", "\nname: alder-creek-copy\n", 1))
	code, _, errs = runModelCmd(t, runCheck, other, "--sensors", "../../testdata/footbridge/sensors.yaml")
	if code == 0 || !strings.Contains(errs, `is the sensor map of structure "alder-creek" but`) || !strings.Contains(errs, `"alder-creek-copy"`) {
		t.Errorf("renamed structure: exit %d, stderr %q", code, errs)
	}
}

// TestMechanismMessages: a 2D free motion prints two components, and a
// mechanism with more moving nodes than listed says how many more.
func TestMechanismMessages(t *testing.T) {
	// A braced truss of five panels held only in y at both ends: it
	// slides along x as a rigid body, all 12 nodes moving (1, 0) or (-1, 0).
	var b strings.Builder
	b.WriteString("name: slider\ndimension: 2\nunits: {length: m, force: kN}\nnodes:\n")
	for i := 0; i <= 5; i++ {
		d := string(rune('0' + i))
		b.WriteString("  - {id: L" + d + ", at: [" + d + ", 0]}\n  - {id: U" + d + ", at: [" + d + ", 1]}\n")
	}
	b.WriteString("materials:\n  - {id: steel, modulus: 200 GPa}\nsections:\n  - {id: bar, area: 1000 mm2, material: steel}\nmembers:\n")
	for i := 0; i <= 5; i++ {
		d := string(rune('0' + i))
		b.WriteString("  - {id: V" + d + ", from: L" + d + ", to: U" + d + ", section: bar}\n")
		if i < 5 {
			e := string(rune('1' + i))
			b.WriteString("  - {id: B" + d + ", from: L" + d + ", to: L" + e + ", section: bar}\n")
			b.WriteString("  - {id: T" + d + ", from: U" + d + ", to: U" + e + ", section: bar}\n")
			b.WriteString("  - {id: D" + d + ", from: L" + d + ", to: U" + e + ", section: bar}\n")
		}
	}
	b.WriteString("supports:\n  - {node: L0, fix: [y]}\n  - {node: L5, fix: [y]}\npatterns:\n  - name: P\n    forces:\n      - {node: L2, y: -1}\ncases:\n  - {name: P1, combine: {P: 1}}\n")
	path := writeTemp(t, "chain.yaml", b.String())
	code, out, errs := runModelCmd(t, runCheck, path)
	if code == 0 {
		t.Fatalf("mechanism accepted:\n%s\n%s", out, errs)
	}
	if !strings.Contains(out, "free motion 1:") || !regexp.MustCompile(` moves \(-?1, 0\)`).MatchString(out) || strings.Contains(out, "1, 0, 0)") {
		t.Errorf("free motion output (want two components per node):\n%s", out)
	}
	code, _, errs = runModelCmd(t, runSolve, path)
	if code == 0 || !strings.Contains(errs, "and 6 more node(s) (12 move in all)") {
		t.Errorf("solve: exit %d, stderr %q", code, errs)
	}
}

// TestSolveUnits: a file in US customary units reports in kip, ksi and in by
// default; --units si and --units us choose. D. L. Logan, A First Course in
// the Finite Element Method, Example 3.5 (from memory, edition not
// checked): u1 = 0.414e-2 in, v1 = -0.159e-1 in; the bar forces follow from
// them (see testdata/reference/logan-3-5.yaml).
func TestSolveUnits(t *testing.T) {
	const logan = "../../testdata/reference/logan-3-5.yaml"
	code, out, errs := runModelCmd(t, runSolve, logan)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{"force kip", "stress ksi", "ux in", "0.0041", "-0.0159", "Ry kip"} {
		if !strings.Contains(out, want) {
			t.Errorf("US default lacks %q:\n%s", want, out)
		}
	}
	code, out, _ = runModelCmd(t, runSolve, logan, "--units", "si")
	// -0.0159 in = -0.404 mm.
	if code != 0 || !strings.Contains(out, "force kN") || !strings.Contains(out, "ux mm") || !strings.Contains(out, "-0.40") {
		t.Errorf("--units si: exit %d\n%s", code, out)
	}
	code, out, _ = runModelCmd(t, runSolve, footbridgeFile, "--case", "service", "--units", "us")
	// D2 carries 210.639 kN = 47.354 kip (1 kip = 4.4482216152605 kN, NIST SP 811 (2008) App. B).
	if code != 0 || !strings.Contains(out, "47.354") {
		t.Errorf("--units us on the footbridge: exit %d\n%s", code, out)
	}
	if code, _, _ = runModelCmd(t, runSolve, logan, "--units", "imperial"); code != 2 {
		t.Errorf("--units imperial: exit %d, want 2", code)
	}
}
