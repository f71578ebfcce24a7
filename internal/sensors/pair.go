package sensors

import (
	"fmt"
	"os"
)

// MismatchError says that a sensor map belongs to another structure than
// the structure file it was given with.
type MismatchError struct {
	// SensorsPath and MapStructure are the sensor map's file and the
	// structure it names; StructurePath and Structure the structure file
	// and its name.
	SensorsPath, MapStructure string
	StructurePath, Structure  string
}

func (e *MismatchError) Error() string {
	return fmt.Sprintf("%s is the sensor map of structure %q but %s is structure %q; give the sensor map of the same structure", e.SensorsPath, e.MapStructure, e.StructurePath, e.Structure)
}

// LoadFor reads the sensor map at path and checks that it belongs to the
// structure named name (read from structurePath): the one check of "this
// sensor map belongs to this structure", shared by every command. The name
// is compared before the full validation, so a map of another structure is
// refused with a *MismatchError rather than a list of every member and
// pattern the structure lacks.
func LoadFor(path string, st Structure, name, structurePath string) (*Map, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("sensor map: %w", err)
	}
	if n := StructureNameOf(data); n != "" && n != name {
		return nil, &MismatchError{SensorsPath: path, MapStructure: n, StructurePath: structurePath, Structure: name}
	}
	m, err := Parse(path, data, st)
	if err != nil {
		return nil, err
	}
	if m.StructureName() != name {
		return nil, &MismatchError{SensorsPath: path, MapStructure: m.StructureName(), StructurePath: structurePath, Structure: name}
	}
	return m, nil
}
