package fatigue_test

import (
	"fmt"

	"trussmonitor/internal/fatigue"
)

// A gauge's stress history (Pa) fed in two chunks, the residue closed at the
// end, and Miner's damage on the curve of detail category 71 with
// gamma_Mf = 1.15. By the three-point rule: 10-70-0 closes a full cycle of
// 60 MPa, 0-80-0 and 80-0-90 each half a cycle of 80 MPa (they contain the
// starting point), and the residue 0, 90, 5 gives halves of 90 and 85 MPa.
func ExampleCounter() {
	var c fatigue.Counter
	var h fatigue.Histogram
	c.Add([]float64{0, 80e6, 10e6, 70e6, 0}, &h)
	c.Add([]float64{90e6, 5e6}, &h)
	c.Residue(&h) // the end of the record
	for _, b := range h.Bins() {
		fmt.Printf("range %4.1f MPa: %.1f cycles\n", fatigue.BinMid(b.Index)/1e6, b.Cycles)
	}
	curve, _ := fatigue.NewCurve(71, 1.0, 1.15)
	fmt.Printf("damage %.3e\n", curve.HistogramDamage(&h))
	fmt.Println(fatigue.Caution)
	// Output:
	// range 60.2 MPa: 1.0 cycles
	// range 80.2 MPa: 1.0 cycles
	// range 85.2 MPa: 0.5 cycles
	// range 90.2 MPa: 0.5 cycles
	// damage 3.002e-06
	// Fatigue damage and remaining life are a monitoring estimate from the recorded strains, not a design check or an assessment of the structure; assessment rests with a licensed engineer under local codes.
}
