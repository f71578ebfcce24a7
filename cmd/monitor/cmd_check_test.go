package main

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

var updateModelGolden = flag.Bool("update-model-golden", false, "rewrite the check/solve golden files in cmd/monitor/testdata")

// goldenSciFigure matches the printed equilibrium figures (rounding noise that
// depends on the factorisation's ordering), masked in golden comparisons.
var goldenSciFigure = regexp.MustCompile(`[0-9]\.[0-9]+e[-+][0-9]+`)

// goldenImbalanceJoint matches the joint named with the largest imbalance, which
// is also rounding noise.
var goldenImbalanceJoint = regexp.MustCompile(` at [^,]+, relative`)

func checkGolden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	masked := goldenSciFigure.ReplaceAll(got, []byte("#e#"))
	masked = goldenImbalanceJoint.ReplaceAll(masked, []byte(" at #, relative"))
	if *updateModelGolden {
		if err := os.WriteFile(path, masked, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./cmd/monitor -run %s -update-model-golden)", err, t.Name())
	}
	if !bytes.Equal(masked, want) {
		t.Errorf("output differs from %s:\n%s", path, masked)
	}
}

type modelCmdFunc func(context.Context, []string, io.Writer, io.Writer) int

func runModelCmd(t *testing.T, f modelCmdFunc, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := f(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

const footbridgeFile = "../../testdata/footbridge/structure.yaml"

func TestCheckFootbridgeGolden(t *testing.T) {
	code, out, errs := runModelCmd(t, runCheck, footbridgeFile)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	checkGolden(t, "check_footbridge.golden", []byte(out))
	for _, want := range []string{"by counting  m + r - 2 j = 35 + 4 - 2 x 18 = 3", "by rank      3", "stable", ": ok"} {
		if !strings.Contains(out, want) {
			t.Errorf("summary lacks %q", want)
		}
	}
}

func TestCheckReferenceFiles(t *testing.T) {
	for _, c := range []struct {
		file  string
		wants []string
	}{
		// Four-panel Pratt truss, determinate: the method of joints runs.
		{"pratt-4.yaml", []string{"= 0", "largest difference", "statically determinate and stable"}},
		{"tripod.yaml", []string{"space truss", "not applicable: space truss"}},
		{"logan-3-5.yaml", []string{"not applicable: statically indeterminate (degree 1)"}},
	} {
		t.Run(c.file, func(t *testing.T) {
			code, out, errs := runModelCmd(t, runCheck, filepath.Join("../../testdata/reference", c.file))
			if code != 0 {
				t.Fatalf("exit %d: %s", code, errs)
			}
			for _, w := range c.wants {
				if !strings.Contains(out, w) {
					t.Errorf("output lacks %q:\n%s", w, out)
				}
			}
		})
	}
}

func TestCheckMechanismAndErrors(t *testing.T) {
	dir := t.TempDir()
	mech := filepath.Join(dir, "mech.yaml")
	// A square without a diagonal on a pin and a roller sways.
	if err := os.WriteFile(mech, []byte(`name: sway
dimension: 2
units: {length: m, force: kN, stress: N/mm2, area: mm2}
nodes:
  - {id: A, at: [0, 0]}
  - {id: B, at: [3, 0]}
  - {id: C, at: [3, 3]}
  - {id: D, at: [0, 3]}
materials:
  - {id: steel, modulus: 210000 N/mm2}
sections:
  - {id: bar, area: 1000 mm2, material: steel}
members:
  - {id: AB, from: A, to: B, section: bar}
  - {id: BC, from: B, to: C, section: bar}
  - {id: CD, from: C, to: D, section: bar}
  - {id: DA, from: D, to: A, section: bar}
supports:
  - {node: A, fix: [x, y]}
  - {node: B, fix: [y]}
`), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errs := runModelCmd(t, runCheck, mech)
	if code != 1 || !strings.Contains(out, "UNSTABLE") || !strings.Contains(out, "free motion 1") || !strings.Contains(errs, "mechanism") {
		t.Errorf("mechanism: exit %d\n%s\n%s", code, out, errs)
	}
	code, _, errs = runModelCmd(t, runCheck, filepath.Join(dir, "does-not-exist.yaml"))
	if code != 1 || errs == "" {
		t.Errorf("missing file: exit %d, %q", code, errs)
	}
	if code, _, _ = runModelCmd(t, runCheck); code != 2 {
		t.Errorf("no file: exit %d, want 2", code)
	}
	// Every invalid example file is rejected with a message naming it.
	files, _ := filepath.Glob("../../testdata/invalid/*.yaml")
	for _, f := range files {
		code, _, errs := runModelCmd(t, runCheck, f)
		if code != 1 || !strings.Contains(errs, filepath.Base(f)) {
			t.Errorf("%s: exit %d, stderr %q", f, code, errs)
		}
	}
}

func TestSolveFootbridge(t *testing.T) {
	code, out, errs := runModelCmd(t, runSolve, footbridgeFile, "--case", "service")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	checkGolden(t, "solve_footbridge_service.golden", []byte(out))

	code, out, errs = runModelCmd(t, runSolve, "--json", "--case", "service", footbridgeFile)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var js struct {
		Members []struct {
			ID       string  `json:"id"`
			ForceN   float64 `json:"force_n"`
			StressPa float64 `json:"stress_pa"`
		} `json:"members"`
		Nodes []struct {
			ID string    `json:"id"`
			D  []float64 `json:"displacement_m"`
		} `json:"nodes"`
		Reactions []struct {
			Node   string    `json:"node"`
			ForceN []float64 `json:"force_n"`
		} `json:"reactions"`
		Equilibrium struct {
			MaxImbalanceN float64 `json:"max_imbalance_n"`
			Relative      float64 `json:"relative"`
		} `json:"equilibrium"`
	}
	if err := json.Unmarshal([]byte(out), &js); err != nil {
		t.Fatalf("JSON: %v\n%s", err, out)
	}
	if len(js.Members) != 35 || len(js.Nodes) != 18 || len(js.Reactions) != 2 || len(js.Nodes[0].D) != 2 {
		t.Fatalf("JSON shape: %d members, %d nodes, %d reactions", len(js.Members), len(js.Nodes), len(js.Reactions))
	}
	if js.Equilibrium.Relative > 1e-9 {
		t.Errorf("equilibrium %g", js.Equilibrium.Relative)
	}
	// The vertical reactions carry the whole downward load (positive sum).
	var ry float64
	for _, r := range js.Reactions {
		ry += r.ForceN[1]
	}
	if ry <= 0 || math.IsNaN(ry) {
		t.Errorf("vertical reactions sum %g", ry)
	}
	for _, m := range js.Members {
		// B5 is a bottom chord SHS 200x200x10, A = 7490 mm2.
		if m.ID == "B5" && (m.ForceN <= 0 || math.Abs(m.StressPa-m.ForceN/7490e-6) > 1) {
			t.Errorf("B5: %+v", m)
		}
	}
	if code, _, errs := runModelCmd(t, runSolve, footbridgeFile, "--case", "nope"); code != 1 || !strings.Contains(errs, "unknown load case") {
		t.Errorf("unknown case: exit %d %q", code, errs)
	}
	if code, _, errs := runModelCmd(t, runSolve, footbridgeFile); code != 2 || !strings.Contains(errs, "--case") {
		t.Errorf("no case: exit %d %q", code, errs)
	}
}
