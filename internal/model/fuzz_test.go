package model

import (
	"errors"
	"math"
	"testing"
)

// structureFromBytes builds a small, possibly broken structure from fuzz
// input: coordinates, member ends (possibly out of range or equal),
// properties (possibly zero, negative or NaN), supports and one load.
func structureFromBytes(b []byte) *Structure {
	next := func() byte {
		if len(b) == 0 {
			return 0
		}
		v := b[0]
		b = b[1:]
		return v
	}
	num := func() float64 {
		switch v := next(); v {
		case 255:
			return math.NaN()
		case 254:
			return math.Inf(1)
		default:
			return float64(int8(v)) / 10
		}
	}
	s := &Structure{Name: "fuzz", Dim: 2 + int(next()%2), Groups: map[string][]int{}}
	nn := 2 + int(next()%5)
	for i := 0; i < nn; i++ {
		var x [3]float64
		for k := 0; k < s.Dim; k++ {
			x[k] = num()
		}
		s.Nodes = append(s.Nodes, Node{ID: string(rune('A' + i)), X: x})
	}
	nm := 1 + int(next()%9)
	for e := 0; e < nm; e++ {
		i, j := int(next())%(nn+1), int(next())%(nn+1)
		ev, av := 210e9, 1e-3
		switch next() % 8 {
		case 0:
			ev = 0
		case 1:
			av = -1
		case 2:
			ev = math.NaN()
		}
		s.Members = append(s.Members, Member{ID: "M", I: i, J: j, E: ev, A: av, Alpha: 12e-6, Density: 7850})
	}
	ns := int(next() % 4)
	for k := 0; k < ns; k++ {
		sp := Support{Node: int(next()) % (nn + 1)}
		f := next()
		for a := 0; a < s.Dim; a++ {
			sp.Fixed[a] = f&(1<<a) != 0
		}
		if f&16 != 0 {
			n := [3]float64{num(), num(), 0}
			sp.Normal = &n
			sp.Fixed = [3]bool{}
		}
		if f&32 != 0 {
			sp.Spring[0] = 1e6 * float64(f&7)
			sp.Fixed[0] = false
		}
		s.Supports = append(s.Supports, sp)
	}
	s.Patterns = []Pattern{{Name: "P", SelfWeight: 1,
		Forces:       []NodalForce{{Node: int(next()) % nn, F: [3]float64{num() * 1e3, num() * 1e3}}},
		Temperatures: []MemberTemperature{{Member: 0, DeltaK: num()}}}}
	return s
}

// FuzzAnalyze: on any input Analyze and SolveByJoints return a result or an
// error, never panic; a successful solve has finite numbers.
func FuzzAnalyze(f *testing.F) {
	f.Add([]byte{0, 1, 0, 0, 30, 0, 0, 30, 2, 0, 1, 3, 1, 2, 3, 0, 2, 3, 2, 0, 3, 1, 2, 5, 5})
	f.Add([]byte{1, 2, 0, 0, 0, 10, 0, 0, 0, 10, 0, 3, 0, 1, 3, 1, 2, 3, 0, 2, 3, 1, 0, 7, 1, 6, 2, 4})
	f.Add([]byte{0, 3, 255, 0, 0, 0, 10, 10, 0, 20, 1, 0, 0, 0})
	f.Add([]byte{0, 1, 0, 0, 0, 0, 1, 0, 1, 1, 0, 16, 10, 10})
	f.Fuzz(func(t *testing.T, b []byte) {
		s := structureFromBytes(b)
		m, err := Analyze(s)
		if err != nil {
			var ve *ValidationError
			var me *MechanismError
			if !errors.As(err, &ve) && !errors.As(err, &me) {
				t.Fatalf("unexpected error type %T: %v", err, err)
			}
			if me != nil {
				for _, fm := range me.Motions {
					for _, nm := range fm.Nodes {
						if !finite(nm.Dir[:]...) {
							t.Fatalf("non-finite motion %v", nm)
						}
					}
				}
			}
		} else {
			r, err := m.SolveFactors([]Factor{{"P", 1}})
			if err != nil {
				t.Fatal(err)
			}
			for _, v := range r.Forces {
				if !finite(v) {
					t.Fatalf("non-finite force")
				}
			}
			for _, d := range r.Displacements {
				if !finite(d[:]...) {
					t.Fatalf("non-finite displacement")
				}
			}
		}
		if s.Dim == 2 {
			SolveByJoints(s, []Factor{{"P", 1}}) // must not panic
		}
	})
}
