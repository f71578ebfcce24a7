package sensors

import (
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"trussmonitor/internal/structfile"
)

// loadPair reads a structure file and its sensor map from testdata; it
// skips while the structure file has not been written yet.
func loadPair(t *testing.T, dir string) (*Map, Structure) {
	t.Helper()
	sp := filepath.Join("..", "..", "testdata", dir, "structure.yaml")
	if _, err := os.Stat(sp); err != nil {
		t.Skipf("structure file %s not present yet: %v", sp, err)
	}
	st, err := structfile.LoadFile(sp)
	if err != nil {
		t.Fatalf("structure file: %v", err)
	}
	m, err := LoadFile(filepath.Join("..", "..", "testdata", dir, "sensors.yaml"), st)
	if err != nil {
		t.Fatalf("sensor map: %v", err)
	}
	if m.StructureName() != st.Name {
		t.Errorf("sensor map is for %q, structure file is %q", m.StructureName(), st.Name)
	}
	return m, st
}

func TestFootbridgeMap(t *testing.T) {
	m, st := loadPair(t, "footbridge")
	want := strings.Fields("B2 B4 B5 B7 T3 T4 T5 T6 D1 D2 D3 D6 D7 D8 V1 V7 C4 C5")
	got := m.GaugedMembers()
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("gauged members %v, want %v", got, want)
	}
	kinds := map[Kind]int{}
	for _, ch := range m.Channels() {
		kinds[ch.Kind]++
	}
	if kinds[KindQuarterBridge] != 8 || kinds[KindVibratingWire] != 8 || kinds[KindHalfBridgePoisson] != 12 ||
		kinds[KindStrain] != 8 || kinds[KindLoad] != 8 || kinds[KindTemperature] != 2 {
		t.Errorf("channel kinds %v", kinds)
	}
	simulateAndRecover(t, m, st, 27, 33)
}

func TestRoofMap(t *testing.T) {
	m, st := loadPair(t, "roof")
	if n := len(m.GaugedMembers()); n != 24 {
		t.Errorf("%d gauged members, want 24", n)
	}
	// Snow: 0.4 m at 150 kg/m3 (from memory) on the 1 kPa pattern.
	f, err := m.Convert("snow_depth", 0.4)
	if err != nil || math.Abs(f-0.4*150*9.80665/1000) > 1e-12 {
		t.Errorf("snow factor %g, %v", f, err)
	}
	simulateAndRecover(t, m, st, 4, -2)
}

// simulateAndRecover builds raw readings of every gauge for known axial
// strains plus opposite bending on the two faces, at the given top and
// bottom temperatures, and checks that Evaluate returns N = E A e_axial.
func simulateAndRecover(t *testing.T, m *Map, st Structure, tTop, tBottom float64) {
	t.Helper()
	temp := map[string]float64{}
	values := map[string]float64{}
	for _, ch := range m.Channels() {
		if ch.Kind == KindTemperature {
			v := tBottom
			if strings.Contains(ch.ID, "top") {
				v = tTop
			}
			temp[ch.ID] = v
			raw, err := m.Raw(ch.ID, v)
			if err != nil {
				t.Fatal(err)
			}
			values[ch.ID], _ = m.Convert(ch.ID, raw)
		}
	}
	axial := map[string]float64{}
	for i, mem := range m.GaugedMembers() {
		axial[mem] = float64(i-10) * 17e-6
	}
	for _, ch := range m.Channels() {
		if !ch.Kind.IsGauge() {
			continue
		}
		e := axial[ch.Member]
		switch {
		case strings.HasSuffix(ch.ID, "_a"):
			e += 25e-6
		case strings.HasSuffix(ch.ID, "_b"):
			e -= 25e-6
		}
		var raw float64
		var err error
		if ch.TemperatureChannel != "" {
			raw, err = m.Raw(ch.ID, e, temp[ch.TemperatureChannel])
		} else {
			raw, err = m.Raw(ch.ID, e)
		}
		if err != nil {
			t.Fatal(err)
		}
		if err := m.Validate(ch.ID, ch.Unit, raw); err != nil {
			t.Errorf("simulated reading rejected: %v", err)
		}
		values[ch.ID], err = m.Convert(ch.ID, raw)
		if err != nil {
			t.Fatal(err)
		}
	}
	s := m.Evaluate(values)
	for _, mm := range s.Members {
		e, a, _, _ := st.MemberProperties(mm.Member)
		want := e * a * axial[mm.Member]
		if math.Abs(mm.ForceN-want) > 1e-3 {
			t.Errorf("%s: N = %.4f N, want %.4f", mm.Member, mm.ForceN, want)
		}
		if mm.SigmaN <= 0 || mm.Gauges != mm.Expected {
			t.Errorf("%s: sigma %g, %d of %d gauges", mm.Member, mm.SigmaN, mm.Gauges, mm.Expected)
		}
		if mm.ZeroLoads["dead"] != 1 {
			t.Errorf("%s: zero loads %v", mm.Member, mm.ZeroLoads)
		}
	}
	var missing []string
	missing = append(missing, s.MissingLoads...)
	sort.Strings(missing)
	if s.Loads["dead"] != 1 || len(missing) == 0 {
		t.Errorf("loads %v, missing %v (no load channel was given a value)", s.Loads, missing)
	}
	if len(s.MissingTemperatures) != 0 {
		t.Errorf("missing temperatures %v", s.MissingTemperatures)
	}
}
