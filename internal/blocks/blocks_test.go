package blocks

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
	"time"
)

// same reports whether two point slices are equal bit for bit.
func same(a, b []Point) error {
	if len(a) != len(b) {
		return fmt.Errorf("%d points, want %d", len(b), len(a))
	}
	for i := range a {
		if a[i].Time != b[i].Time || math.Float64bits(a[i].Value) != math.Float64bits(b[i].Value) {
			return fmt.Errorf("point %d: got (%d, %v), want (%d, %v)", i, b[i].Time, b[i].Value, a[i].Time, a[i].Value)
		}
	}
	return nil
}

// decimal parses s as the logger's text would be parsed.
func decimal(s string) float64 {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		panic(err)
	}
	return v
}

// series returns n points from t0 every step with values from f.
func series(n int, t0, step int64, f func(i int) float64) []Point {
	pts := make([]Point, n)
	for i := range pts {
		pts[i] = Point{Time: t0 + int64(i)*step, Value: f(i)}
	}
	return pts
}

func TestRoundTrip(t *testing.T) {
	const t0 = 1780272000_000000000 // 2026-06-01T00:00:00Z in ns
	rng := rand.New(rand.NewPCG(1, 2))
	cases := []struct {
		name   string
		pts    []Point
		scheme byte
	}{
		{"one reading", []Point{{t0, 1.5}}, schemeDecimal},
		{"two readings", []Point{{t0, 1.5}, {t0 + 7, -2.25}}, schemeDecimal},
		{"strain at 1 Hz, 8 digits", series(3600, t0, 1e9, func(i int) float64 {
			return decimal(strconv.FormatFloat(-1.4586925e-05+3e-6*rng.NormFloat64(), 'g', 8, 64))
		}), schemeDecimal},
		{"frequency at 50 Hz", series(500, t0, 2e7, func(i int) float64 {
			return decimal(strconv.FormatFloat(811.03282+0.01*rng.NormFloat64(), 'f', 5, 64))
		}), schemeDecimal},
		{"weigh pad in N, integers", series(100, t0, 1e9, func(i int) float64 { return float64(1500 + rng.IntN(20)) }), schemeDecimal},
		{"constant", series(1000, t0, 1e9, func(int) float64 { return 14.9 }), schemeDecimal},
		{"negative zero and zero", []Point{{t0, 0}, {t0 + 1, math.Copysign(0, -1)}, {t0 + 2, 0}}, schemeXOR},
		{"jittered times", func() []Point {
			pts := make([]Point, 1000)
			tm := int64(t0)
			for i := range pts {
				tm += 1e9 + rng.Int64N(2e6) - 1e6
				pts[i] = Point{tm, float64(i) / 8}
			}
			return pts
		}(), schemeDecimal},
		{"gaps of every size", func() []Point {
			pts := make([]Point, 0, 200)
			tm := int64(t0)
			for i := 0; i < 200; i++ {
				tm += 1 + rng.Int64N(1<<uint(rng.IntN(50)))
				pts = append(pts, Point{tm, 2.5})
			}
			return pts
		}(), schemeDecimal},
		{"full-precision floats", series(1000, t0, 1e9, func(int) float64 { return rng.Float64() * 1e-5 }), schemeXOR},
		{"NaN, infinities, extremes", []Point{{t0, math.NaN()}, {t0 + 1, math.Inf(1)}, {t0 + 2, math.Inf(-1)}, {t0 + 3, math.MaxFloat64}, {t0 + 4, math.SmallestNonzeroFloat64}, {t0 + 5, 1}}, schemeXOR},
		{"integers beyond 2^53", []Point{{t0, 1 << 60}, {t0 + 1, 3}}, schemeXOR},
		{"times before 1970", series(10, -5e18, 1e15, func(i int) float64 { return float64(i) }), schemeDecimal},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			b, err := Encode(tc.pts)
			if err != nil {
				t.Fatal(err)
			}
			got, err := Decode(b)
			if err != nil {
				t.Fatal(err)
			}
			if err := same(tc.pts, got); err != nil {
				t.Fatal(err)
			}
			if s := scheme(t, b); s != tc.scheme {
				t.Errorf("value scheme %d, want %d", s, tc.scheme)
			}
			t.Logf("%d readings in %d bytes (%.2f bytes a reading)", len(tc.pts), len(b), float64(len(b))/float64(len(tc.pts)))
		})
	}
}

