package reconcile

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// BenchmarkEpoch measures one epoch for G gauges and 5 unknown loads, with
// the channel set unchanged (cached plan) and with a different set every
// epoch (alternating between many masks, more than the cache holds, so
// each epoch rebuilds its plan).
func BenchmarkEpoch(b *testing.B) {
	for _, g := range []int{20, 200, 2000} {
		rng := rand.New(rand.NewPCG(uint64(g), 1))
		A, sigma := randomDesign(rng, g, 5)
		y := make([]float64, g)
		yhat := make([]float64, g)
		for i := range y {
			y[i] = 1e4 * rng.NormFloat64()
		}
		masks := make([][]bool, 64)
		for m := range masks {
			masks[m] = make([]bool, g)
			for i := range masks[m] {
				masks[m][i] = i != m%g
			}
		}
		b.Run(fmt.Sprintf("G=%d/unchanged", g), func(b *testing.B) {
			s, err := NewSolver(A, sigma, Options{})
			if err != nil {
				b.Fatal(err)
			}
			var res Result
			b.ReportAllocs()
			for b.Loop() {
				if err := s.EpochInto(&res, y, yhat, masks[0]); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("G=%d/changed", g), func(b *testing.B) {
			s, err := NewSolver(A, sigma, Options{})
			if err != nil {
				b.Fatal(err)
			}
			var res Result
			b.ReportAllocs()
			k := 0
			for b.Loop() {
				if err := s.EpochInto(&res, y, yhat, masks[k%len(masks)]); err != nil {
					b.Fatal(err)
				}
				k++
			}
		})
	}
}
