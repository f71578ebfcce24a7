//go:build race

package pipeline

// scnRace is true under the race detector (about ten times slower): the
// identification scenarios run a subset at shorter lengths.
const scnRace = true
