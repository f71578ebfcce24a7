// Package simtest holds the simulator helpers that only tests and
// benchmarks use (programs range over simulate.Generator.All directly).
package simtest

import "trussmonitor/internal/simulate"

// Run calls fn with every step of g in time order and stops at the first
// error (from the generator or from fn).
func Run(g *simulate.Generator, fn func(simulate.Step) error) error {
	for st, err := range g.All() {
		if err != nil {
			return err
		}
		if err := fn(st); err != nil {
			return err
		}
	}
	return nil
}
