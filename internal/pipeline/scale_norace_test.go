//go:build !race

package pipeline

// scnRace is false without the race detector: the identification
// scenarios run in full.
const scnRace = false
