package reconcile_test

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/reconcile"
)

// Example fits the levelling network of Strang and Borre (1997) through
// the epoch API: the unknowns are two heights, the "measured" values the
// observed height differences and the "predicted" values the parts of
// them given by the fixed heights.
func Example() {
	A := mat.NewDense(5, 2, []float64{1, 0, 0, 1, 1, 0, 0, 1, -1, 1})
	km := []float64{0.970, 1.002, 1.070, 1.110, 0.890}
	sigma := make([]float64, len(km))
	for i, l := range km {
		sigma[i] = 0.006 * math.Sqrt(l) // 6 mm per square root of km
	}
	s, err := reconcile.NewSolver(A, sigma, reconcile.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	y := []float64{0.732, 1.978, 0.420, 0.988, 1.258}
	yhat := []float64{-10.021, -10.021, -10.321, -11.002, 0}
	res, err := s.Epoch(y, yhat, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("H_E = %.5f m, H_F = %.5f m\n", res.Theta[0], res.Theta[1])
	fmt.Printf("T = %.3f with %d degrees of freedom, rejected: %v\n", res.T, res.DOF, res.Rejected)
	// Output:
	// H_E = 10.74450 m, H_F = 11.99762 m
	// T = 4.636 with 3 degrees of freedom, rejected: false
}