// scheme returns the value scheme byte of a block by walking its header.
func scheme(t *testing.T, b []byte) byte {
	t.Helper()
	pts, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	// Re-encode the header alone to find its length.
	h := appendHeader(nil, pts, timeUnit(pts))
	return b[len(h)]
}

// TestExactSize checks the code's bit count in closed form: n readings at a
// fixed interval with one repeated value cost the header, one bit per
// reading after the second for the time, 6 bits for the first residual's
// length (0) and one bit per value after it (a Rice code of parameter 0 for
// a residual of 0).
func TestExactSize(t *testing.T) {
	for _, n := range []int{3, 9, 17, 1000, 3600} {
		pts := series(n, 1780272000_000000000, 1e9, func(int) float64 { return 14.9 })
		b, err := Encode(pts)
		if err != nil {
			t.Fatal(err)
		}
		header := len(appendHeader(nil, pts, 1e9)) + 3 /* scheme, exponent, significant digits */ + len(appendVarint(nil, 149))
		bits := (n - 2) + 6 + (n - 2)
		if want := header + (bits+7)/8; len(b) != want {
			t.Errorf("n=%d: %d bytes, want %d", n, len(b), want)
		}
	}
}

// TestNoiseBound measures the decimal scheme on white Gaussian noise of
// standard deviation sigma (in units of the printed resolution q) and
// checks the bits per reading against the entropy of the differences,
// log2(sigma_delta sqrt(2 pi e)) with sigma_delta = sigma sqrt 2 (Shannon's
// differential entropy of a normal distribution, discretised at step q), and
// an overhead of at most 2 bits (measured: 0.4 to 0.5 bits, the adaptive
// Rice code's excess over the entropy of the normal differences).
func TestNoiseBound(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for _, sigma := range []float64{10, 1e3, 1e6} {
		const n = 36000
		// + 0 turns a rounded -0 into +0: a negative zero is not a decimal
		// (it sends its block to the XOR scheme).
		pts := series(n, 0, 1e9, func(int) float64 { return (math.Round(sigma*rng.NormFloat64()) + 0) / 1e4 })
		b, err := Encode(pts)
		if err != nil {
			t.Fatal(err)
		}
		bits := 8 * float64(len(b)) / n
		entropy := math.Log2(sigma*math.Sqrt2*math.Sqrt(2*math.Pi*math.E)) + 1 /* time */
		t.Logf("sigma %g q: %.2f bits a reading, entropy %.2f", sigma, bits, entropy)
		if bits < entropy-0.1 || bits > entropy+2 {
			t.Errorf("sigma %g q: %.2f bits a reading; want within [entropy, entropy + 2] = [%.2f, %.2f]", sigma, bits, entropy, entropy+2)
		}
	}
}

func TestEncodeErrors(t *testing.T) {
	if _, err := Encode(nil); err == nil {
		t.Error("empty block accepted")
	}
	if _, err := Encode([]Point{{5, 1}, {5, 2}}); err == nil {
		t.Error("repeated time accepted")
	}
	if _, err := Encode([]Point{{5, 1}, {4, 2}}); err == nil {
		t.Error("decreasing time accepted")
	}
	if _, err := Encode([]Point{{math.MinInt64, 1}, {math.MaxInt64, 2}}); err == nil {
		t.Error("interval beyond int64 accepted")
	}
}

// TestCorrupt checks that every truncation and every single-bit flip of a
// block gives an error or some points, never a panic.
func TestCorrupt(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, pts := range [][]Point{
		series(50, 1e18, 1e9, func(i int) float64 { return float64(rng.IntN(1000)) / 100 }),
		series(50, 1e18, 1e9, func(int) float64 { return rng.Float64() }),
	} {
		b, err := Encode(pts)
		if err != nil {
			t.Fatal(err)
		}
		for k := 0; k < len(b); k++ {
			if _, err := Decode(b[:k]); err == nil && k < len(b)-1 {
				// A shorter prefix may decode only if the tail was padding.
				t.Logf("prefix of %d of %d bytes decoded", k, len(b))
			}
		}
		for bit := 0; bit < 8*len(b); bit++ {
			c := append([]byte(nil), b...)
			c[bit/8] ^= 1 << (bit % 8)
			Decode(c)
		}
	}
}

