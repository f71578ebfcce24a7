// Package instrumented loads a structure together with its sensor map: the
// structure file, the analysed model and the sensor map, and the one check
// that the sensor map belongs to that structure. Every command and the
// service load their pair of files here.
package instrumented

import (
	"fmt"
	"os"

	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/structfile"
)

// Structure is one structure ready to monitor: its model and sensor map.
type Structure struct {
	Structure *model.Structure
	Model     *model.Model
	Sensors   *sensors.Map
	// Content is the structure file's bytes (stored as a model version).
	Content []byte
}

// Load reads the structure file and the sensor map at the two paths,
// analyses the structure and checks that the sensor map is that of the
// structure (a *MismatchError when it is not).
func Load(structurePath, sensorsPath string) (*Structure, error) {
	content, err := os.ReadFile(structurePath)
	if err != nil {
		return nil, fmt.Errorf("structure file: %w", err)
	}
	sdata, err := os.ReadFile(sensorsPath)
	if err != nil {
		return nil, fmt.Errorf("sensor map: %w", err)
	}
	return Parse(structurePath, content, sensorsPath, sdata)
}

// Parse is Load on the files' contents; structureFile and sensorsFile name
// the sources in errors.
func Parse(structureFile string, content []byte, sensorsFile string, sensorMap []byte) (*Structure, error) {
	st, err := structfile.Parse(structureFile, content)
	if err != nil {
		return nil, err
	}
	m, err := model.Analyze(st)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", structureFile, err)
	}
	sm, err := SensorsFor(sensorsFile, sensorMap, st, structureFile)
	if err != nil {
		return nil, err
	}
	return &Structure{Structure: st, Model: m, Sensors: sm, Content: content}, nil
}

// ReadSensorsFor reads the sensor map at path and checks it against st,
// read from structureFile (see SensorsFor).
func ReadSensorsFor(path string, st *model.Structure, structureFile string) (*sensors.Map, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("sensor map: %w", err)
	}
	return SensorsFor(path, data, st, structureFile)
}

// SensorsFor parses the sensor map data (from sensorsFile) against st (from
// structureFile, which names it in errors): the one check of "this sensor
// map belongs to this structure". The structure name the map gives is
// compared before the full validation, so a map of another structure is
// refused with a *MismatchError rather than a list of every member and
// pattern the structure lacks.
func SensorsFor(sensorsFile string, data []byte, st *model.Structure, structureFile string) (*sensors.Map, error) {
	if n := sensors.StructureNameOf(data); n != "" && n != st.Name {
		return nil, &MismatchError{SensorsPath: sensorsFile, MapStructure: n, StructurePath: structureFile, Structure: st.Name}
	}
	m, err := sensors.Parse(sensorsFile, data, st)
	if err != nil {
		return nil, err
	}
	if m.StructureName() != st.Name {
		return nil, &MismatchError{SensorsPath: sensorsFile, MapStructure: m.StructureName(), StructurePath: structureFile, Structure: st.Name}
	}
	return m, nil
}

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
