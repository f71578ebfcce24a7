package dashboard

import (
	"context"
	"fmt"
	"math"
	"slices"
	"sync"
	"time"
)

// footbridgeGeometry is a plane Pratt truss in the style of the invented
// "Alder Creek footbridge": six 3 m panels, 2.5 m deep. Bottom chord nodes
// L0..L6 on y = 0, top chord nodes U1..U5 on y = 2.5 m.
func footbridgeGeometry() Geometry {
	g := Geometry{Dimension: 2}
	for i := 0; i <= 6; i++ {
		g.Nodes = append(g.Nodes, Node{ID: fmt.Sprintf("L%d", i), X: 3 * float64(i)})
	}
	for i := 1; i <= 5; i++ {
		g.Nodes = append(g.Nodes, Node{ID: fmt.Sprintf("U%d", i), X: 3 * float64(i), Y: 2.5})
	}
	gauged := map[string]bool{"B3": true, "B4": true, "T2": true, "T3": true, "D1": true, "D2": true, "D5": true, "V3": true}
	add := func(id, a, b string) {
		g.Members = append(g.Members, Member{ID: id, Start: a, End: b, Gauged: gauged[id]})
	}
	for i := 1; i <= 6; i++ {
		add(fmt.Sprintf("B%d", i), fmt.Sprintf("L%d", i-1), fmt.Sprintf("L%d", i))
	}
	for i := 1; i <= 4; i++ {
		add(fmt.Sprintf("T%d", i), fmt.Sprintf("U%d", i), fmt.Sprintf("U%d", i+1))
	}
	for i := 1; i <= 5; i++ {
		add(fmt.Sprintf("V%d", i), fmt.Sprintf("L%d", i), fmt.Sprintf("U%d", i))
	}
	// end posts and Pratt diagonals sloping down towards midspan
	add("D1", "L0", "U1")
	add("D2", "U1", "L2")
	add("D3", "U2", "L3")
	add("D4", "L3", "U4")
	add("D5", "L4", "U5")
	add("D6", "U5", "L6")
	// a doubly braced middle panel: C3 crosses D3
	add("C3", "L2", "U3")
	// D1 sits in the statically determinate end panel
	g.Members[slices.IndexFunc(g.Members, func(m Member) bool { return m.ID == "D1" })].GaugeOrStiffness = true
	g.Supports = []Support{
		{Node: "L0", Fixed: [3]bool{true, true}},
		{Node: "L6", Fixed: [3]bool{false, true}, Spring: [3]bool{true}},
	}
	for i := 1; i <= 5; i++ {
		n := fmt.Sprintf("L%d", i)
		g.Loads = append(g.Loads, NodalLoad{Node: n, Pattern: "deck", Direction: [3]float64{0, -1, 0}},
			NodalLoad{Node: n, Pattern: "crowd", Direction: [3]float64{0, -1, 0}, Unknown: true})
	}
	return g
}

// memSource is a Source over an in-memory history, driven by the tests.
// It is test data for the dashboard, not a stand-in for the pipeline.
type memSource struct {
	mu      sync.Mutex
	name    string
	title   string
	geom    Geometry
	k       float64
	history []State // one per epoch, oldest first
	events  []Event
}

func newMemSource() *memSource {
	return &memSource{name: "alder-creek", title: "Alder Creek footbridge", geom: footbridgeGeometry(), k: 3.29}
}

// spaceGridGeometry is a small double-layer grid in the style of the
// invented "Harbour Hall roof": a 3 x 3 top layer at z = 1.5 m on a 4 m
// grid and a 2 x 2 bottom layer offset by half a bay, each bottom node tied
// to the four top nodes around it. Top chords are gauged.
func spaceGridGeometry() Geometry {
	g := Geometry{Dimension: 3}
	top := func(i, j int) string { return fmt.Sprintf("T%d%d", i, j) }
	bot := func(i, j int) string { return fmt.Sprintf("B%d%d", i, j) }
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			g.Nodes = append(g.Nodes, Node{ID: top(i, j), X: 4 * float64(i), Y: 4 * float64(j), Z: 1.5})
		}
	}
	for i := 0; i < 2; i++ {
		for j := 0; j < 2; j++ {
			g.Nodes = append(g.Nodes, Node{ID: bot(i, j), X: 4*float64(i) + 2, Y: 4*float64(j) + 2})
		}
	}
	k := 0
	add := func(a, b string, gauged bool) {
		k++
		g.Members = append(g.Members, Member{ID: fmt.Sprintf("M%d", k), Start: a, End: b, Gauged: gauged})
	}
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			if i < 2 {
				add(top(i, j), top(i+1, j), true)
			}
			if j < 2 {
				add(top(i, j), top(i, j+1), true)
			}
		}
	}
	add(bot(0, 0), bot(1, 0), false)
	add(bot(0, 1), bot(1, 1), false)
	add(bot(0, 0), bot(0, 1), false)
	add(bot(1, 0), bot(1, 1), false)
	for i := 0; i < 2; i++ {
		for j := 0; j < 2; j++ {
			for _, d := range [][2]int{{0, 0}, {1, 0}, {0, 1}, {1, 1}} {
				add(bot(i, j), top(i+d[0], j+d[1]), false)
			}
		}
	}
	return g
}