// TestRandomRoundTrip is a seeded property test: random lengths, intervals
// and decimal values round-trip exactly.
func TestRandomRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 13))
	for k := 0; k < 500; k++ {
		n := 1 + rng.IntN(300)
		digits := 1 + rng.IntN(17)
		tm := rng.Int64N(1 << 62)
		pts := make([]Point, n)
		for i := range pts {
			tm += 1 + rng.Int64N(int64(1)<<uint(1+rng.IntN(40)))
			v := (rng.Float64() - 0.5) * math.Pow(10, float64(rng.IntN(20)-10))
			pts[i] = Point{tm, decimal(strconv.FormatFloat(v, 'g', digits, 64))}
		}
		b, err := Encode(pts)
		if err != nil {
			t.Fatal(err)
		}
		got, err := Decode(b)
		if err != nil {
			t.Fatalf("case %d: %v", k, err)
		}
		if err := same(pts, got); err != nil {
			t.Fatalf("case %d (%d digits): %v", k, digits, err)
		}
	}
}

func FuzzDecode(f *testing.F) {
	for _, pts := range [][]Point{
		{{1, 1}},
		series(20, 1e18, 1e9, func(i int) float64 { return float64(i) / 4 }),
		series(20, 1e18, 1e9, func(i int) float64 { return math.Sqrt(float64(i)) }),
	} {
		b, _ := Encode(pts)
		f.Add(b)
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		pts, err := Decode(b)
		if err != nil {
			return
		}
		// A block that decodes re-encodes to one that decodes to the same
		// points (when the times increase, as Encode requires).
		for i := 1; i < len(pts); i++ {
			if pts[i].Time <= pts[i-1].Time {
				return
			}
		}
		b2, err := Encode(pts)
		if err != nil {
			t.Fatal(err)
		}
		got, err := Decode(b2)
		if err != nil {
			t.Fatal(err)
		}
		if err := same(pts, got); err != nil {
			t.Fatal(err)
		}
	})
}

func appendVarint(b []byte, v int64) []byte { return binaryAppendVarint(b, v) }

// benchPoints is an hour of a strain gauge at 1 Hz printed with 8
// significant digits.
func benchPoints() []Point {
	rng := rand.New(rand.NewPCG(5, 5))
	return series(3600, 1780272000_000000000, 1e9, func(int) float64 {
		return decimal(strconv.FormatFloat(2.5e-4+3e-6*rng.NormFloat64(), 'g', 8, 64))
	})
}

func BenchmarkEncode(b *testing.B) {
	pts := benchPoints()
	b.SetBytes(int64(len(pts)))
	for b.Loop() {
		if _, err := Encode(pts); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N*len(pts))/b.Elapsed().Seconds(), "readings/s")
}

// BenchmarkDecode decodes the same hour with format versions 1 and 2 in
// turn, in each iteration, so that both see the same load of the shared
// machine, and reports the rate of each and their ratio (the replay reads
// every block through DecodeAppend).
func BenchmarkDecode(b *testing.B) {
	pts := benchPoints()
	b1, err := encodeV1(pts)
	if err != nil {
		b.Fatal(err)
	}
	b2, err := Encode(pts)
	if err != nil {
		b.Fatal(err)
	}
	var dst []Point
	var t1, t2 time.Duration
	for b.Loop() {
		start := time.Now()
		if dst, err = DecodeAppend(dst[:0], b1); err != nil {
			b.Fatal(err)
		}
		mid := time.Now()
		if dst, err = DecodeAppend(dst[:0], b2); err != nil {
			b.Fatal(err)
		}
		t1 += mid.Sub(start)
		t2 += time.Since(mid)
	}
	n := float64(b.N * len(pts))
	b.ReportMetric(n/t1.Seconds(), "v1-readings/s")
	b.ReportMetric(n/t2.Seconds(), "v2-readings/s")
	b.ReportMetric(t1.Seconds()/t2.Seconds(), "v2/v1-speed")
}
