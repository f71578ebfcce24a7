//go:build race

package reconcile

// raceDetector is true in a build with the race detector (go test -race),
// which runs this package's long scenario tests about ten times slower:
// the month-long scenarios and the identification scenarios shrink then.
const raceDetector = true
