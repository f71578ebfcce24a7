package sparse

import (
	"math/rand/v2"
	"testing"
)

func TestQuickBandDense(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	n := 50
	b := NewBuilder(n)
	for i := 0; i < n; i++ {
		b.Add(i, i, 10)
		for r := 0; r < 3; r++ {
			j := rng.IntN(n)
			if j != i {
				b.Add(i, j, rng.Float64()-0.5)
			}
		}
	}
	a := b.Matrix()
	x := make([]float64, n)
	for i := range x {
		x[i] = rng.Float64()
	}
	rhs := make([]float64, n)
	a.MulVec(rhs, x)
	for _, m := range []Method{Dense, Band, Supernodal} {
		f, err := Factorize(a, Options{Method: m})
		if err != nil {
			t.Fatal(err)
		}
		got := make([]float64, n)
		f.Solve(got, rhs)
		for i := range got {
			if d := got[i] - x[i]; d > 1e-10 || d < -1e-10 {
				t.Fatalf("%v: x[%d] = %g, want %g", m, i, got[i], x[i])
			}
		}
	}
}
