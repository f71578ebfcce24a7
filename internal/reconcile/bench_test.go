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

// BenchmarkCauses ranks 200 gauge faults plus 200 dense (stiffness-like)
// signatures for 200 gauges and 5 unknowns: the cost of one ranking after
// a rejection.
func BenchmarkCauses(b *testing.B) {
	const g = 200
	rng := rand.New(rand.NewPCG(8, 8))
	A, sigma := randomDesign(rng, g, 5)
	s, err := NewSolver(A, sigma, Options{})
	if err != nil {
		b.Fatal(err)
	}
	y := make([]float64, g)
	for i := range y {
		y[i] = sigma[i] * rng.NormFloat64()
	}
	res, err := s.Epoch(y, make([]float64, g), nil)
	if err != nil {
		b.Fatal(err)
	}
	names := make([]string, g)
	for i := range names {
		names[i] = fmt.Sprint(i)
	}
	cands := GaugeFaults(names)
	for k := 0; k < 200; k++ {
		sig := make([]float64, g)
		for i := range sig {
			sig[i] = rng.NormFloat64()
		}
		cands = append(cands, Candidate{Kind: StiffnessChange, Label: fmt.Sprint("S", k), Signature: sig})
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := res.Causes(cands); err != nil {
			b.Fatal(err)
		}
	}
}
