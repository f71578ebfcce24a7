package sparse_test

import (
	"errors"
	"fmt"

	"trussmonitor/internal/sparse"
)

// A spring chain fixed at one end: three springs of stiffness k in series,
// pulled by P at the free end. Every spring carries P, so the end moves
// 3P/k and the nodes P/k, 2P/k, 3P/k (closed form).
func ExampleFactorize() {
	const k, P = 2e6, 1e3 // N/m, N
	b := sparse.NewBuilder(3)
	// Spring 0: ground to node 0; springs 1 and 2: node i-1 to node i.
	b.Add(0, 0, k)
	for i := 1; i < 3; i++ {
		b.Add(i-1, i-1, k)
		b.Add(i, i, k)
		b.Add(i, i-1, -k)
	}
	f, err := sparse.Factorize(b.Matrix(), sparse.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	u := make([]float64, 3)
	f.Solve(u, []float64{0, 0, P})
	fmt.Printf("u = %.4g m (method %v)\n", u, f.Stats().Method)
	// Output: u = [0.0005 0.001 0.0015] m (method dense)
}

// A node held by one spring in x only is a mechanism in y: Factorize
// reports the row that has no stiffness instead of returning NaN.
func ExampleNotPositiveDefiniteError() {
	b := sparse.NewBuilder(2) // x and y of one node
	b.Add(0, 0, 1e6)
	_, err := sparse.Factorize(b.Matrix(), sparse.Options{})
	var npd *sparse.NotPositiveDefiniteError
	if errors.As(err, &npd) {
		fmt.Println("failing row:", npd.Index)
	}
	// Output: failing row: 1
}
