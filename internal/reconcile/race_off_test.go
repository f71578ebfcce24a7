//go:build !race

package reconcile

// raceDetector is true in a build with the race detector (go test -race).
const raceDetector = false
