// Package trussmonitor carries the example structures of the project (the
// invented Alder Creek footbridge and Harbour Hall roof, demo data only) so
// that `monitor demo` runs with no files at hand.
package trussmonitor

import "embed"

// Examples holds testdata/footbridge and testdata/roof: structure.yaml and
// sensors.yaml of each.
//
//go:embed testdata/footbridge/structure.yaml testdata/footbridge/sensors.yaml testdata/roof/structure.yaml testdata/roof/sensors.yaml
var Examples embed.FS
