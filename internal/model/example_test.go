package model_test

import (
	"fmt"

	"trussmonitor/internal/model"
)

// threeBar is a symmetric three-bar truss: bars from (-3, 4) m, (0, 4) m and
// (3, 4) m to the loaded node O at the origin, steel (EN 1993-1-1 clause
// 3.2.6: E = 210000 N/mm2, alpha = 12e-6 /K), A = 10 cm2, 100 kN down at O.
// Closed form (see TestClosedForms): k1 = EA/4, k2 = EA/5, cos a = 0.8,
// d = P / (k1 + 2 k2 cos^2 a) = 0.94109 mm, N_middle = k1 d = 49.407 kN,
// N_outer = k2 d cos a = 31.621 kN; per +1 K of the middle bar
// N_middle = k1 (k1 alpha L1 / (k1 + 2 k2 cos^2 a) - alpha L1) = -1274.9 N.
func threeBar() *model.Structure {
	steel := func(id string, i, j int) model.Member {
		return model.Member{ID: id, I: i, J: j, E: 210e9, A: 1e-3, Alpha: 12e-6}
	}
	return &model.Structure{
		Name:    "two-bar",
		Dim:     2,
		Nodes:   []model.Node{{ID: "O"}, {ID: "L", X: [3]float64{-3, 4}}, {ID: "M", X: [3]float64{0, 4}}, {ID: "R", X: [3]float64{3, 4}}},
		Members: []model.Member{steel("OL", 0, 1), steel("OM", 0, 2), steel("OR", 0, 3)},
		Supports: []model.Support{
			{Node: 1, Fixed: [3]bool{true, true}},
			{Node: 2, Fixed: [3]bool{true, true}},
			{Node: 3, Fixed: [3]bool{true, true}},
		},
		Groups:   map[string][]int{"middle": {1}},
		Patterns: []model.Pattern{{Name: "load", Forces: []model.NodalForce{{Node: 0, F: [3]float64{0, -100e3}}}}},
		Cases:    []model.Case{{Name: "service", Factors: []model.Factor{{Pattern: "load", Factor: 1}}}},
	}
}

func ExampleAnalyze() {
	m, err := model.Analyze(threeBar())
	if err != nil {
		fmt.Println(err)
		return
	}
	d := m.Determinacy()
	fmt.Println(d.ByCounting, d.ByRank, d.Stable, d.Agree)
	// Output: 1 1 true true
}

func ExampleModel_SolveCase() {
	m, _ := model.Analyze(threeBar())
	r, err := m.SolveCase("service")
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("N_OM = %.3f kN, N_OL = %.3f kN, v_O = %.5f mm, imbalance below 1e-12: %v\n",
		r.Forces[1]/1e3, r.Forces[0]/1e3, r.Displacements[0][1]*1e3, r.Equilibrium.Relative < 1e-12)
	// Output: N_OM = 49.407 kN, N_OL = 31.621 kN, v_O = -0.94109 mm, imbalance below 1e-12: true
}

func ExampleModel_Influence() {
	m, _ := model.Analyze(threeBar())
	h, err := m.Influence([]int{0, 1, 2}, []model.Input{
		{Kind: model.PatternInput, Name: "load"},
		{Kind: model.TemperatureInput, Name: "middle"},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	for r := 0; r < 3; r++ {
		fmt.Printf("%.1f N per unit load, %.1f N per K\n", h.At(r, 0), h.At(r, 1))
	}
	// Output:
	// 31620.6 N per unit load, 796.8 N per K
	// 49407.1 N per unit load, -1274.9 N per K
	// 31620.6 N per unit load, 796.8 N per K
}
