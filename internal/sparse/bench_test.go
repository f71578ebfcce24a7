package sparse

import (
	"fmt"
	"math/rand/v2"
	"sync"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"
)

// benchCase is a stiffness-pattern matrix for the benchmarks and the
// comparison with scipy.
type benchCase struct {
	name    string
	build   func() *Sym
	methods []Method // the methods worth timing at this size
}

var (
	benchMu    sync.Mutex
	benchCache = map[string]*Sym{}
)

func (c benchCase) matrix() *Sym {
	benchMu.Lock()
	defer benchMu.Unlock()
	if a, ok := benchCache[c.name]; ok {
		return a
	}
	a := c.build()
	benchCache[c.name] = a
	return a
}

// forget drops the cached matrix (the 300k cases hold hundreds of MB).
func (c benchCase) forget() {
	benchMu.Lock()
	defer benchMu.Unlock()
	delete(benchCache, c.name)
}

// benchCases: double-layer grids (square-on-square offset) of about 1k,
// 10k, 60k, 100k and 300k DOF and box bridges of about 1k, 10k, 100k and
// 300k DOF. The 300k cases are timed only with the methods Auto may pick
// for them (the band factor of the 300k grid would take 3 GB).
func benchCases() []benchCase {
	grid := func(dof int) func() *Sym {
		return func() *Sym { a, _ := doubleLayerGrid(gridForDOF(dof), 1).stiffness(); return a }
	}
	bridge := func(dof int) func() *Sym {
		return func() *Sym { a, _ := boxBridge(dof/12, 1).stiffness(); return a }
	}
	all := []Method{Dense, Band, Supernodal, Auto}
	big := []Method{Band, Supernodal, Auto}
	wide := []Method{Supernodal, Auto}
	long := []Method{Band, Auto}
	return []benchCase{
		{"grid-1k", grid(1000), all},
		{"grid-10k", grid(10000), big},
		{"grid-60k", grid(60000), big},
		{"grid-100k", grid(100000), big},
		{"grid-300k", grid(300000), wide},
		{"bridge-1k", bridge(1000), all},
		{"bridge-10k", bridge(10000), big},
		{"bridge-100k", bridge(100000), big},
		{"bridge-300k", bridge(300000), long},
	}
}

// BenchmarkFactorSolve times the factorisation (ns/op) of every test
// matrix by every method worth trying at its size, and reports the time of
// one solve, of a blocked solve of 16 right-hand sides, nnz(L) and the
// half-bandwidth. Run with -benchtime 1x or 3x: the large cases take
// seconds per factorisation.
func BenchmarkFactorSolve(b *testing.B) {
	for _, c := range benchCases() {
		for _, m := range c.methods {
			b.Run(fmt.Sprintf("%s/%v", c.name, m), func(b *testing.B) {
				a := c.matrix()
				n := a.N()
				rhs := make([]float64, n)
				rng := rand.New(rand.NewPCG(1, 2))
				for i := range rhs {
					rhs[i] = rng.NormFloat64()
				}
				B := mat.NewDense(n, 16, nil)
				for i := 0; i < n; i++ {
					for j := 0; j < 16; j++ {
						B.Set(i, j, rng.NormFloat64())
					}
				}
				x := make([]float64, n)
				var f *Cholesky
				var err error
				var solve, solveMany time.Duration
				for b.Loop() {
					f, err = Factorize(a, Options{Method: m})
					if err != nil {
						b.Fatal(err)
					}
					b.StopTimer()
					t0 := time.Now()
					f.Solve(x, rhs)
					solve += time.Since(t0)
					t0 = time.Now()
					f.SolveMany(B, B)
					solveMany += time.Since(t0)
					b.StartTimer()
				}
				st := f.Stats()
				b.ReportMetric(float64(n), "dof")
				b.ReportMetric(float64(st.NNZL), "nnzL")
				b.ReportMetric(float64(st.HalfBandwidth), "halfband")
				b.ReportMetric(st.OrderTime.Seconds()*1e3, "order-ms")
				b.ReportMetric(st.FactorTime.Seconds()*1e3, "numeric-ms")
				b.ReportMetric(solve.Seconds()*1e3/float64(b.N), "solve-ms")
				b.ReportMetric(solveMany.Seconds()*1e3/float64(b.N), "solve16-ms")
				if m == Auto {
					b.Logf("%s: auto chose %v/%v", c.name, st.Method, st.Ordering)
				}
			})
		}
	}
}

// BenchmarkOrdering times the orderings alone on the largest grid.
func BenchmarkOrdering(b *testing.B) {
	c := benchCases()[3]
	a := c.matrix()
	b.Run("rcm", func(b *testing.B) {
		for b.Loop() {
			RCM(a.Adjacency())
		}
	})
	b.Run("amd", func(b *testing.B) {
		for b.Loop() {
			AMD(a)
		}
	})
	b.Run("nd", func(b *testing.B) {
		for b.Loop() {
			ND(a)
		}
	})
}

// BenchmarkSmall times factor plus one solve of small trusses (box bridges
// of 1 to 16 panels, and a 3×3 double-layer grid), where the dense method
// competes; it sets DenseMaxN.
func BenchmarkSmall(b *testing.B) {
	type small struct {
		name string
		a    *Sym
	}
	var cases []small
	for _, np := range []int{1, 2, 4, 8, 16} {
		a, _ := boxBridge(np, 1).stiffness()
		cases = append(cases, small{fmt.Sprintf("bridge-%d", a.N()), a})
	}
	g, _ := doubleLayerGrid(3, 1).stiffness()
	cases = append(cases, small{fmt.Sprintf("grid-%d", g.N()), g})
	for _, c := range cases {
		for _, m := range []Method{Dense, Band, Supernodal} {
			b.Run(c.name+"/"+m.String(), func(b *testing.B) {
				x := make([]float64, c.a.N())
				rhs := make([]float64, c.a.N())
				for i := range rhs {
					rhs[i] = 1
				}
				for b.Loop() {
					f, err := Factorize(c.a, Options{Method: m})
					if err != nil {
						b.Fatal(err)
					}
					f.Solve(x, rhs)
				}
			})
		}
	}
}
