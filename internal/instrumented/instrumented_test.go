package instrumented_test

import (
	"errors"
	"strings"
	"testing"

	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/structfile"
)

// TestSensorsForRefusesAnotherStructure: a sensor map is accepted only with
// the structure it names; the footbridge's map with the roof gives a
// *MismatchError naming both files (not a list of every member the roof
// lacks), and the matching pair loads.
func TestSensorsForRefusesAnotherStructure(t *testing.T) {
	const roofPath, bridgePath, mapPath = "../../testdata/roof/structure.yaml", "../../testdata/footbridge/structure.yaml", "../../testdata/footbridge/sensors.yaml"
	roof, err := structfile.LoadFile(roofPath)
	if err != nil {
		t.Fatal(err)
	}
	_, err = instrumented.ReadSensorsFor(mapPath, roof, roofPath)
	var me *instrumented.MismatchError
	if !errors.As(err, &me) || me.MapStructure != "alder-creek" || me.Structure != "harbour-hall" {
		t.Fatalf("err = %v, want a MismatchError alder-creek vs harbour-hall", err)
	}
	for _, want := range []string{mapPath, roofPath, `"alder-creek"`, `"harbour-hall"`} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("message %q lacks %q", err.Error(), want)
		}
	}
	if _, err := instrumented.Load(roofPath, mapPath); !errors.As(err, &me) {
		t.Errorf("Load of the mismatched pair: err = %v, want a MismatchError", err)
	}
	b, err := instrumented.Load(bridgePath, mapPath)
	if err != nil {
		t.Fatalf("matching pair refused: %v", err)
	}
	if b.Structure.Name != "alder-creek" || b.Sensors.StructureName() != "alder-creek" || b.Model == nil || len(b.Content) == 0 {
		t.Errorf("Load = structure %q, sensor map of %q, model %v, %d bytes", b.Structure.Name, b.Sensors.StructureName(), b.Model != nil, len(b.Content))
	}
}

// TestLoadNamesTheMissingFile: a missing file is named with its role.
func TestLoadNamesTheMissingFile(t *testing.T) {
	cases := []struct{ structure, sensors, want string }{
		{"../../testdata/none.yaml", "../../testdata/footbridge/sensors.yaml", "structure file: "},
		{"../../testdata/footbridge/structure.yaml", "../../testdata/none.yaml", "sensor map: "},
	}
	for _, c := range cases {
		_, err := instrumented.Load(c.structure, c.sensors)
		if err == nil || !strings.HasPrefix(err.Error(), c.want) || !strings.Contains(err.Error(), "none.yaml") {
			t.Errorf("Load(%s, %s) = %v, want %q... naming none.yaml", c.structure, c.sensors, err, c.want)
		}
	}
}