// addEpoch appends an epoch at time t in which member alarmID (if any) has
// a residual of shift newtons on top of the small noise pattern.
func (s *memSource) addEpoch(t time.Time, alarmID string, shift float64) {
	s.mu.Lock()
	defer s.mu.Unlock()
	st := State{
		Structure: s.name, Title: s.title, ModelVersion: "sha256:9f2c41d07be3a8e5",
		Epoch: t, Geometry: s.geom, CriticalValue: s.k,
		Fit:   Fit{ChiSquare: 4.1, DOF: 7, PValue: 0.768, Alpha: 0.001},
		Loads: []LoadEstimate{{Pattern: "crowd", Value: 0.42, StdDev: 0.05, Unit: "1"}},
	}
	i := float64(len(s.history))
	for j, m := range s.geom.Members {
		if !m.Gauged {
			continue
		}
		pred := 40e3 * math.Sin(float64(j)+1)
		sigma := 600.0
		e := 300 * math.Sin(i*0.7+float64(j))
		ms := MemberState{ID: m.ID, Predicted: pred, SigmaResidual: sigma, Redundancy: 0.6, MDB: 4.13 * 500 / math.Sqrt(0.6), Checkable: true}
		if m.ID == "V3" { // zero-force vertical with no redundancy: not checkable
			ms.Redundancy, ms.Checkable, ms.W, ms.MDB = 0, false, math.NaN(), math.Inf(1)
			ms.Measured = pred + e
			st.Gauged = append(st.Gauged, ms)
			continue
		}
		if m.ID == alarmID {
			e += shift
		}
		ms.Measured = pred + e
		ms.W = e / sigma
		ms.Alarm = math.Abs(ms.W) > s.k && m.ID == alarmID
		st.Gauged = append(st.Gauged, ms)
	}
	if alarmID != "" && shift != 0 {
		st.Fit = Fit{ChiSquare: 61.7, DOF: 7, PValue: 6.9e-11, Alpha: 0.001, Rejected: true}
	}
	s.history = append(s.history, st)
}

func (s *memSource) addEvent(e Event) {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.events = append(s.events, e)
}

func (s *memSource) Structures() []string { return []string{s.name} }

func (s *memSource) State(structure string) (State, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if structure != s.name {
		return State{}, fmt.Errorf("structure %q: %w", structure, ErrNotFound)
	}
	if len(s.history) == 0 {
		return State{Structure: s.name, Geometry: s.geom, CriticalValue: s.k}, nil
	}
	return s.history[len(s.history)-1], nil
}

func (s *memSource) Series(structure, member string, from, to time.Time) (Series, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if structure != s.name {
		return Series{}, fmt.Errorf("structure %q: %w", structure, ErrNotFound)
	}
	out := Series{Structure: structure, Member: member, CriticalValue: s.k}
	for _, st := range s.history {
		if st.Epoch.Before(from) || !st.Epoch.Before(to) {
			continue
		}
		i := slices.IndexFunc(st.Gauged, func(m MemberState) bool { return m.ID == member })
		if i < 0 {
			return Series{}, fmt.Errorf("member %q: %w", member, ErrNotFound)
		}
		m := st.Gauged[i]
		out.Points = append(out.Points, SeriesPoint{Time: st.Epoch, Measured: m.Measured, Predicted: m.Predicted,
			SigmaResidual: m.SigmaResidual, W: m.W, Checkable: m.Checkable, Alarm: m.Alarm})
	}
	return out, nil
}

func (s *memSource) Events(_ context.Context, structure string, from, to time.Time) ([]Event, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if structure != s.name {
		return nil, fmt.Errorf("structure %q: %w", structure, ErrNotFound)
	}
	var out []Event
	for _, e := range s.events {
		if !e.Time.Before(from) && e.Time.Before(to) {
			out = append(out, e)
		}
	}
	return out, nil
}
