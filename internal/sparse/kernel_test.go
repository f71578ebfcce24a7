package sparse

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestSubABtMatchesNaive compares the blocked (and, on amd64 with AVX2,
// assembly) kernel with the textbook triple loop on odd sizes.
func TestSubABtMatchesNaive(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, sz := range [][3]int{{1, 1, 1}, {2, 4, 8}, {3, 5, 7}, {7, 9, 13}, {70, 67, 33}, {131, 131, 50}, {5, 3, 0}} {
		m, n, k := sz[0], sz[1], sz[2]
		for _, lower := range []bool{false, true} {
			if lower && n > m {
				continue
			}
			lda, ldb, ldc := k+3, k+1, n+2
			a := make([]float64, m*lda)
			b := make([]float64, n*ldb)
			c := make([]float64, m*ldc)
			for i := range a {
				a[i] = rng.NormFloat64()
			}
			for i := range b {
				b[i] = rng.NormFloat64()
			}
			for i := range c {
				c[i] = rng.NormFloat64()
			}
			want := append([]float64(nil), c...)
			for i := 0; i < m; i++ {
				for j := 0; j < n; j++ {
					if lower && j > i {
						continue
					}
					s := 0.0
					for p := 0; p < k; p++ {
						s += a[i*lda+p] * b[j*ldb+p]
					}
					want[i*ldc+j] -= s
				}
			}
			subABt(m, n, k, a, lda, b, ldb, c, ldc, lower)
			for i := range c {
				if math.Abs(c[i]-want[i]) > 1e-12*(1+math.Abs(want[i])) {
					t.Fatalf("m=%d n=%d k=%d lower=%v: c[%d] = %g, want %g", m, n, k, lower, i, c[i], want[i])
				}
			}
		}
	}
}
