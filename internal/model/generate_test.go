package model

import "fmt"

// Steel constants used by the generated structures: EN 1993-1-1 clause
// 3.2.6 (E = 210000 N/mm2, alpha = 12e-6 per K, density 7850 kg/m3).
const (
	steelE       = 210e9
	steelAlpha   = 12e-6
	steelDensity = 7850.0
)

// DoubleLayerGrid generates a square-on-square offset double-layer space
// grid roof: a top layer of (nx+1) x (ny+1) nodes at height depth on a
// square module, a bottom layer of nx x ny nodes under the centres of the
// top squares at height 0, top and bottom chords along x and y, and four
// diagonals from each bottom node to the corners of its top square. The top
// perimeter nodes are pinned. Patterns: "dead" (self-weight) and "snow"
// (1 kN down at every top node); case "service" = dead + snow. Groups:
// "top", "bottom", "web". About 6 nx ny degrees of freedom.
func DoubleLayerGrid(nx, ny int, module, depth float64) *Structure {
	s := &Structure{
		Name: fmt.Sprintf("grid-%dx%d", nx, ny), Title: "generated double-layer space grid",
		Dim: 3, Gravity: [3]float64{0, 0, -1}, Groups: map[string][]int{},
	}
	top := func(i, j int) int { return i*(ny+1) + j }
	nTop := (nx + 1) * (ny + 1)
	bot := func(i, j int) int { return nTop + i*ny + j }
	for i := 0; i <= nx; i++ {
		for j := 0; j <= ny; j++ {
			s.Nodes = append(s.Nodes, Node{ID: fmt.Sprintf("T%d_%d", i, j), X: [3]float64{float64(i) * module, float64(j) * module, depth}})
		}
	}
	for i := 0; i < nx; i++ {
		for j := 0; j < ny; j++ {
			s.Nodes = append(s.Nodes, Node{ID: fmt.Sprintf("B%d_%d", i, j), X: [3]float64{(float64(i) + 0.5) * module, (float64(j) + 0.5) * module, 0}})
		}
	}
	add := func(id, group string, a, b int, area float64) {
		s.Groups[group] = append(s.Groups[group], len(s.Members))
		s.Members = append(s.Members, Member{ID: id, I: a, J: b, E: steelE, A: area, Alpha: steelAlpha, Density: steelDensity})
	}
	const chordA, webA = 2.0e-3, 1.0e-3
	for i := 0; i <= nx; i++ {
		for j := 0; j <= ny; j++ {
			if i < nx {
				add(fmt.Sprintf("TX%d_%d", i, j), "top", top(i, j), top(i+1, j), chordA)
			}
			if j < ny {
				add(fmt.Sprintf("TY%d_%d", i, j), "top", top(i, j), top(i, j+1), chordA)
			}
		}
	}
	for i := 0; i < nx; i++ {
		for j := 0; j < ny; j++ {
			if i+1 < nx {
				add(fmt.Sprintf("BX%d_%d", i, j), "bottom", bot(i, j), bot(i+1, j), chordA)
			}
			if j+1 < ny {
				add(fmt.Sprintf("BY%d_%d", i, j), "bottom", bot(i, j), bot(i, j+1), chordA)
			}
			for k, c := range [4][2]int{{0, 0}, {1, 0}, {1, 1}, {0, 1}} {
				add(fmt.Sprintf("D%d_%d_%d", i, j, k), "web", bot(i, j), top(i+c[0], j+c[1]), webA)
			}
		}
	}
	snow := Pattern{Name: "snow"}
	for i := 0; i <= nx; i++ {
		for j := 0; j <= ny; j++ {
			if i == 0 || j == 0 || i == nx || j == ny {
				s.Supports = append(s.Supports, Support{Node: top(i, j), Fixed: [3]bool{true, true, true}})
			} else {
				snow.Forces = append(snow.Forces, NodalForce{Node: top(i, j), F: [3]float64{0, 0, -1e3}})
			}
		}
	}
	s.Patterns = []Pattern{{Name: "dead", SelfWeight: 1}, snow}
	s.Cases = []Case{{Name: "service", Factors: []Factor{{"dead", 1}, {"snow", 1}}}}
	return s
}

