package sparse

import (
	"testing"
	"time"
)

func TestScratch(t *testing.T) {
	for _, nx := range []int{13, 41, 100, 129} {
		a, _ := doubleLayerGrid(nx, 1).stiffness()
		for _, m := range []Method{Supernodal} {
			t0 := time.Now()
			f, err := Factorize(a, Options{Method: m})
			if err != nil {
				t.Fatal(err)
			}
			st := f.Stats()
			t.Logf("nx=%d n=%d %v total=%v order=%v factor=%v nnzL=%d flops=%.3g ns=%d", nx, a.N(), m, time.Since(t0), st.OrderTime, st.FactorTime, st.NNZL, st.Flops, st.Supernodes)
		}
	}
}
