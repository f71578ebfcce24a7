package model

import (
	"sync"
	"testing"
)

// TestConcurrentSolves: a Model is used by several goroutines at once (the
// pipeline solves epochs while the HTTP API solves cases); results must be
// identical to sequential ones (run with -race).
func TestConcurrentSolves(t *testing.T) {
	s := randomTruss(3, 3, 14, 6)
	m := analyze(t, s)
	want := solve(t, m, Factor{"F", 1}, Factor{"T", 3})
	var wg sync.WaitGroup
	errs := make(chan string, 8)
	for g := 0; g < 8; g++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := 0; i < 20; i++ {
				r, err := m.SolveFactors([]Factor{{"F", 1}, {"T", 3}})
				if err != nil {
					errs <- err.Error()
					return
				}
				for e := range r.Forces {
					if r.Forces[e] != want.Forces[e] {
						errs <- "different forces from concurrent solves"
						return
					}
				}
				if _, err := m.Influence([]int{0, 1}, []Input{{PatternInput, "F"}}); err != nil {
					errs <- err.Error()
					return
				}
			}
		}()
	}
	wg.Wait()
	close(errs)
	for e := range errs {
		t.Error(e)
	}
}