// LongBridge generates a long box-truss viaduct of the given number of 5 m
// panels: two Warren side trusses 5 m deep, 4 m apart, with top and bottom
// lateral bracing and a braced cross-frame at every panel point, on bearings
// every 20 panels (and at both ends). Patterns: "dead" (self-weight) and
// "traffic" (10 kN down at every bottom node); case "service". Groups:
// "chord", "web", "bracing". About 12 (panels + 1) degrees of freedom.
func LongBridge(panels int) *Structure {
	const pl, width, height = 5.0, 4.0, 5.0
	s := &Structure{
		Name: fmt.Sprintf("bridge-%d", panels), Title: "generated long box-truss viaduct",
		Dim: 3, Gravity: [3]float64{0, 0, -1}, Groups: map[string][]int{},
	}
	// Node numbering per section: 0 bottom left, 1 bottom right, 2 top left, 3 top right.
	nd := func(sec, k int) int { return 4*sec + k }
	for sec := 0; sec <= panels; sec++ {
		x := float64(sec) * pl
		for k, p := range [4][2]float64{{0, 0}, {width, 0}, {0, height}, {width, height}} {
			s.Nodes = append(s.Nodes, Node{ID: fmt.Sprintf("%s%d", [4]string{"BL", "BR", "TL", "TR"}[k], sec), X: [3]float64{x, p[0], p[1]}})
		}
	}
	add := func(id, group string, a, b int, area float64) {
		s.Groups[group] = append(s.Groups[group], len(s.Members))
		s.Members = append(s.Members, Member{ID: id, I: a, J: b, E: steelE, A: area, Alpha: steelAlpha, Density: steelDensity})
	}
	const chordA, webA, braceA = 8e-3, 4e-3, 2e-3
	traffic := Pattern{Name: "traffic"}
	for sec := 0; sec <= panels; sec++ {
		add(fmt.Sprintf("VL%d", sec), "web", nd(sec, 0), nd(sec, 2), webA)
		add(fmt.Sprintf("VR%d", sec), "web", nd(sec, 1), nd(sec, 3), webA)
		add(fmt.Sprintf("FB%d", sec), "bracing", nd(sec, 0), nd(sec, 1), braceA)
		add(fmt.Sprintf("TS%d", sec), "bracing", nd(sec, 2), nd(sec, 3), braceA)
		add(fmt.Sprintf("XS%d", sec), "bracing", nd(sec, 0), nd(sec, 3), braceA)
		traffic.Forces = append(traffic.Forces,
			NodalForce{Node: nd(sec, 0), F: [3]float64{0, 0, -10e3}},
			NodalForce{Node: nd(sec, 1), F: [3]float64{0, 0, -10e3}})
		if sec%20 == 0 || sec == panels {
			s.Supports = append(s.Supports,
				Support{Node: nd(sec, 0), Fixed: [3]bool{sec == 0, true, true}},
				Support{Node: nd(sec, 1), Fixed: [3]bool{false, false, true}})
		}
		if sec == 0 {
			continue
		}
		for k, name := range [4]string{"BCL", "BCR", "TCL", "TCR"} {
			add(fmt.Sprintf("%s%d", name, sec), "chord", nd(sec-1, k), nd(sec, k), chordA)
		}
		if sec%2 == 1 {
			add(fmt.Sprintf("DL%d", sec), "web", nd(sec-1, 0), nd(sec, 2), webA)
			add(fmt.Sprintf("DR%d", sec), "web", nd(sec-1, 1), nd(sec, 3), webA)
		} else {
			add(fmt.Sprintf("DL%d", sec), "web", nd(sec-1, 2), nd(sec, 0), webA)
			add(fmt.Sprintf("DR%d", sec), "web", nd(sec-1, 3), nd(sec, 1), webA)
		}
		add(fmt.Sprintf("LB%d", sec), "bracing", nd(sec-1, 0), nd(sec, 1), braceA)
		add(fmt.Sprintf("LT%d", sec), "bracing", nd(sec-1, 2), nd(sec, 3), braceA)
	}
	s.Patterns = []Pattern{{Name: "dead", SelfWeight: 1}, traffic}
	s.Cases = []Case{{Name: "service", Factors: []Factor{{"dead", 1}, {"traffic", 1}}}}
	return s
}
