package sensors

import (
	"errors"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/yamlfile"
)

func TestFatigueBlock(t *testing.T) {
	head := "structure: x\nzero_states:\n  - {id: z}\nchannels:\n" +
		"  - id: V1_a\n    kind: strain\n    member: V1\n    unit: \"/\"\n    zero: 5.0e-6\n    zero_state: z\n    noise_microstrain: 2\n"
	good := head + "    fatigue:\n      detail_category: 71 MPa\n      gamma_Ff: 1.0\n      gamma_Mf: 1.35\n      start: 2026-03-01\n"
	m, err := Parse("f.yaml", []byte(good), smallStructure())
	if err != nil {
		t.Fatal(err)
	}
	fg := m.FatigueGauges()
	if len(fg) != 1 || fg[0].Channel != "V1_a" || fg[0].Member != "V1" || fg[0].E != 210e9 {
		t.Fatalf("fatigue gauges %+v", fg)
	}
	f := fg[0].Fatigue
	if f.Curve.DeltaSigmaC != 71e6 || f.Curve.GammaFf != 1 || f.Curve.GammaMf != 1.35 ||
		!f.Start.Equal(time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)) || f.Line != 13 {
		t.Fatalf("fatigue block %+v", f)
	}
	// The local stress is E times the converted strain (strain channel: raw - zero).
	s, err := m.Stress("V1_a", 105e-6)
	if err != nil || s != 210e9*(105e-6-5.0e-6) {
		t.Fatalf("stress %v, %v; want E (raw - zero) = %v", s, err, 210e9*(105e-6-5.0e-6))
	}
	// Categories in other stress units convert (10.3 ksi is about 71 MPa but not
	// exactly, and so is refused; 0.071 GPa is 71 MPa).
	if _, err := Parse("f.yaml", []byte(strings.Replace(good, "71 MPa", "0.071 GPa", 1)), smallStructure()); err != nil {
		t.Errorf("0.071 GPa refused: %v", err)
	}

	for _, tc := range []struct{ name, block, want string }{
		{"not a category", "      detail_category: 70 MPa\n      gamma_Ff: 1.0\n      gamma_Mf: 1.0\n", `f.yaml:13: channels[V1_a].fatigue.detail_category: 70 MPa is not a detail category`},
		{"no unit", "      detail_category: 71\n      gamma_Ff: 1.0\n      gamma_Mf: 1.0\n", `f.yaml:13: channels[V1_a].fatigue.detail_category`},
		{"ksi", "      detail_category: 10.3 ksi\n      gamma_Ff: 1.0\n      gamma_Mf: 1.0\n", `channels[V1_a].fatigue.detail_category`},
		{"missing gamma", "      detail_category: 71 MPa\n      gamma_Ff: 1.0\n", `f.yaml:13: channels[V1_a].fatigue.gamma_Mf: missing`},
		{"gamma below 1", "      detail_category: 71 MPa\n      gamma_Ff: 0.8\n      gamma_Mf: 1.0\n", `f.yaml:14: channels[V1_a].fatigue.gamma_Ff: 0.8 is outside 1 to 2`},
		{"bad start", "      detail_category: 71 MPa\n      gamma_Ff: 1.0\n      gamma_Mf: 1.0\n      start: yesterday\n", `f.yaml:16: channels[V1_a].fatigue.start`},
		{"unknown field", "      detail_category: 71 MPa\n      gamma_Ff: 1.0\n      gamma_Mf: 1.0\n      slope: 3\n", `f.yaml:16: channels[V1_a].fatigue.slope: unknown field "slope"`},
	} {
		_, err := Parse("f.yaml", []byte(head+"    fatigue:\n"+tc.block), smallStructure())
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want it to contain %q", tc.name, err, tc.want)
		}
		var fe *yamlfile.Error
		if err != nil && !errors.As(err, &fe) {
			t.Errorf("%s: no *yamlfile.Error in %v", tc.name, err)
		}
	}
	// A load channel has no fatigue block.
	bad := "structure: x\nchannels:\n  - {id: p, kind: load, pattern: panel_1, unit: N, factor: 0.001, noise: 1, fatigue: {detail_category: 71 MPa}}\n"
	if _, err := Parse("f.yaml", []byte(bad), smallStructure()); err == nil || !strings.Contains(err.Error(), `channels[p].fatigue: unknown field`) {
		t.Errorf("fatigue on a load channel: %v", err)
	}
}

func TestFootbridgeFatigueGauges(t *testing.T) {
	m, _ := loadPair(t, "footbridge")
	var ids []string
	for _, g := range m.FatigueGauges() {
		ids = append(ids, g.Channel)
		if g.E <= 0 {
			t.Errorf("%s: E = %v", g.Channel, g.E)
		}
	}
	if strings.Join(ids, " ") != "B4_a B4_b D1_a D1_b" {
		t.Errorf("fatigue gauges %v", ids)
	}
}
