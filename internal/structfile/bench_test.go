package structfile

import (
	"bytes"
	"fmt"
	"os"
	"testing"
)

// gridFile writes a square-on-square offset grid of n x n modules (nodes,
// members, perimeter supports and one load pattern) for benchmarks.
func gridFile(n int) []byte {
	var b bytes.Buffer
	w := func(format string, args ...any) { fmt.Fprintf(&b, format+"\n", args...) }
	w("name: grid\ndimension: 3\nunits: {length: m, force: kN}\nnodes:")
	for j := 0; j <= n; j++ {
		for i := 0; i <= n; i++ {
			w("  - {id: T%d_%d, at: [%d, %d, 2]}", i, j, 3*i, 3*j)
		}
	}
	for j := 0; j < n; j++ {
		for i := 0; i < n; i++ {
			w("  - {id: B%d_%d, at: [%g, %g, 0]}", i, j, 3*float64(i)+1.5, 3*float64(j)+1.5)
		}
	}
	w("materials:\n  - {id: steel, modulus: 210 GPa, density: 7850 kg/m3}\nsections:\n  - {id: s, area: 1000 mm2, material: steel}\nmembers:")
	for j := 0; j <= n; j++ {
		for i := 0; i <= n; i++ {
			if i < n {
				w("  - {id: TX%d_%d, from: T%d_%d, to: T%d_%d, section: s}", i, j, i, j, i+1, j)
			}
			if j < n {
				w("  - {id: TY%d_%d, from: T%d_%d, to: T%d_%d, section: s}", i, j, i, j, i, j+1)
			}
		}
	}
	for j := 0; j < n; j++ {
		for i := 0; i < n; i++ {
			if i < n-1 {
				w("  - {id: BX%d_%d, from: B%d_%d, to: B%d_%d, section: s}", i, j, i, j, i+1, j)
			}
			if j < n-1 {
				w("  - {id: BY%d_%d, from: B%d_%d, to: B%d_%d, section: s}", i, j, i, j, i, j+1)
			}
			for k, c := range [4][2]int{{i, j}, {i + 1, j}, {i + 1, j + 1}, {i, j + 1}} {
				w("  - {id: W%d_%d%c, from: B%d_%d, to: T%d_%d, section: s}", i, j, 'a'+k, i, j, c[0], c[1])
			}
		}
	}
	w("supports:")
	for j := 0; j <= n; j++ {
		for i := 0; i <= n; i++ {
			if i == 0 || j == 0 || i == n || j == n {
				w("  - {node: T%d_%d, fix: [x, y, z]}", i, j)
			}
		}
	}
	w("patterns:\n  - {name: dead, self_weight: 1}")
	return b.Bytes()
}

func benchParse(b *testing.B, name string, data []byte) {
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Parse(name, data); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkParseFootbridge(b *testing.B) {
	data, err := os.ReadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		b.Fatal(err)
	}
	benchParse(b, "footbridge", data)
}

func BenchmarkParseRoof(b *testing.B) {
	data, err := os.ReadFile(roofPath)
	if err != nil {
		b.Fatal(err)
	}
	benchParse(b, "roof", data)
}

// BenchmarkParseGrid128 reads a 128 x 128 module grid: 33025 nodes
// (about 99k degrees of freedom) and 131072 members.
func BenchmarkParseGrid128(b *testing.B) {
	benchParse(b, "grid128", gridFile(128))
}
