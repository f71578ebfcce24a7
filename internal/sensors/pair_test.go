package sensors_test

import (
	"errors"
	"strings"
	"testing"

	"trussmonitor/internal/sensors"
	"trussmonitor/internal/structfile"
)

// TestLoadForRefusesAnotherStructure: a sensor map is accepted only with the
// structure it names; the footbridge's map with the roof gives a
// *MismatchError naming both files (not a list of every member the roof
// lacks), and the matching pair loads.
func TestLoadForRefusesAnotherStructure(t *testing.T) {
	const roofPath, bridgePath, mapPath = "../../testdata/roof/structure.yaml", "../../testdata/footbridge/structure.yaml", "../../testdata/footbridge/sensors.yaml"
	roof, err := structfile.LoadFile(roofPath)
	if err != nil {
		t.Fatal(err)
	}
	_, err = sensors.LoadFor(mapPath, roof, roof.Name, roofPath)
	var me *sensors.MismatchError
	if !errors.As(err, &me) || me.MapStructure != "alder-creek" || me.Structure != "harbour-hall" {
		t.Fatalf("err = %v, want a MismatchError alder-creek vs harbour-hall", err)
	}
	for _, want := range []string{mapPath, roofPath, `"alder-creek"`, `"harbour-hall"`} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("message %q lacks %q", err.Error(), want)
		}
	}
	bridge, err := structfile.LoadFile(bridgePath)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := sensors.LoadFor(mapPath, bridge, bridge.Name, bridgePath); err != nil {
		t.Errorf("matching pair refused: %v", err)
	}
}
