package blocks

import (
	"bufio"
	"encoding/hex"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the golden block files of the current format version")

// goldenSeries are the series of the golden block files: a strain gauge
// printed with 8 significant digits crossing zero, a gauge at a logger's
// fixed resolution, a frequency, whole newtons, an irregular clock, and
// full-precision floats (the XOR scheme).
func goldenSeries() map[string][]Point {
	const t0 = 1780272000_000000000 // 2026-06-01T00:00:00Z in ns
	rng := rand.New(rand.NewPCG(21, 22))
	irregular := make([]Point, 200)
	tm := int64(t0)
	for i := range irregular {
		tm += 1e9 + rng.Int64N(3)*1e6
		irregular[i] = Point{tm, float64(rng.IntN(2000)-1000) / 100}
	}
	return map[string][]Point{
		"strain-8sig": series(600, t0, 1e9, func(i int) float64 {
			return decimal(strconv.FormatFloat(2e-6*math.Sin(float64(i)/50)+3e-6*rng.NormFloat64(), 'g', 8, 64))
		}),
		"strain-res": series(600, t0, 1e9, func(i int) float64 {
			return math.Round((1.2e-5+3e-6*rng.NormFloat64())*1e7) / 1e7
		}),
		"frequency": series(300, t0, 2e7, func(i int) float64 {
			return decimal(strconv.FormatFloat(811.03282+0.01*rng.NormFloat64(), 'f', 5, 64))
		}),
		"newtons":   series(100, t0, 1e9, func(i int) float64 { return float64(1500 + rng.IntN(20)) }),
		"irregular": irregular,
		"xor":       series(100, t0, 1e9, func(int) float64 { return rng.NormFloat64() }),
		"one":       {{t0, -0.25}},
	}
}

// TestGoldenBlocks decodes blocks written by each format version (files
// testdata/v<version>.golden, one "name hex" line per series of
// goldenSeries) and checks that they give the series bit for bit: a block
// stored by an older release still decodes. -update rewrites the file of
// the current version only.
func TestGoldenBlocks(t *testing.T) {
	want := goldenSeries()
	if *update {
		var sb strings.Builder
		for _, name := range []string{"strain-8sig", "strain-res", "frequency", "newtons", "irregular", "xor", "one"} {
			b, err := Encode(want[name])
			if err != nil {
				t.Fatal(err)
			}
			fmt.Fprintf(&sb, "%s %x\n", name, b)
		}
		if err := os.WriteFile(fmt.Sprintf("testdata/v%d.golden", version), []byte(sb.String()), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	for v := 1; v <= version; v++ {
		path := fmt.Sprintf("testdata/v%d.golden", v)
		f, err := os.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		sc := bufio.NewScanner(f)
		sc.Buffer(nil, 1<<20)
		seen := 0
		for line := 1; sc.Scan(); line++ {
			name, hx, ok := strings.Cut(sc.Text(), " ")
			b, err := hex.DecodeString(hx)
			if !ok || err != nil || want[name] == nil {
				t.Fatalf("%s:%d: want \"<series> <hex>\" with a series of goldenSeries (%v)", path, line, err)
			}
			if b[0] != byte(v) {
				t.Errorf("%s:%d: block of version %d", path, line, b[0])
			}
			got, err := Decode(b)
			if err != nil {
				t.Fatalf("%s:%d (%s): %v", path, line, name, err)
			}
			if err := same(want[name], got); err != nil {
				t.Errorf("%s:%d (%s): %v", path, line, name, err)
			}
			seen++
		}
		f.Close()
		if seen != len(want) {
			t.Errorf("%s: %d series, want %d", path, seen, len(want))
		}
	}
}
